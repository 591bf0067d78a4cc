"""Per-field validation of one published reading: limits, types and timestamps.

Plausibility limits (documented in DEVELOPERS.md): temperatures -60..150 °C (beyond the range of
bismuth-telluride modules and of the sensors fitted to them), current 0..50 A (the largest
single-stage modules are rated near 30 A), voltage -60..60 V (a 48 V supply with headroom;
negative while the module is off and its Seebeck voltage floats), relative humidity 0..100 %.
Timestamps must not be before 2000-01-01.

The interval summaries (``SUMMARY_TYPES``; ingest/PAYLOAD.md) are optional, each checked
against its own limits when sent: a unit that samples fast but reports slowly sends the means
over the interval its reading closes.

The face probes (``t_cold``, ``t_hot``) are optional: a unit without such a probe leaves the
field out. A face temperature that is sent is checked like every other temperature, and an
explicit ``null`` is refused as before (a unit either has the probe or omits the field).
"""

from __future__ import annotations

import math
from datetime import datetime
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, Strict, ValidationError, field_validator

EPOCH_2000_S = 946_684_800.0

T_MIN_C, T_MAX_C = -60.0, 150.0
I_MIN_A, I_MAX_A = 0.0, 50.0
V_MIN_V, V_MAX_V = -60.0, 60.0

StrictFloat = Annotated[float, Strict(), Field(allow_inf_nan=False)]
#: Longest interval a summary may cover: a day [s].
INTERVAL_MAX_S = 86_400.0
Temperature = Annotated[StrictFloat, Field(ge=T_MIN_C, le=T_MAX_C)]
Current = Annotated[StrictFloat, Field(ge=I_MIN_A, le=I_MAX_A)]

Interval = Annotated[StrictFloat, Field(gt=0.0, le=INTERVAL_MAX_S)]
CurrentSquared = Annotated[StrictFloat, Field(ge=0.0, le=I_MAX_A**2)]
Power = Annotated[StrictFloat, Field(ge=0.0, le=V_MAX_V * I_MAX_A)]
Share = Annotated[StrictFloat, Field(ge=0.0, le=1.0)]

#: The optional interval summaries, each with the limits it is checked against: an interval of
#: up to a day [s], the temperatures' limits [°C], the current's [A] and its square's [A²],
#: power up to the largest voltage times the largest current [W], a share [-].
SUMMARY_TYPES: dict[str, Any] = {
    "interval_s": Interval,
    "t_cabinet_mean": Temperature,
    "t_cold_mean": Temperature,
    "t_hot_mean": Temperature,
    "t_ambient_mean": Temperature,
    "current_mean": Current,
    "current_sq_mean": CurrentSquared,
    "power_mean": Power,
    "on_share": Share,
    "t_cabinet_min": Temperature,
    "t_cabinet_max": Temperature,
}


class TelemetryItem(BaseModel):
    """One reading as published; temperatures in °C; ``t_cold``/``t_hot`` None: no such probe."""

    model_config = ConfigDict(extra="ignore")

    ts: Any
    seq: Annotated[int, Strict(), Field(ge=0)] | None = None
    t_cabinet: Temperature
    t_cold: Temperature | None = None
    t_hot: Temperature | None = None
    t_ambient: Temperature
    current: Current
    voltage: Annotated[StrictFloat, Field(ge=V_MIN_V, le=V_MAX_V)]
    rh: Annotated[StrictFloat, Field(ge=0.0, le=100.0)] | None = None
    door_open: Annotated[bool, Strict()] | None = None
    # Interval summaries (None: not sent), as listed in ``SUMMARY_TYPES``.
    interval_s: Interval | None = None
    t_cabinet_mean: Temperature | None = None
    t_cold_mean: Temperature | None = None
    t_hot_mean: Temperature | None = None
    t_ambient_mean: Temperature | None = None
    current_mean: Current | None = None
    current_sq_mean: CurrentSquared | None = None
    power_mean: Power | None = None
    on_share: Share | None = None
    t_cabinet_min: Temperature | None = None
    t_cabinet_max: Temperature | None = None

    @field_validator("t_cold", "t_hot", mode="before")
    @classmethod
    def _probe_sent_as_number(cls, value: Any) -> Any:
        # Only a value that was sent reaches this: an absent probe keeps its default.
        if value is None:
            raise ValueError("Input should be a valid number; leave the field out without a probe")
        return value

    @field_validator(*SUMMARY_TYPES, mode="before")
    @classmethod
    def _summary_sent_as_number(cls, value: Any) -> Any:
        # As for the probes: a summary is either sent as a number or left out.
        if value is None:
            raise ValueError("Input should be a valid number; leave the summary out if not kept")
        return value

    @field_validator("ts")
    @classmethod
    def _ts_seconds(cls, value: Any) -> float:
        return parse_timestamp(value)


def parse_timestamp(value: Any) -> float:
    """Unix seconds from an RFC 3339 string with offset or a number of seconds."""
    if isinstance(value, bool):
        raise ValueError("timestamp must be an RFC 3339 string or Unix seconds, not a boolean")
    if isinstance(value, int | float):
        seconds = float(value)
        if not math.isfinite(seconds):
            raise ValueError("timestamp must be finite")
    elif isinstance(value, str):
        if len(value) > 40 or "T" not in value.upper():
            raise ValueError(f"timestamp {value[:40]!r} is not RFC 3339 (date 'T' time offset)")
        try:
            parsed = datetime.fromisoformat(value)
        except ValueError as exc:
            raise ValueError(f"timestamp {value!r} is not RFC 3339") from exc
        if parsed.tzinfo is None or parsed.utcoffset() is None:
            raise ValueError(f"timestamp {value!r} has no UTC offset")
        seconds = parsed.timestamp()
    else:
        raise ValueError("timestamp must be an RFC 3339 string or Unix seconds")
    if seconds < EPOCH_2000_S:
        raise ValueError("timestamp is before 2000-01-01")
    if seconds > 32_503_680_000.0:  # year 3000: keeps millisecond integers in range
        raise ValueError("timestamp is after year 3000")
    return seconds


_CODE_BY_PYDANTIC = {
    "missing": "missing_field",
    "greater_than_equal": "out_of_range",
    "less_than_equal": "out_of_range",
    "greater_than": "out_of_range",
    "less_than": "out_of_range",
    "finite_number": "not_finite",
}


def describe_errors(exc: ValidationError) -> tuple[str, str]:
    """(reject code, sentence naming up to four fields) of a refused item."""
    errors = exc.errors(include_url=False)
    # A missing field says most about a malformed item; report it first.
    errors.sort(key=lambda err: err["type"] != "missing")
    first = errors[0]
    name = ".".join(str(p) for p in first["loc"]) or "item"
    code = _CODE_BY_PYDANTIC.get(first["type"], "wrong_type")
    if name == "ts" and code == "wrong_type":
        code = "bad_timestamp"
    parts = []
    for err in errors[:4]:
        loc = ".".join(str(p) for p in err["loc"]) or "item"
        got = "" if err["type"] == "missing" else f" (got {str(err.get('input'))[:40]})"
        parts.append(f"{loc}: {err['msg']}{got}")
    return code, "; ".join(parts)
