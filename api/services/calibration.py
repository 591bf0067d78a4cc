"""Calibration offsets of a device: list, add, withdraw. A change rewinds the device's
analysis so that the period it covers is analysed again with the corrected readings."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.api.auth import Principal
from tecfleet.api.schemas.calibration import OffsetIn, OffsetOut
from tecfleet.api.services.audit import record_change
from tecfleet.api.services.devices import require_device
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import calibration as calibration_db
from tecfleet.ingest.db import sites as sites_db
from tecfleet.ingest.errors import NotFoundError


def offset_out(r: Any) -> OffsetOut:
    return OffsetOut(
        id=int(r.id),
        device_id=r.device_id,
        sensor=r.sensor,
        offset=float(r.offset),
        valid_from=ms_to_rfc3339(r.valid_from_ms) or "",
        valid_to=ms_to_rfc3339(r.valid_to_ms),
        note=r.note,
        created_at=ms_to_rfc3339(r.created_ms),
        created_by=r.created_by,
        withdrawn_at=ms_to_rfc3339(r.deleted_ms),
    )


def list_offsets(engine: Engine, device_id: str, withdrawn: bool) -> list[OffsetOut]:
    require_device(engine, device_id)
    return [
        offset_out(r) for r in calibration_db.offset_rows(engine, device_id, withdrawn=withdrawn)
    ]


def add_offset(
    engine: Engine,
    who: Principal,
    device_id: str,
    body: OffsetIn,
    valid_from_ms: int,
    valid_to_ms: int | None,
) -> OffsetOut:
    require_device(engine, device_id)
    offset = calibration_db.Offset(body.sensor, body.offset, valid_from_ms, valid_to_ms)
    offset_id = calibration_db.add_offset(engine, device_id, offset, body.note, who.name)
    row = next(r for r in calibration_db.offset_rows(engine, device_id) if r.id == offset_id)
    out = offset_out(row)
    record_change(
        engine,
        who,
        "calibration.add",
        f"device/{device_id}/calibration/{offset_id}",
        body.model_dump(),
        sites_db.known_site(engine, device_id),
    )
    return out


def withdraw_offset(engine: Engine, who: Principal, device_id: str, offset_id: int) -> None:
    require_device(engine, device_id)
    row = calibration_db.withdraw_offset(engine, device_id, offset_id)
    if row is None:
        raise NotFoundError(f"device {device_id!r} has no offset {offset_id} in force")
    record_change(
        engine,
        who,
        "calibration.withdraw",
        f"device/{device_id}/calibration/{offset_id}",
        {"sensor": row.sensor, "offset": row.offset},
        sites_db.known_site(engine, device_id),
    )
