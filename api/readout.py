"""Numbers as people read them: every value with its unit, at a precision that fits its error.

One set of rules for the web page (served as text beside each number) and the printed report:

* a resistance (electrical or thermal), a conductance, a power, a COP: 3 significant figures;
* a temperature: tenths of a degree;
* a change: tenths of a percent below 10 %, whole percent from there;
* a time to a limit: whole days; "over a year" past 365 days; "not enough data" without one;
* a duration: seconds, minutes, hours and minutes, or days and hours, whichever reads best.

A missing or non-finite value reads "not enough data", never "nan" or a row of decimals.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime
from typing import Any

__all__ = [
    "NO_DATA",
    "OVER_A_YEAR",
    "change_pct",
    "days_left",
    "duration",
    "estimate_text",
    "evidence_lines",
    "significant",
    "temperature",
    "timestamp",
]

NO_DATA = "not enough data"
_YEAR_2000_MS = 946_684_800_000
OVER_A_YEAR = "over a year"

#: Unit written after a value, by the suffix of its name in the API (``..._ohm``, ...).
_SUFFIX_UNITS: tuple[tuple[str, str], ...] = (
    ("_k_per_w", "K/W"),
    ("_w_per_k", "W/K"),
    ("_v_per_k", "V/K"),
    ("_j_per_k", "J/K"),
    ("_ohm", "Ω"),
    ("_w", "W"),
    ("_v", "V"),
    ("_a", "A"),
    ("_k", "K"),
    ("_l", "L"),
)


def _finite(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def significant(value: Any, unit: str = "", figures: int = 3) -> str:
    """``value`` to ``figures`` significant figures, with its unit (``1.23 Ω``)."""
    x = _finite(value)
    if x is None:
        return NO_DATA
    if x == 0:
        text = "0"
    else:
        digits = figures - 1 - math.floor(math.log10(abs(x)))
        rounded = round(x, digits)
        # rounding may carry into one more digit (9.996 -> 10.0): count again
        if rounded != 0:
            digits = figures - 1 - math.floor(math.log10(abs(rounded)))
        text = f"{rounded:.{max(digits, 0)}f}"
    return f"{text} {unit}".strip()


def temperature(value_c: Any) -> str:
    """A temperature in °C to a tenth of a degree."""
    x = _finite(value_c)
    return NO_DATA if x is None else f"{x:.1f} °C"


def change_pct(value_pct: Any) -> str:
    """A change in percent with its sign: tenths below 10 %, whole percent from there."""
    x = _finite(value_pct)
    if x is None:
        return NO_DATA
    text = f"{x:+.1f}" if abs(round(x, 1)) < 10 else f"{x:+.0f}"
    return ("0.0" if text in ("+0.0", "-0.0") else text) + " %"


def days_left(value_days: Any) -> str:
    """Days to a limit: whole days, "under a day", "over a year" or "not enough data"."""
    x = _finite(value_days)
    if x is None or x < 0:
        return NO_DATA
    if x > 365:
        return OVER_A_YEAR
    if x < 1:
        return "under a day"
    n = round(x)
    return f"{n} day" if n == 1 else f"{n} days"


def duration(value_s: Any) -> str:
    """A duration read at a glance: ``45 s``, ``42 min``, ``5 h 10 min``, ``2 d 3 h``."""
    x = _finite(value_s)
    if x is None or x < 0:
        return NO_DATA
    if x < 90:
        return f"{round(x)} s"
    minutes = round(x / 60)
    if minutes < 90:
        return f"{minutes} min"
    if minutes < 48 * 60:
        return f"{minutes // 60} h {minutes % 60} min" if minutes % 60 else f"{minutes // 60} h"
    hours = round(x / 3600)
    return f"{hours // 24} d {hours % 24} h" if hours % 24 else f"{hours // 24} d"


def timestamp(value_ms: Any) -> str:
    """A time [ms since the epoch] as ``YYYY-MM-DD HH:MM UTC``."""
    x = _finite(value_ms)
    if x is None:
        return NO_DATA
    return datetime.fromtimestamp(x / 1000.0, tz=UTC).strftime("%Y-%m-%d %H:%M UTC")


def estimate_text(key: str, value: Any) -> str:
    """An estimate by its key: its value with the unit and precision its kind calls for."""
    if key.endswith("change_pct") or key.endswith("_pct_per_30d"):
        text = change_pct(value)
        return text if text == NO_DATA or key.endswith("change_pct") else text + " per 30 days"
    if key.endswith("days_to_wear_limit") or key.endswith("_days"):
        return days_left(value)
    if key.endswith("_c"):
        return temperature(value)
    if key.endswith("_h"):
        x = _finite(value)
        return NO_DATA if x is None else duration(x * 3600)
    for suffix, unit in _SUFFIX_UNITS:
        if key.endswith(suffix):
            return significant(value, unit)
    return significant(value)


def evidence_lines(evidence: dict[str, Any]) -> list[tuple[str, str]]:
    """An alert's evidence as (name, text) pairs: numbers with units and sensible precision,
    times as dates, words as given; nested objects and lists are left out."""
    lines: list[tuple[str, str]] = []
    for name, value in evidence.items():
        label = name.replace("_", " ")
        if isinstance(value, bool):
            lines.append((label, "yes" if value else "no"))
        elif isinstance(value, str):
            lines.append((label, value))
        elif isinstance(value, int | float):
            lines.append((_evidence_label(name), _evidence_value(name, value)))
    return lines


def _evidence_label(name: str) -> str:
    suffixes = ("_ms", "_s", "_pct", "_c", *(s for s, _unit in _SUFFIX_UNITS))
    for suffix in suffixes:
        if name.endswith(suffix):
            name = name[: -len(suffix)]
            break
    return name.replace("_", " ").replace(".", " ").strip()


def _evidence_value(name: str, value: float) -> str:
    if name.endswith("_ms"):
        # a time after 2000-01-01 is a moment; a smaller one is a span
        return timestamp(value) if value >= _YEAR_2000_MS else duration(value / 1000.0)
    if name.endswith("_s"):
        return duration(value)
    if name.endswith("_pct"):
        x = _finite(value)
        return NO_DATA if x is None else f"{x:.1f} %"
    if name == "samples" or name.endswith("_count") or name.endswith("_n"):
        return f"{int(value)}"
    return estimate_text(name, value)
