"""Stored rows read a chunk at a time, oldest first, for exports that stream: no export ever
holds more than one chunk in memory, and each chunk is a short query of its own (keyset on
the table's unique order), so a long download holds no transaction open."""

from __future__ import annotations

from collections.abc import Collection, Iterator
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.ingest.db.sites import devices_at
from tecfleet.ingest.db.tables import alerts, estimates, readings

#: Rows read per query [rows]: large enough that the query's cost is spread, small enough to
#: keep an export's memory flat.
CHUNK = 5000

READING_EXPORT = (
    "ts_ms", "seq", "t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh",
    "door_open",
)  # fmt: skip


def iter_readings(
    engine: Engine, device_id: str, start_ms: int, end_ms: int, chunk: int = CHUNK
) -> Iterator[Any]:
    """A device's readings with ``start_ms <= ts_ms < end_ms``, oldest first."""
    cols = [readings.c[name] for name in READING_EXPORT]
    after = start_ms - 1
    while True:
        stmt = (
            sa.select(*cols)
            .where(readings.c.device_id == device_id)
            .where(readings.c.ts_ms > after, readings.c.ts_ms < end_ms)
            .order_by(readings.c.ts_ms)
            .limit(chunk)
        )
        with engine.connect() as conn:
            rows = conn.execute(stmt).all()
        yield from rows
        if len(rows) < chunk:
            return
        after = int(rows[-1].ts_ms)


def iter_estimates(
    engine: Engine,
    device_id: str,
    start_ms: int,
    end_ms: int,
    key: str | None = None,
    chunk: int = CHUNK,
) -> Iterator[Any]:
    """A device's estimates with ``start_ms <= at_ms < end_ms``, by time then key."""
    e = estimates
    cols = (e.c.at_ms, e.c.key, e.c.value, e.c.stderr, e.c.n, e.c.reliable, e.c.note, e.c.basis)
    last: tuple[int, str] | None = None
    while True:
        stmt = sa.select(*cols).where(
            e.c.device_id == device_id, e.c.at_ms >= start_ms, e.c.at_ms < end_ms
        )
        if key is not None:
            stmt = stmt.where(e.c.key == key)
        if last is not None:
            stmt = stmt.where(
                sa.or_(e.c.at_ms > last[0], sa.and_(e.c.at_ms == last[0], e.c.key > last[1]))
            )
        with engine.connect() as conn:
            rows = conn.execute(stmt.order_by(e.c.at_ms, e.c.key).limit(chunk)).all()
        yield from rows
        if len(rows) < chunk:
            return
        last = (int(rows[-1].at_ms), str(rows[-1].key))


def iter_alerts(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None = None,
    sites: Collection[str] | None = None,
    chunk: int = CHUNK,
) -> Iterator[Any]:
    """Alerts opened with ``start_ms <= opened_ms < end_ms``, by id (the order they opened)."""
    a = alerts
    after = 0
    while True:
        stmt = sa.select(a).where(a.c.opened_ms >= start_ms, a.c.opened_ms < end_ms, a.c.id > after)
        if device_id is not None:
            stmt = stmt.where(a.c.device_id == device_id)
        if sites is not None:
            stmt = stmt.where(a.c.device_id.in_(devices_at(sites)))
        with engine.connect() as conn:
            rows = conn.execute(stmt.order_by(a.c.id).limit(chunk)).all()
        yield from rows
        if len(rows) < chunk:
            return
        after = int(rows[-1].id)
