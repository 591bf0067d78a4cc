"""SenML packs (RFC 8428) resolved into reading dicts.

Base name, base time, base unit and base value carry forward as in section 4.5; a resolved time
below 2**28 is relative to now (section 4.5.3). No maintained Python SenML library exists, so
resolution is done here. A record that cannot be used becomes a (code, sentence) problem; the
other records of the pack are kept.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

from tecfleet.ingest.errors import PayloadError

SENML_RELATIVE_LIMIT_S = 2**28

SENML_UNITS: dict[str, str | None] = {
    "t_cabinet": "Cel",
    "t_cold": "Cel",
    "t_hot": "Cel",
    "t_ambient": "Cel",
    "current": "A",
    "voltage": "V",
    "rh": "%RH",
    # The interval summaries (ingest/PAYLOAD.md). A² has no SenML unit: that record goes
    # without one.
    "interval_s": "s",
    "t_cabinet_mean": "Cel",
    "t_cold_mean": "Cel",
    "t_hot_mean": "Cel",
    "t_ambient_mean": "Cel",
    "current_mean": "A",
    "current_sq_mean": None,
    "power_mean": "W",
    "on_share": "/",
    "t_cabinet_min": "Cel",
    "t_cabinet_max": "Cel",
}
SENML_BOOLEANS = {"door_open"}
SENML_KEYS = {"bn", "bt", "bu", "bv", "bs", "bver", "n", "u", "v", "vs", "vb", "vd", "s", "t", "ut"}


def is_senml(doc: Any) -> bool:
    """True when a decoded payload is a SenML pack rather than a batch of reading objects."""
    return (
        isinstance(doc, list)
        and bool(doc)
        and all(isinstance(rec, dict) for rec in doc)
        and any(("n" in rec or "bn" in rec) for rec in doc)
        and all(set(rec) <= SENML_KEYS | {key for key in rec if key.endswith("_")} for rec in doc)
    )


@dataclass
class _Base:
    """Base fields carried forward from record to record (RFC 8428 section 4.5)."""

    name: str = ""
    time: float = 0.0
    unit: Any = None
    value: float = 0.0


def senml_items(
    pack: list[dict[str, Any]], now_s: float
) -> tuple[list[dict[str, Any]], list[tuple[str, str]]]:
    """Resolve a SenML pack into reading dicts grouped by time, plus per-record problems."""
    base = _Base()
    groups: dict[float, dict[str, Any]] = {}
    problems: list[tuple[str, str]] = []
    for index, rec in enumerate(pack):
        try:
            _update_base(index, rec, base)
            if "n" not in rec:
                continue
            when, channel, value = _resolve_record(index, rec, base, now_s)
        except PayloadError as problem:
            # One record cannot be used; the rest of the pack still can.
            problems.append((problem.code, problem.detail))
            continue
        groups.setdefault(when, {"ts": when})[channel] = value
    return [groups[key] for key in sorted(groups)], problems


def _update_base(index: int, rec: dict[str, Any], base: _Base) -> None:
    if "bver" in rec and rec["bver"] not in (10,) and not isinstance(rec["bver"], bool):
        raise PayloadError(
            "senml_error", f"record {index}: unsupported SenML version {rec['bver']!r}"
        )
    if "bn" in rec:
        if not isinstance(rec["bn"], str):
            raise PayloadError("senml_error", f"record {index}: bn must be a string")
        base.name = rec["bn"]
    for key in ("bt", "bv"):
        if key in rec and (isinstance(rec[key], bool) or not isinstance(rec[key], int | float)):
            raise PayloadError("senml_error", f"record {index}: {key} must be a number")
    base.time = float(rec.get("bt", base.time))
    base.value = float(rec.get("bv", base.value))
    if "bu" in rec:
        base.unit = rec["bu"]


def _resolve_record(
    index: int, rec: dict[str, Any], base: _Base, now_s: float
) -> tuple[float, str, Any]:
    """(resolved time [s], channel, value) of one record that names a measurement."""
    name = rec["n"]
    if not isinstance(name, str):
        raise PayloadError("senml_error", f"record {index}: n must be a string")
    channel = name if name in SENML_UNITS or name in SENML_BOOLEANS else None
    if channel is None:
        full = base.name + name
        channel = re.split(r"[:/]", full)[-1] if full else None
    if channel is None or (channel not in SENML_UNITS and channel not in SENML_BOOLEANS):
        raise PayloadError("senml_error", f"record {index}: unknown name {name!r}")
    t = rec.get("t", 0.0)
    if isinstance(t, bool) or not isinstance(t, int | float):
        raise PayloadError("senml_error", f"record {index}: t must be a number")
    when = base.time + float(t)
    if when < SENML_RELATIVE_LIMIT_S:
        when = now_s + when
    return when, channel, _record_value(index, rec, channel, base)


def _record_value(index: int, rec: dict[str, Any], channel: str, base: _Base) -> Any:
    unit = rec.get("u", base.unit)
    if channel in SENML_BOOLEANS:
        if "vb" not in rec:
            raise PayloadError(
                "senml_error", f"record {index}: {channel} needs a boolean value (vb)"
            )
        return rec["vb"]
    expected = SENML_UNITS[channel]
    if unit is not None and unit != expected:
        wanted = "none (SenML has no unit for it)" if expected is None else repr(expected)
        raise PayloadError(
            "bad_unit", f"record {index}: {channel} unit {unit!r}, expected {wanted}"
        )
    if "v" not in rec:
        raise PayloadError("senml_error", f"record {index}: {channel} needs a numeric value (v)")
    raw = rec["v"]
    return raw + base.value if isinstance(raw, int | float) and not isinstance(raw, bool) else raw
