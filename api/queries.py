"""Plain functions behind the HTTP handlers: read and write the store, return schemas."""

from __future__ import annotations

import base64
import binascii
import time
from typing import Any

import orjson
import sqlalchemy as sa
from sqlalchemy.engine import Engine, Row

from tecfleet.api.errors import CursorError
from tecfleet.api.schemas import DeviceDetail, DeviceIn, DeviceOut, ReadingOut, RejectOut
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import alerts, devices, now_ms, readings, rejects
from tecfleet.ingest.errors import NotFoundError

OPEN_STATES = ("open", "acknowledged")
# A device is shown offline when its newest reading is older than this (wall clock).
STALE_AFTER_MS = 15 * 60 * 1000


def encode_cursor(value: Any) -> str:
    return base64.urlsafe_b64encode(orjson.dumps(value)).decode().rstrip("=")


def decode_cursor(cursor: str | None) -> Any:
    if not cursor:
        return None
    try:
        padded = cursor + "=" * (-len(cursor) % 4)
        return orjson.loads(base64.urlsafe_b64decode(padded.encode()))
    except (binascii.Error, orjson.JSONDecodeError, ValueError) as exc:
        raise CursorError("cursor is not one this API handed out") from exc


def _open_alert_counts(connection: sa.Connection, device_ids: list[str]) -> dict[str, int]:
    if not device_ids:
        return {}
    stmt = (
        sa.select(alerts.c.device_id, sa.func.count())
        .where(alerts.c.device_id.in_(device_ids), alerts.c.state.in_(OPEN_STATES))
        .group_by(alerts.c.device_id)
    )
    return {row[0]: int(row[1]) for row in connection.execute(stmt)}


def _device_out(row: Row[Any], open_alerts: int, wall_ms: int) -> DeviceOut:
    fresh = row.last_reading_ms is not None and wall_ms - row.last_reading_ms <= STALE_AFTER_MS
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
        online=bool(fresh and row.status != "offline"),
        status=row.status,
        open_alerts=open_alerts,
    )


def list_devices(
    engine: Engine, limit: int, cursor: str | None
) -> tuple[list[DeviceOut], str | None]:
    after = decode_cursor(cursor)
    if after is not None and not isinstance(after, str):
        raise CursorError("cursor is not one this API handed out")
    stmt = sa.select(devices).order_by(devices.c.device_id).limit(limit + 1)
    if after is not None:
        stmt = stmt.where(devices.c.device_id > after)
    with engine.connect() as connection:
        rows = connection.execute(stmt).all()
        page = rows[:limit]
        counts = _open_alert_counts(connection, [r.device_id for r in page])
    wall = int(time.time() * 1000)
    items = [_device_out(r, counts.get(r.device_id, 0), wall) for r in page]
    next_cursor = encode_cursor(page[-1].device_id) if len(rows) > limit else None
    return items, next_cursor


def _reading_out(row: Row[Any]) -> ReadingOut:
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


def get_device(engine: Engine, device_id: str) -> DeviceDetail:
    with engine.connect() as connection:
        row = connection.execute(sa.select(devices).where(devices.c.device_id == device_id)).first()
        if row is None:
            raise NotFoundError(f"device {device_id!r} is not known")
        counts = _open_alert_counts(connection, [device_id])
        latest = connection.execute(
            sa.select(readings)
            .where(readings.c.device_id == device_id)
            .order_by(readings.c.ts_ms.desc())
            .limit(1)
        ).first()
    base = _device_out(row, counts.get(device_id, 0), int(time.time() * 1000))
    return DeviceDetail(
        **base.model_dump(), latest_reading=_reading_out(latest) if latest else None
    )


def device_exists(engine: Engine, device_id: str) -> bool:
    with engine.connect() as connection:
        stmt = sa.select(devices.c.device_id).where(devices.c.device_id == device_id)
        return connection.execute(stmt).first() is not None


def register_device(engine: Engine, device_id: str, body: DeviceIn) -> DeviceDetail:
    """Create or update a device's registration; only the fields given change."""
    given = body.model_dump(exclude_unset=True)
    with engine.begin() as connection:
        row = connection.execute(sa.select(devices).where(devices.c.device_id == device_id)).first()
        values: dict[str, Any] = {"registered_at_ms": now_ms()}
        for key in ("label", "site"):
            if key in given:
                values[key] = given[key]
        for key in ("module", "cabinet"):
            if key in given:
                merged = dict((getattr(row, key) if row is not None else None) or {})
                if given[key] is None:
                    merged = {}
                else:
                    merged.update(given[key])
                values[key] = merged or None
        if row is None:
            connection.execute(devices.insert().values(device_id=device_id, readings=0, **values))
        else:
            connection.execute(
                devices.update().where(devices.c.device_id == device_id).values(**values)
            )
    return get_device(engine, device_id)


def list_readings(
    engine: Engine,
    device_id: str,
    start_ms: int | None,
    end_ms: int | None,
    limit: int,
    cursor: str | None,
) -> tuple[list[ReadingOut], str | None]:
    if not device_exists(engine, device_id):
        raise NotFoundError(f"device {device_id!r} is not known")
    after = decode_cursor(cursor)
    if after is not None and not isinstance(after, int):
        raise CursorError("cursor is not one this API handed out")
    stmt = sa.select(readings).where(readings.c.device_id == device_id)
    if start_ms is not None:
        stmt = stmt.where(readings.c.ts_ms >= start_ms)
    if end_ms is not None:
        stmt = stmt.where(readings.c.ts_ms < end_ms)
    if after is not None:
        stmt = stmt.where(readings.c.ts_ms > after)
    stmt = stmt.order_by(readings.c.ts_ms).limit(limit + 1)
    with engine.connect() as connection:
        rows = connection.execute(stmt).all()
    page = rows[:limit]
    next_cursor = encode_cursor(page[-1].ts_ms) if len(rows) > limit else None
    return [_reading_out(r) for r in page], next_cursor


def list_rejects(
    engine: Engine, limit: int, cursor: str | None
) -> tuple[list[RejectOut], str | None]:
    before = decode_cursor(cursor)
    if before is not None and not isinstance(before, int):
        raise CursorError("cursor is not one this API handed out")
    stmt = sa.select(rejects).order_by(rejects.c.id.desc()).limit(limit + 1)
    if before is not None:
        stmt = stmt.where(rejects.c.id < before)
    with engine.connect() as connection:
        rows = connection.execute(stmt).all()
    page = rows[:limit]
    items = []
    for r in page:
        raw = bytes(r.payload)
        try:
            text, encoding = raw.decode("utf-8"), "utf-8"
        except UnicodeDecodeError:
            text, encoding = base64.b64encode(raw).decode(), "base64"
        items.append(
            RejectOut(
                id=r.id,
                received_at=ms_to_rfc3339(r.received_ms) or "",
                topic=r.topic,
                device_id=r.device_id,
                item=r.item,
                code=r.code,
                reason=r.reason,
                payload=text,
                payload_encoding=encoding,
                payload_size=r.payload_size,
            )
        )
    next_cursor = encode_cursor(page[-1].id) if len(rows) > limit else None
    return items, next_cursor
