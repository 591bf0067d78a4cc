"""RFC 3339 UTC text for the millisecond timestamps the store keeps, and durations as the
query string takes them."""

from __future__ import annotations

import re
from datetime import UTC, datetime


def ms_to_rfc3339(ms: int | None) -> str | None:
    if ms is None:
        return None
    moment = datetime.fromtimestamp(ms / 1000.0, tz=UTC)
    return moment.isoformat(timespec="milliseconds").replace("+00:00", "Z")


def rfc3339_to_ms(text: str) -> int:
    """Milliseconds from RFC 3339 text with offset (or Unix seconds as text)."""
    try:
        return round(float(text) * 1000.0)
    except ValueError:
        pass
    moment = datetime.fromisoformat(text)
    if moment.tzinfo is None:
        raise ValueError(f"time {text!r} needs a UTC offset")
    return round(moment.timestamp() * 1000.0)


_DURATION_UNITS_S = {"": 1, "s": 1, "m": 60, "h": 3600, "d": 86_400}
#: A duration as the query string takes it: seconds, or a whole number of s, m, h or d.
DURATION_PATTERN = r"^[1-9][0-9]{0,6}[smhd]?$"


def duration_to_s(text: str) -> int:
    """Seconds of ``"3600"``, ``"15m"``, ``"1h"`` or ``"7d"``; ValueError otherwise."""
    if re.fullmatch(DURATION_PATTERN, text) is None:
        raise ValueError(f"{text!r} is not a duration such as 300, 15m, 1h or 1d")
    unit = text[-1] if text[-1] in "smhd" else ""
    return int(text.rstrip("smhd")) * _DURATION_UNITS_S[unit]
