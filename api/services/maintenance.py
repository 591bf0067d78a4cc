"""Maintenance windows: holding the notices of a device or a site for a while."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts as rules
from tecfleet.api.auth import Principal
from tecfleet.api.schemas.maintenance import MaintenanceOut
from tecfleet.api.services.audit import record_change
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db import sites as sites_db


def _maintenance_out(r: Any) -> MaintenanceOut:
    return MaintenanceOut(
        id=int(r.id),
        device_id=r.device_id,
        site=r.site,
        start=ms_to_rfc3339(r.start_ms),
        end=ms_to_rfc3339(r.end_ms),
        reason=r.reason,
        created_by=r.created_by,
        replaced=list(r.replaced or []),
    )


def add_window(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None,
    site: str | None,
    reason: str | None,
    who: Principal,
    replaced: Sequence[str] = (),
) -> MaintenanceOut:
    """Store a window (AlertError when it names neither or both, ends before it starts, or
    records replaced parts on a site), on record in the audit trail."""
    window_id = rules.add_maintenance(
        engine,
        start_ms,
        end_ms,
        device_id=device_id,
        site=site,
        reason=reason,
        created_by=who.name,
        replaced=replaced,
    )
    out = _maintenance_out(alert_records.maintenance_window(engine, window_id))
    site = site if device_id is None else sites_db.known_site(engine, device_id)
    record_change(
        engine, who, "maintenance.add", f"maintenance/{window_id}", out.model_dump(), site
    )
    return out


def within_sites(engine: Engine, who: Principal, device_id: str | None, site: str | None) -> bool:
    """Whether a window for this device or site lies within the key's sites."""
    if device_id is not None:
        return who.sees_site(sites_db.known_site(engine, device_id))
    return who.sees_site(site)


def list_windows(engine: Engine, who: Principal) -> list[MaintenanceOut]:
    """The newest windows first (only those on the key's sites)."""
    rows = alert_records.newest_maintenance_windows(engine)
    if who.sites is not None:
        rows = [r for r in rows if within_sites(engine, who, r.device_id, r.site)]
    return [_maintenance_out(r) for r in rows]
