"""RFC 3339 UTC text for the millisecond timestamps the store keeps."""

from __future__ import annotations

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
