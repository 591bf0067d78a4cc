"""Stored readings of one device, oldest first."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from sqlalchemy.engine import Engine, Row

from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.readings import ReadingOut
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import calibration as calibration_db
from tecfleet.ingest.db import fleet as fleet_db
from tecfleet.ingest.errors import NotFoundError


def reading_out(row: Row[Any], offsets: Sequence[calibration_db.Offset] = ()) -> ReadingOut:
    """A stored reading as served, with these calibration offsets applied."""
    values = row._asdict()
    if offsets:
        values = calibration_db.calibrate_row(values, offsets)
    return ReadingOut(
        ts=ms_to_rfc3339(values["ts_ms"]) or "",
        seq=values["seq"],
        t_cabinet=values["t_cabinet"],
        t_cold=values["t_cold"],
        t_hot=values["t_hot"],
        t_ambient=values["t_ambient"],
        current=values["current"],
        voltage=values["voltage"],
        rh=values["rh"],
        door_open=values["door_open"],
    )


def list_readings(
    engine: Engine,
    device_id: str,
    start_ms: int | None,
    end_ms: int | None,
    limit: int,
    cursor: str | None,
    *,
    raw: bool = False,
) -> tuple[list[ReadingOut], str | None]:
    """A page of readings, oldest first, calibrated unless ``raw``."""
    if not fleet_db.device_exists(engine, device_id):
        raise NotFoundError(f"device {device_id!r} is not known")
    after = int_cursor(cursor)
    rows = fleet_db.readings_page(engine, device_id, start_ms, end_ms, after, limit)
    page = rows[:limit]
    offsets: list[calibration_db.Offset] = []
    if not raw and page:
        with engine.connect() as conn:
            offsets = calibration_db.active_offsets(conn, device_id)
    return [reading_out(r, offsets) for r in page], next_cursor(rows, limit, "ts_ms")
