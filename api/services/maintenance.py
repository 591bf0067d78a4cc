"""Maintenance windows: holding the notices of a device or a site for a while."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts as rules
from tecfleet.api.schemas.maintenance import MaintenanceOut
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import alert_records


def _maintenance_out(r: Any) -> MaintenanceOut:
    return MaintenanceOut(
        id=int(r.id),
        device_id=r.device_id,
        site=r.site,
        start=ms_to_rfc3339(r.start_ms),
        end=ms_to_rfc3339(r.end_ms),
        reason=r.reason,
        created_by=r.created_by,
    )


def add_window(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None,
    site: str | None,
    reason: str | None,
    created_by: str,
) -> MaintenanceOut:
    """Store a window (AlertError when it names neither or both, or ends before it starts)."""
    window_id = rules.add_maintenance(
        engine,
        start_ms,
        end_ms,
        device_id=device_id,
        site=site,
        reason=reason,
        created_by=created_by,
    )
    return _maintenance_out(alert_records.maintenance_window(engine, window_id))


def list_windows(engine: Engine) -> list[MaintenanceOut]:
    """The newest windows first."""
    return [_maintenance_out(r) for r in alert_records.newest_maintenance_windows(engine)]
