"""Estimates of one device: the newest of every key, and one key's history."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics import runner
from tecfleet.api.services.devices import require_device


def latest_health(engine: Engine, device_id: str) -> dict[str, Any]:
    """Newest estimate of every key: ``{"value", "stderr", "n", "reliable", "at", "note"}``."""
    require_device(engine, device_id)
    return dict(runner.latest_health(engine, device_id))


def estimate_history(
    engine: Engine, device_id: str, key: str, start_ms: int | None, end_ms: int | None
) -> dict[str, Any]:
    """History of one estimate key, oldest first, as one page."""
    items = runner.estimate_history(engine, device_id, key, start_ms, end_ms)
    return {"items": items, "next_cursor": None}
