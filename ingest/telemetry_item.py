"""Per-field validation of one published reading: limits, types and timestamps.

Plausibility limits (documented in DEVELOPERS.md): temperatures -60..150 °C (beyond the range of
bismuth-telluride modules and of the sensors fitted to them), current 0..50 A (the largest
single-stage modules are rated near 30 A), voltage -60..60 V (a 48 V supply with headroom;
negative while the module is off and its Seebeck voltage floats), relative humidity 0..100 %.
Timestamps must not be before 2000-01-01.

The face probes (``t_cold``, ``t_hot``) are optional: a unit without such a probe leaves the
field out. A face temperature that is sent is checked like every other temperature, and an
explicit ``null`` is refused as before (a unit either has the probe or omits the field). The
interval summaries (``interval_s``, the means, ``on_share``, the cabinet's least and greatest)
are optional in the same way: sent as numbers within their limits, or left out.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from datetime import datetime
from typing import Annotated, Any, NotRequired, Required

from pydantic import (
    AfterValidator,
    BeforeValidator,
    Field,
    Strict,
    TypeAdapter,
    ValidationError,
)
from typing_extensions import TypedDict

EPOCH_2000_S = 946_684_800.0

T_MIN_C, T_MAX_C = -60.0, 150.0
I_MIN_A, I_MAX_A = 0.0, 50.0
V_MIN_V, V_MAX_V = -60.0, 60.0

StrictFloat = Annotated[float, Strict(), Field(allow_inf_nan=False)]
#: Longest interval a summary may cover: a day [s].
INTERVAL_MAX_S = 86_400.0


@dataclass(frozen=True, slots=True)
class Channel:
    """One numeric field of a reading: its plausible range and whether it must be sent.

    ``probe``: an optional face probe, absent when the unit has none, but refused when sent as
    ``null`` (a unit either has the probe or omits the field); ``summary``: an interval summary,
    likewise sent as a number or left out; any other optional field may be ``null``.
    ``low_open``: the low limit itself is refused (an interval must last).
    """

    name: str
    low: float
    high: float
    required: bool = False
    probe: bool = False
    summary: bool = False
    low_open: bool = False


#: The numeric fields in the order their errors are reported; one line per field.
CHANNELS: tuple[Channel, ...] = (
    Channel("t_cabinet", T_MIN_C, T_MAX_C, required=True),  # [°C]
    Channel("t_cold", T_MIN_C, T_MAX_C, probe=True),  # [°C]
    Channel("t_hot", T_MIN_C, T_MAX_C, probe=True),  # [°C]
    Channel("t_ambient", T_MIN_C, T_MAX_C, required=True),  # [°C]
    Channel("current", I_MIN_A, I_MAX_A, required=True),  # [A]
    Channel("voltage", V_MIN_V, V_MAX_V, required=True),  # [V]
    Channel("rh", 0.0, 100.0),  # [%]
    # Interval summaries over the interval ending at ts (see ingest/PAYLOAD.md).
    Channel("interval_s", 0.0, INTERVAL_MAX_S, summary=True, low_open=True),  # [s]
    Channel("t_cabinet_mean", T_MIN_C, T_MAX_C, summary=True),  # [°C]
    Channel("t_cold_mean", T_MIN_C, T_MAX_C, summary=True),  # [°C]
    Channel("t_hot_mean", T_MIN_C, T_MAX_C, summary=True),  # [°C]
    Channel("t_ambient_mean", T_MIN_C, T_MAX_C, summary=True),  # [°C]
    Channel("current_mean", I_MIN_A, I_MAX_A, summary=True),  # [A]
    Channel("current_sq_mean", 0.0, I_MAX_A**2, summary=True),  # [A²]
    Channel("power_mean", 0.0, V_MAX_V * I_MAX_A, summary=True),  # [W]
    Channel("on_share", 0.0, 1.0, summary=True),  # [-]
    Channel("t_cabinet_min", T_MIN_C, T_MAX_C, summary=True),  # [°C]
    Channel("t_cabinet_max", T_MIN_C, T_MAX_C, summary=True),  # [°C]
)


def _probe_sent_as_number(value: Any) -> Any:
    # Only a value that was sent reaches this: an absent probe stays absent.
    if value is None:
        raise ValueError("Input should be a valid number; leave the field out without a probe")
    return value


def _summary_sent_as_number(value: Any) -> Any:
    # As for the probes: a summary is either sent as a number or left out.
    if value is None:
        raise ValueError("Input should be a valid number; leave the summary out if not kept")
    return value


def _channel_type(channel: Channel) -> Any:
    low = Field(gt=channel.low) if channel.low_open else Field(ge=channel.low)
    number = Annotated[StrictFloat, low, Field(le=channel.high)]
    if channel.required:
        return Required[number]
    if channel.probe:
        return NotRequired[Annotated[number | None, BeforeValidator(_probe_sent_as_number)]]
    if channel.summary:
        return NotRequired[Annotated[number | None, BeforeValidator(_summary_sent_as_number)]]
    return NotRequired[number | None]


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


def _item_type() -> Any:
    """The TypedDict of one reading as published, from :data:`CHANNELS`."""
    fields: dict[str, Any] = {
        "ts": Required[Annotated[Any, AfterValidator(parse_timestamp)]],
        "seq": NotRequired[Annotated[int, Strict(), Field(ge=0)] | None],
        **{channel.name: _channel_type(channel) for channel in CHANNELS},
        "door_open": NotRequired[Annotated[bool, Strict()] | None],
    }
    make: Any = TypedDict  # a field table, not a class statement: one line per channel above
    return make("TelemetryItem", fields)


#: One reading as published (a dict of the fields sent; temperatures in °C). Validated in
#: pydantic-core without a model instance per reading.
TelemetryItem = _item_type()

#: Validates one item into a dict of the fields sent; raises ``ValidationError`` (see
#: :func:`describe_errors`).
validate_item: Callable[[Any], dict[str, Any]] = TypeAdapter(TelemetryItem).validate_python


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
