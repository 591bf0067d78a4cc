"""Large batches go to PostgreSQL through COPY: the rows stored, the count of new ones and the
devices' counters are those of the row-by-row insert on SQLite (the reference path), with
redeliveries and duplicates inside a batch skipped, and two batches in one transaction."""

from __future__ import annotations

import importlib

import sqlalchemy as sa

from tecfleet.ingest import db

# the module, not the table that the package exports under the same name
store = importlib.import_module("tecfleet.ingest.db.readings")

T0_MS = 1_790_000_000_000


def _batch(first: int, count: int) -> list[db.Reading]:
    return [
        db.Reading(f"cab-{i % 3}", T0_MS + 60_000 * i, 4.0 + i / 100, None if i % 5 else -3.0,
                   31.0, 22.0, 3.0, 8.0, seq=i, rh=None if i % 2 else 50.0,
                   door_open=None if i % 7 else True)
        for i in range(first, first + count)
    ]  # fmt: skip


def _contents(engine: sa.Engine) -> tuple[list[tuple[object, ...]], list[tuple[object, ...]]]:
    r, d = db.readings.c, db.devices.c
    cols = [r.device_id, r.ts_ms, r.seq, r.t_cabinet, r.t_cold, r.t_hot, r.rh, r.door_open]
    with engine.connect() as c:
        rows = [tuple(x) for x in c.execute(sa.select(*cols).order_by(r.device_id, r.ts_ms))]
        devs = [tuple(x) for x in c.execute(sa.select(d.device_id, d.readings, d.last_reading_ms))]
    return rows, sorted(devs)


def _store_all(engine: sa.Engine) -> list[int]:
    first = _batch(0, 300)
    counts = [db.store_batch(engine, first)]
    counts.append(db.store_batch(engine, first[100:] + _batch(300, 200)))  # a redelivery
    counts.append(db.store_batch(engine, _batch(500, 150) + _batch(550, 150)))  # repeats inside
    with engine.begin() as c:  # two batches in one transaction
        counts.append(db.write_batch(c, _batch(700, 200), []))
        counts.append(db.write_batch(c, _batch(800, 200), []))
    return counts


def test_copy_path_stores_what_the_row_insert_stores(pg_url: str, sqlite_url: str) -> None:
    assert store.COPY_MIN_ROWS <= 200  # every batch below takes the COPY path on PostgreSQL
    results = []
    for url in (pg_url, sqlite_url):
        engine = db.make_engine(url)
        db.migrate(engine)
        results.append((_store_all(engine), _contents(engine)))
        engine.dispose()
    (pg_counts, pg_contents), (ref_counts, ref_contents) = results
    assert ref_counts == [300, 200, 200, 200, 100]  # new rows in each batch, counted by hand
    assert pg_counts == ref_counts
    assert pg_contents == ref_contents
