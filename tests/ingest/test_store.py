"""The store: migrations, durable SQLite settings, idempotent writes and device counters."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.db import Reading, Reject, StatusUpdate
from tests.ingest.old_schema import migrate_to


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


def test_first_reading_time_and_newest_cabinet_follow_the_stored_readings(db_url: str) -> None:
    """The marks kept on the device row equal what the readings themselves say, for batches
    in order, out of order (a backlog), through COPY (PostgreSQL, 200 rows or more), and for
    a replay that takes the recount path."""
    engine = db.make_engine(db_url)
    db.migrate(engine)
    db.store_batch(engine, [_reading("a", m, t_cabinet=4.0 + m / 100) for m in range(100, 110)])
    # A backlog older than what is stored: the newest stays, the first moves back.
    db.store_batch(engine, [_reading("a", m, t_cabinet=7.0) for m in range(50, 60)])
    # A big batch, newest first inside the batch.
    db.store_batch(engine, [_reading("b", m, t_cabinet=m / 10) for m in range(400, 150, -1)])
    # A replay overlapping stored rows, with one newer reading.
    db.store_batch(engine, [_reading("a", m, t_cabinet=3.3) for m in range(105, 111)])
    r = db.readings.c
    with engine.connect() as c:
        marks = {d.device_id: d for d in c.execute(sa.select(db.devices))}
        for device_id, mark in marks.items():
            first = c.execute(
                sa.select(sa.func.min(r.ts_ms)).where(r.device_id == device_id)
            ).scalar_one()
            newest = c.execute(
                sa.select(r.t_cabinet)
                .where(r.device_id == device_id)
                .order_by(r.ts_ms.desc())
                .limit(1)
            ).scalar_one()
            assert (mark.first_reading_ms, mark.last_t_cabinet) == (first, newest)
    assert marks["a"].last_t_cabinet == 3.3 and marks["b"].last_t_cabinet == 40.0


def test_the_marks_migration_fills_them_from_readings_stored_before(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0010")
    base = 1_790_000_000_000
    with engine.begin() as c:
        c.execute(
            sa.text(
                "INSERT INTO devices (device_id, readings, last_reading_ms) "
                "VALUES ('a', 3, :last), ('quiet', 0, NULL)"
            ),
            {"last": base + 120_000},
        )
        c.execute(
            sa.text(
                "INSERT INTO readings (device_id, ts_ms, t_cabinet, t_ambient, current, voltage,"
                " received_ms) VALUES ('a', :t0, 6.0, 20, 1, 2, 0), ('a', :t1, 5.0, 20, 1, 2, 0),"
                " ('a', :t2, 4.5, 20, 1, 2, 0)"
            ),
            {"t0": base, "t1": base + 60_000, "t2": base + 120_000},
        )
    db.migrate(engine)
    with engine.connect() as c:
        marks = {d.device_id: d for d in c.execute(sa.select(db.devices))}
    assert (marks["a"].first_reading_ms, marks["a"].last_t_cabinet) == (base, 4.5)
    assert (marks["quiet"].first_reading_ms, marks["quiet"].last_t_cabinet) == (None, None)
