"""Devices: the list, one device with its newest reading, and registration."""

from __future__ import annotations

import time
from collections.abc import Collection
from typing import Any

from sqlalchemy.engine import Engine, Row

from tecfleet.api.auth import Principal
from tecfleet.api.pagination import next_cursor, str_cursor
from tecfleet.api.schemas.devices import (
    CommissioningOut,
    DeviceDetail,
    DeviceIn,
    DeviceOut,
    LimitedCheckOut,
)
from tecfleet.api.services.audit import record_change
from tecfleet.api.services.readings import reading_out
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import alert_records
from tecfleet.ingest.db import calibration as calibration_db
from tecfleet.ingest.db import fleet as fleet_db
from tecfleet.ingest.errors import NotFoundError

#: A device is shown offline when its newest reading is older than this (wall clock) [ms].
STALE_AFTER_MS = 15 * 60 * 1000


def is_online(last_reading_ms: int | None, status: str | None, wall_ms: int) -> bool:
    """Heard from within ``STALE_AFTER_MS`` of ``wall_ms`` [ms] and not reported offline."""
    return (
        last_reading_ms is not None
        and wall_ms - int(last_reading_ms) <= STALE_AFTER_MS
        and status != "offline"
    )


def not_found(device_id: str) -> NotFoundError:
    return NotFoundError(f"device {device_id!r} is not known")


def require_device(engine: Engine, device_id: str) -> None:
    """NotFoundError unless the device is known."""
    if not fleet_db.device_exists(engine, device_id):
        raise not_found(device_id)


def _device_out(row: Row[Any], open_alerts: int, wall_ms: int) -> DeviceOut:
    return DeviceOut(
        device_id=row.device_id,
        label=row.label,
        site=row.site,
        module=row.module,
        cabinet=row.cabinet,
        registered_at=ms_to_rfc3339(row.registered_at_ms),
        first_seen_at=ms_to_rfc3339(row.first_seen_ms),
        last_reading_at=ms_to_rfc3339(row.last_reading_ms),
        readings=int(row.readings or 0),
        online=is_online(row.last_reading_ms, row.status, wall_ms),
        status=row.status,
        open_alerts=open_alerts,
    )


def list_devices(
    engine: Engine, limit: int, cursor: str | None, sites: Collection[str] | None = None
) -> tuple[list[DeviceOut], str | None]:
    after = str_cursor(cursor)
    rows, counts = fleet_db.device_page(engine, limit, after, sites)
    page = rows[:limit]
    wall = int(time.time() * 1000)
    items = [_device_out(r, counts.get(r.device_id, 0), wall) for r in page]
    return items, next_cursor(rows, limit, "device_id")


def get_device(engine: Engine, device_id: str) -> DeviceDetail:
    found = fleet_db.device_detail(engine, device_id)
    if found is None:
        raise not_found(device_id)
    row, open_alerts, latest = found
    base = _device_out(row, open_alerts, int(time.time() * 1000))
    with engine.connect() as conn:
        state = alert_records.read_progress(conn, device_id)[1]
    limits = state.get("limited_checks") or {}
    return DeviceDetail(
        **base.model_dump(),
        latest_reading=reading_out(latest, _offsets(engine, device_id)) if latest else None,
        commissioning=_commissioning(state.get("commissioning")),
        limited_checks=[
            LimitedCheckOut(check=k, basis=v.get("basis"), note=str(v.get("note")))
            for k, v in sorted(limits.items())
        ],
    )


def _offsets(engine: Engine, device_id: str) -> list[calibration_db.Offset]:
    with engine.connect() as conn:
        return calibration_db.active_offsets(conn, device_id)


def _commissioning(com: dict[str, Any] | None) -> CommissioningOut | None:
    """The device's latest pull-down as the alert evaluation carries it (None before any)."""
    if not com:
        return None
    pull = com.get("pull_down_s")
    return CommissioningOut(
        since=ms_to_rfc3339(com.get("since_ms")),
        reason=str(com.get("reason")),
        active=com.get("in_band_ms") is None,
        pulled_down_at=ms_to_rfc3339(com.get("in_band_ms")),
        pull_down_minutes=None if pull is None else round(float(pull) / 60.0, 1),
    )


def register_device(
    engine: Engine, device_id: str, body: DeviceIn, who: Principal | str | None = None
) -> DeviceDetail:
    """Create or update a device's registration; only the fields given change. A change
    made by ``who`` goes to the audit trail."""
    given = body.model_dump(exclude_unset=True)
    fleet_db.register(engine, device_id, given)
    out = get_device(engine, device_id)
    if who is not None:
        record_change(engine, who, "device.register", f"device/{device_id}", given, out.site)
    return out
