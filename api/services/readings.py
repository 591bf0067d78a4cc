"""Stored readings of one device, oldest first."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine, Row

from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.readings import ReadingOut
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import fleet as fleet_db
from tecfleet.ingest.errors import NotFoundError


def reading_out(row: Row[Any]) -> ReadingOut:
    return ReadingOut(
        ts=ms_to_rfc3339(row.ts_ms) or "",
        seq=row.seq,
        t_cabinet=row.t_cabinet,
        t_cold=row.t_cold,
        t_hot=row.t_hot,
        t_ambient=row.t_ambient,
        current=row.current,
        voltage=row.voltage,
        rh=row.rh,
        door_open=row.door_open,
    )


def list_readings(
    engine: Engine,
    device_id: str,
    start_ms: int | None,
    end_ms: int | None,
    limit: int,
    cursor: str | None,
) -> tuple[list[ReadingOut], str | None]:
    if not fleet_db.device_exists(engine, device_id):
        raise NotFoundError(f"device {device_id!r} is not known")
    after = int_cursor(cursor)
    rows = fleet_db.readings_page(engine, device_id, start_ms, end_ms, after, limit)
    page = rows[:limit]
    return [reading_out(r) for r in page], next_cursor(rows, limit, "ts_ms")
