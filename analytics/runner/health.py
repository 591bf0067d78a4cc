"""What is served: a device's newest estimates and the history of one estimate key."""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.ingest.db import analysis as analysis_db

__all__ = ["estimate_history", "latest_health"]


def latest_health(engine: Engine, device_id: str) -> dict[str, dict[str, Any]]:
    """Newest estimate of every key of a device, in the contract's shape plus extras.

    Each value is ``{"value", "stderr", "n", "reliable", "at", "note", "basis", "reason"}``
    (``basis``: the channels and method it rests on; ``reason``: why it is not reliable, None
    where it is); keys whose newest rows hold no value (the data could not support one) fall
    back to their newest valued row, and a key that never had a value is served with its
    newest row (value None, not reliable, with the reason).
    """
    rows = analysis_db.latest_estimates(engine, device_id)
    return {r.key: _row_dict(r) for r in sorted(rows, key=lambda r: str(r.key))}


def estimate_history(
    engine: Engine,
    device_id: str,
    key: str,
    start_ms: int | None = None,
    end_ms: int | None = None,
) -> list[dict[str, Any]]:
    """Stored estimates of one key, oldest first (``start_ms`` inclusive, ``end_ms`` exclusive)."""
    rows = analysis_db.estimate_rows(engine, device_id, key, start_ms, end_ms)
    return [_row_dict(r) | {"at_ms": int(r.at_ms)} for r in rows]


def _row_dict(r: Any) -> dict[str, Any]:
    return {
        "value": r.value,
        "stderr": r.stderr,
        "n": int(r.n),
        "reliable": bool(r.reliable),
        "at": _rfc3339(int(r.at_ms)),
        "note": r.note,
        "basis": r.basis,
        "reason": None if r.reliable else r.note,
    }


def _rfc3339(ms: int) -> str:
    return datetime.fromtimestamp(ms / 1000.0, tz=UTC).isoformat(timespec="milliseconds")[:-6] + "Z"
