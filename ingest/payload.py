"""Validation of what devices publish: topics, JSON readings, batches and SenML packs.

Every refusal is a ``Reject`` with a short code and a sentence naming the field; a batch with
some bad items keeps the good ones. Nothing here raises on any input: the fuzz tests hold it to
that.

Plausibility limits (documented in DEVELOPERS.md): temperatures -60..150 °C (beyond the range of
bismuth-telluride modules and of the sensors fitted to them), current 0..50 A (the largest
single-stage modules are rated near 30 A), voltage -60..60 V (a 48 V supply with headroom;
negative while the module is off and its Seebeck voltage floats), relative humidity 0..100 %.
Timestamps must not be more than ``future_tolerance_s`` ahead of the receiving clock and not
before 2000-01-01.

SenML (RFC 8428): base name, base time, base unit and base value carry forward as in section 4.5;
a resolved time below 2**28 is relative to now (section 4.5.3). No maintained Python SenML
library exists, so resolution is done here.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import datetime
from typing import Annotated, Any

import orjson
from pydantic import BaseModel, ConfigDict, Field, Strict, ValidationError, field_validator

from tecfleet.ingest.db import Reading, Reject, StatusUpdate

DEVICE_ID_RE = re.compile(r"^[A-Za-z0-9_.\-]{1,64}$")
EPOCH_2000_S = 946_684_800.0
SENML_RELATIVE_LIMIT_S = 2**28

T_MIN_C, T_MAX_C = -60.0, 150.0
I_MIN_A, I_MAX_A = 0.0, 50.0
V_MIN_V, V_MAX_V = -60.0, 60.0

SENML_UNITS = {
    "t_cabinet": "Cel",
    "t_cold": "Cel",
    "t_hot": "Cel",
    "t_ambient": "Cel",
    "current": "A",
    "voltage": "V",
    "rh": "%RH",
}
SENML_BOOLEANS = {"door_open"}
SENML_KEYS = {"bn", "bt", "bu", "bv", "bs", "bver", "n", "u", "v", "vs", "vb", "vd", "s", "t", "ut"}

StrictFloat = Annotated[float, Strict(), Field(allow_inf_nan=False)]


class TelemetryItem(BaseModel):
    """One reading as published; temperatures in °C."""

    model_config = ConfigDict(extra="ignore")

    ts: Any
    seq: Annotated[int, Strict(), Field(ge=0)] | None = None
    t_cabinet: Annotated[StrictFloat, Field(ge=T_MIN_C, le=T_MAX_C)]
    t_cold: Annotated[StrictFloat, Field(ge=T_MIN_C, le=T_MAX_C)]
    t_hot: Annotated[StrictFloat, Field(ge=T_MIN_C, le=T_MAX_C)]
    t_ambient: Annotated[StrictFloat, Field(ge=T_MIN_C, le=T_MAX_C)]
    current: Annotated[StrictFloat, Field(ge=I_MIN_A, le=I_MAX_A)]
    voltage: Annotated[StrictFloat, Field(ge=V_MIN_V, le=V_MAX_V)]
    rh: Annotated[StrictFloat, Field(ge=0.0, le=100.0)] | None = None
    door_open: Annotated[bool, Strict()] | None = None

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


@dataclass
class Parsed:
    """What one MQTT message turned into."""

    readings: list[Reading] = field(default_factory=list)
    rejects: list[Reject] = field(default_factory=list)
    status: StatusUpdate | None = None


_CODE_BY_PYDANTIC = {
    "missing": "missing_field",
    "greater_than_equal": "out_of_range",
    "less_than_equal": "out_of_range",
    "greater_than": "out_of_range",
    "less_than": "out_of_range",
    "finite_number": "not_finite",
}


def _describe(exc: ValidationError) -> tuple[str, str]:
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


def split_topic(topic: str, prefix: str) -> tuple[str, str] | None:
    """(device_id, kind) of ``<prefix>/<device_id>/<kind>``, or None when it is not ours."""
    head = prefix + "/"
    if not topic.startswith(head):
        return None
    rest = topic[len(head) :].split("/")
    if len(rest) != 2:
        return None
    return rest[0], rest[1]


def _is_senml(doc: Any) -> bool:
    return (
        isinstance(doc, list)
        and bool(doc)
        and all(isinstance(rec, dict) for rec in doc)
        and any(("n" in rec or "bn" in rec) for rec in doc)
        and all(set(rec) <= SENML_KEYS | {key for key in rec if key.endswith("_")} for rec in doc)
    )


def _senml_items(
    pack: list[dict[str, Any]], now_s: float
) -> tuple[list[dict[str, Any]], list[tuple[str, str]]]:
    """Resolve a SenML pack into reading dicts grouped by time, plus per-record problems."""
    base_name, base_time, base_unit, base_value = "", 0.0, None, 0.0
    groups: dict[float, dict[str, Any]] = {}
    problems: list[tuple[str, str]] = []
    for index, rec in enumerate(pack):
        if "bver" in rec and rec["bver"] not in (10,) and not isinstance(rec["bver"], bool):
            problems.append(
                ("senml_error", f"record {index}: unsupported SenML version {rec['bver']!r}")
            )
            continue
        if "bn" in rec:
            if not isinstance(rec["bn"], str):
                problems.append(("senml_error", f"record {index}: bn must be a string"))
                continue
            base_name = rec["bn"]
        for key in ("bt", "bv"):
            if key in rec and (isinstance(rec[key], bool) or not isinstance(rec[key], int | float)):
                problems.append(("senml_error", f"record {index}: {key} must be a number"))
                break
        else:
            base_time = float(rec.get("bt", base_time))
            base_value = float(rec.get("bv", base_value))
            if "bu" in rec:
                base_unit = rec["bu"]
            if "n" not in rec:
                continue
            name = rec["n"]
            if not isinstance(name, str):
                problems.append(("senml_error", f"record {index}: n must be a string"))
                continue
            channel = name if name in SENML_UNITS or name in SENML_BOOLEANS else None
            if channel is None:
                full = base_name + name
                channel = re.split(r"[:/]", full)[-1] if full else None
            if channel not in SENML_UNITS and channel not in SENML_BOOLEANS:
                problems.append(("senml_error", f"record {index}: unknown name {name!r}"))
                continue
            t = rec.get("t", 0.0)
            if isinstance(t, bool) or not isinstance(t, int | float):
                problems.append(("senml_error", f"record {index}: t must be a number"))
                continue
            when = base_time + float(t)
            if when < SENML_RELATIVE_LIMIT_S:
                when = now_s + when
            unit = rec.get("u", base_unit)
            if channel in SENML_BOOLEANS:
                if "vb" not in rec:
                    problems.append(
                        ("senml_error", f"record {index}: {channel} needs a boolean value (vb)")
                    )
                    continue
                value: Any = rec["vb"]
            else:
                if unit is not None and unit != SENML_UNITS[channel]:
                    problems.append(
                        (
                            "bad_unit",
                            f"record {index}: {channel} unit {unit!r}, "
                            f"expected {SENML_UNITS[channel]!r}",
                        )
                    )
                    continue
                if "v" not in rec:
                    problems.append(
                        ("senml_error", f"record {index}: {channel} needs a numeric value (v)")
                    )
                    continue
                raw = rec["v"]
                value = (
                    raw + base_value
                    if isinstance(raw, int | float) and not isinstance(raw, bool)
                    else raw
                )
            groups.setdefault(when, {"ts": when})[channel] = value
    return [groups[key] for key in sorted(groups)], problems


def parse_message(
    topic: str,
    payload: bytes,
    *,
    prefix: str,
    now_s: float,
    future_tolerance_s: float = 300.0,
    max_payload_bytes: int = 1_048_576,
) -> Parsed:
    """Turn one MQTT message into readings, rejects and status changes. Never raises."""
    out = Parsed()
    where = split_topic(topic, prefix)
    if where is None:
        out.rejects.append(
            Reject(
                topic,
                payload,
                "bad_topic",
                f"topic {topic[:200]!r} is not {prefix}/<device_id>/telemetry",
            )
        )
        return out
    device_id, kind = where
    if not DEVICE_ID_RE.match(device_id):
        out.rejects.append(
            Reject(
                topic,
                payload,
                "bad_device_id",
                f"device id {device_id[:80]!r} must match [A-Za-z0-9_.-]{{1,64}}",
            )
        )
        return out
    if kind == "status":
        status_text = bytes(payload).strip().lower()
        if status_text in (b"online", b"offline"):
            out.status = StatusUpdate(device_id, status_text.decode(), int(now_s * 1000))
        elif status_text:
            out.rejects.append(
                Reject(
                    topic,
                    payload,
                    "bad_status",
                    "status payload must be 'online' or 'offline'",
                    device_id,
                )
            )
        return out
    if kind != "telemetry":
        out.rejects.append(
            Reject(topic, payload, "bad_topic", f"unknown topic kind {kind[:40]!r}", device_id)
        )
        return out
    if len(payload) > max_payload_bytes:
        out.rejects.append(
            Reject(
                topic,
                payload,
                "payload_too_large",
                f"{len(payload)} bytes, limit {max_payload_bytes}",
                device_id,
            )
        )
        return out
    try:
        # orjson checks the UTF-8 itself; the slower decode only runs to explain a refusal.
        doc = orjson.loads(payload)
    except orjson.JSONDecodeError as exc:
        try:
            payload.decode("utf-8")
        except UnicodeDecodeError as bad:
            code, why = "not_utf8", f"payload is not UTF-8: {bad.reason} at byte {bad.start}"
        else:
            code, why = "invalid_json", f"payload is not JSON: {exc}"
        out.rejects.append(Reject(topic, payload, code, why, device_id))
        return out

    items: list[Any]
    if _is_senml(doc):
        items, problems = _senml_items(doc, now_s)
        for reason_code, text in problems:
            out.rejects.append(Reject(topic, payload, reason_code, text, device_id))
        if not items and not problems:
            out.rejects.append(
                Reject(topic, payload, "senml_error", "SenML pack holds no readings", device_id)
            )
        single = False
    elif isinstance(doc, dict):
        items, single = [doc], True
    elif isinstance(doc, list):
        items, single = doc, False
        if not items:
            out.rejects.append(
                Reject(topic, payload, "empty_batch", "batch array is empty", device_id)
            )
    else:
        out.rejects.append(
            Reject(
                topic,
                payload,
                "wrong_shape",
                "payload must be a JSON object, an array of objects or a SenML pack",
                device_id,
            )
        )
        return out

    limit_s = now_s + future_tolerance_s
    for index, item in enumerate(items):
        raw = payload if single else orjson.dumps(item)
        item_no = None if single else index
        if not isinstance(item, dict):
            out.rejects.append(
                Reject(
                    topic, raw, "wrong_shape", "batch item is not a JSON object", device_id, item_no
                )
            )
            continue
        claimed = item.get("device_id")
        if claimed is not None and claimed != device_id:
            out.rejects.append(
                Reject(
                    topic,
                    raw,
                    "device_mismatch",
                    f"payload names device {str(claimed)[:64]!r} but the topic names {device_id!r}",
                    device_id,
                    item_no,
                )
            )
            continue
        try:
            valid = TelemetryItem.model_validate(item)
        except ValidationError as exc:
            code, reason = _describe(exc)
            out.rejects.append(Reject(topic, raw, code, reason, device_id, item_no))
            continue
        ts_s: float = valid.ts
        if ts_s > limit_s:
            out.rejects.append(
                Reject(
                    topic,
                    raw,
                    "future_timestamp",
                    f"ts is {ts_s - now_s:.0f} s ahead of the receiving clock "
                    f"(limit {future_tolerance_s:.0f} s)",
                    device_id,
                    item_no,
                )
            )
            continue
        out.readings.append(
            Reading(
                device_id=device_id,
                ts_ms=round(ts_s * 1000.0),
                t_cabinet=valid.t_cabinet,
                t_cold=valid.t_cold,
                t_hot=valid.t_hot,
                t_ambient=valid.t_ambient,
                current=valid.current,
                voltage=valid.voltage,
                seq=valid.seq,
                rh=valid.rh,
                door_open=valid.door_open,
            )
        )
    return out
