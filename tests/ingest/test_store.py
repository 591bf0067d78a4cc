"""The store: migrations, durable SQLite settings, idempotent writes and device counters."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.db import Reading, Reject, StatusUpdate


def _reading(device: str, minute: int, t_cabinet: float = 4.0) -> Reading:
    return Reading(
        device, 1_790_000_000_000 + 60_000 * minute, t_cabinet, -3.0, 31.0, 22.0, 3.0, 8.0
    )


def test_migrations_apply_once_and_again(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    db.migrate(engine)
    tables = set(sa.inspect(engine).get_table_names())
    assert {"devices", "readings", "rejects", "api_keys", "estimates", "alerts"} <= tables
    with engine.connect() as c:
        heads = c.execute(sa.text("SELECT version_num FROM alembic_version")).scalars().all()
    assert len(heads) == 1


def test_sqlite_is_wal_with_full_synchronous(sqlite_url: str) -> None:
    engine = db.make_engine(sqlite_url)
    db.migrate(engine)
    with engine.connect() as c:
        assert c.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert c.exec_driver_sql("PRAGMA synchronous").scalar() == 2  # 2 = FULL (SQLite docs)


def test_redelivered_rows_are_skipped_and_counters_stay_exact(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    first = [_reading("a", m) for m in range(10)] + [_reading("b", m) for m in range(5)]
    assert db.store_batch(engine, first) == 15
    # Overlap plus new rows, and a duplicate inside the batch itself.
    second = [_reading("a", m, t_cabinet=9.9) for m in range(8, 14)] + [_reading("b", 5)] * 2
    assert db.store_batch(engine, second) == 5
    with engine.connect() as c:
        devices = {r.device_id: r for r in c.execute(sa.select(db.devices))}
        kept = c.execute(
            sa.select(db.readings.c.t_cabinet).where(
                db.readings.c.device_id == "a", db.readings.c.ts_ms == first[9].ts_ms
            )
        ).scalar_one()
    assert (devices["a"].readings, devices["b"].readings) == (14, 6)
    assert devices["a"].last_reading_ms == _reading("a", 13).ts_ms
    assert kept == 4.0  # the first stored value wins; a replay never rewrites history


def test_rejects_are_capped_and_status_keeps_the_newest(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    big = b"x" * 10_000
    db.store_batch(
        engine,
        [],
        [Reject("tecfleet/a/telemetry", big, "payload_too_large", "too big", "a")],
        [StatusUpdate("a", "online", 2_000), StatusUpdate("a", "offline", 1_000)],
        payload_cap=4096,
    )
    with engine.connect() as c:
        reject = c.execute(sa.select(db.rejects)).one()
        device = c.execute(sa.select(db.devices)).one()
    assert len(reject.payload) == 4096 and reject.payload_size == 10_000
    assert device.status == "online" and device.readings == 0
