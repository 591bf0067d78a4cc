"""Readings partitioned by day on PostgreSQL: partitions made ahead of the clock, backfilled rows
sorted into their days, and the migration of a populated database keeping every row (on both
databases, up and down)."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.db.partitions import day_partitions
from tecfleet.ingest.db.retention import RetentionPolicy, apply_retention
from tests.ingest.old_schema import migrate_to

DAY_MS = 86_400_000
T0_MS = 1_790_000_000_000
_ALL = (
    "id, device_id, ts_ms, seq, t_cabinet, t_cold, t_hot, t_ambient, current, voltage, rh, "
    "door_open, received_ms"
)


def _days(start_ms: int, end_ms: int) -> list[str]:
    """The UTC dates from one instant to another, both included (pandas as the calendar)."""
    days = pd.date_range(
        pd.Timestamp(start_ms, unit="ms").floor("D"), pd.Timestamp(end_ms, unit="ms"), freq="D"
    )
    return [f"readings_{d:%Y%m%d}" for d in days]


def _all_rows(engine: sa.Engine) -> list[tuple[object, ...]]:
    with engine.connect() as c:
        return [tuple(r) for r in c.execute(sa.text(f"SELECT {_ALL} FROM readings ORDER BY id"))]


def test_partitions_are_made_ahead_and_backfill_finds_its_day(pg_url: str) -> None:
    engine = db.make_engine(pg_url)
    db.migrate(engine)
    now = db.now_ms()
    with engine.connect() as c:
        names = [name for name, _ in day_partitions(c)]
    # the migration makes today and the seven days after it
    assert set(_days(now, now + 7 * DAY_MS)) <= set(names)
    later = now + 30 * DAY_MS
    report = apply_retention(engine, RetentionPolicy(partitions_ahead_days=7), later)
    with engine.connect() as c:
        names = [name for name, _ in day_partitions(c)]
    assert set(_days(later, later + 7 * DAY_MS)) <= set(names)
    assert report.partitions_added == len(
        set(_days(later, later + 7 * DAY_MS)) - set(_days(now, now + 7 * DAY_MS))
    )

    # A month-old backfill lands in the default partition, then moves to its own days.
    old = [db.Reading("cab", now - 40 * DAY_MS + i * 600_000, 4.0, -3.0, 31.0, 22.0, 3.0, 8.0)
           for i in range(300)]  # fmt: skip
    assert db.store_batch(engine, old) == len(old)
    apply_retention(engine, RetentionPolicy(), now)
    with engine.connect() as c:
        in_default = c.execute(sa.text("SELECT count(*) FROM readings_default")).scalar()
        counted = c.execute(
            sa.text("SELECT tableoid::regclass::text, count(*) FROM readings GROUP BY 1")
        )
        per_part = {str(part): int(n) for part, n in counted}
    assert in_default == 0
    assert sum(per_part.values()) == len(old)
    assert set(per_part) == set(_days(old[0].ts_ms, old[-1].ts_ms))
    # each row in the partition of its own UTC date (Python's calendar as the reference)
    with engine.connect() as c:
        placed = c.execute(sa.text("SELECT tableoid::regclass::text, ts_ms FROM readings")).all()
    for part, ts in placed:
        day = dt.datetime.fromtimestamp(ts / 1000, dt.UTC)
        assert part == f"readings_{day:%Y%m%d}"


def _populate_at_0005(engine: sa.Engine) -> None:
    migrate_to(engine, "0005")
    rng = np.random.default_rng(205)
    with engine.begin() as c:
        c.execute(db.devices.insert(), [{"device_id": d, "readings": 0} for d in "abc"])
        rows = []
        for i in range(1500):
            faces = i % 7 != 0
            rows.append({
                "d": "abc"[i % 3], "t": T0_MS + int(rng.integers(0, 9 * DAY_MS)) // 1000 * 1000 + i,
                "s": i, "cab": float(rng.normal(4, 1)), "tc": -3.0 - i / 1000 if faces else None,
                "th": 31.0 if faces else None, "amb": 22.5, "cur": float(rng.uniform(0, 5)),
                "v": 7.25, "rh": 55.0 if i % 2 else None, "door": bool(i % 11 == 0),
            })  # fmt: skip
        c.execute(
            sa.text(
                "INSERT INTO readings (device_id, ts_ms, seq, t_cabinet, t_cold, t_hot, t_ambient,"
                " current, voltage, rh, door_open, received_ms) VALUES (:d, :t, :s, :cab, :tc,"
                " :th, :amb, :cur, :v, :rh, :door, 1)"
            ),
            rows,
        )


def test_migrating_a_populated_database_keeps_every_row(db_url: str) -> None:
    engine = db.make_engine(db_url)
    _populate_at_0005(engine)
    before = _all_rows(engine)
    assert len(before) == 1500
    db.migrate(engine)
    assert _all_rows(engine) == before  # every column of every row, ids included
    if db_url.startswith("postgresql"):
        with engine.connect() as c:
            kind = c.execute(sa.text("SELECT relkind FROM pg_class WHERE relname = 'readings'"))
            assert kind.scalar() == "p"  # partitioned
            assert c.execute(sa.text("SELECT count(*) FROM readings_default")).scalar() == 0
    # new rows still get fresh ids and duplicates are still refused
    fresh = db.Reading("a", T0_MS + 20 * DAY_MS, 4.0, -3.0, 31.0, 22.0, 3.0, 8.0)
    assert db.store_batch(engine, [fresh]) == 1
    assert db.store_batch(engine, [fresh]) == 0
    after = _all_rows(engine)
    assert after[:-1] == before and after[-1][0] > before[-1][0]
    # and back down, every row kept
    migrate_to(engine, "0005", down=True)
    assert _all_rows(engine) == after
