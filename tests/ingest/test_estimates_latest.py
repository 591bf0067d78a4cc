"""``estimates_latest`` (migration 0010) against the answer worked out from ``estimates`` itself:
each key's newest valued row, else its newest unvalued row. Checked after random inserts
(several writers' batches, skipped duplicates) and deletes, and after the migration fills it
from rows stored before it, on SQLite and PostgreSQL."""

from __future__ import annotations

import random
from typing import Any

import sqlalchemy as sa

from tecfleet.ingest import db
from tests.ingest.old_schema import migrate_to

COLUMNS = ("device_id", "key", "at_ms", "value", "stderr", "n", "reliable", "note", "basis")


def _expected(conn: sa.Connection) -> set[tuple[Any, ...]]:
    """The reference: every key's best row, chosen here in Python from every stored row."""
    best: dict[tuple[str, str], tuple[Any, ...]] = {}
    for row in conn.execute(sa.select(*(db.estimates.c[c] for c in COLUMNS))):
        rank = (row.value is not None, row.at_ms)
        kept = best.get((row.device_id, row.key))
        if kept is None or rank > (kept[3] is not None, kept[2]):
            best[(row.device_id, row.key)] = tuple(row)
    return set(best.values())


def _kept(conn: sa.Connection) -> set[tuple[Any, ...]]:
    return {tuple(r) for r in conn.execute(sa.select(*(db.estimates_latest.c[c] for c in COLUMNS)))}


def _rows(rng: random.Random, count: int) -> list[dict[str, Any]]:
    return [
        {
            "device_id": rng.choice(("u-1", "u-2")),
            "key": rng.choice(("module.zt", "cabinet.ua_w_per_k", "probes.offset_cold_k")),
            "at_ms": rng.randrange(0, 40) * 3_600_000,
            # a third unvalued: a quantity the data could not support at that time
            "value": None if rng.random() < 0.35 else round(rng.uniform(0.1, 2.0), 3),
            "stderr": None,
            "n": rng.randrange(0, 400),
            "reliable": rng.random() < 0.8,
            "note": None,
            "basis": rng.choice((None, "faces probed")),
        }
        for _ in range(count)
    ]


def _insert(conn: sa.Connection, rows: list[dict[str, Any]]) -> None:
    # As the runner writes: a row already stored at that time is kept, the new one skipped.
    stmt = sa.text(
        f"INSERT INTO estimates ({', '.join(COLUMNS)}) VALUES "
        f"({', '.join(':' + c for c in COLUMNS)}) ON CONFLICT (device_id, key, at_ms) DO NOTHING"
    )
    conn.execute(stmt, rows)


def test_inserts_and_deletes_keep_the_newest_row_of_each_key(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    rng = random.Random(20)
    with engine.begin() as conn:
        conn.execute(db.devices.insert(), [{"device_id": d, "readings": 0} for d in ("u-1", "u-2")])
    for round_no in range(12):
        with engine.begin() as conn:
            _insert(conn, _rows(rng, rng.randrange(1, 30)))
            if round_no % 3 == 2:
                # a re-run from some time on (as a calibration change asks), or one key's rows
                cut = rng.randrange(0, 40) * 3_600_000
                conn.execute(db.estimates.delete().where(db.estimates.c.at_ms >= cut))
            if round_no % 4 == 3:
                conn.execute(db.estimates.delete().where(db.estimates.c.key == "module.zt"))
        with engine.connect() as conn:
            assert _kept(conn) == _expected(conn), round_no
    with engine.begin() as conn:
        conn.execute(db.estimates.delete())
        assert _kept(conn) == set()
    engine.dispose()


def test_the_migration_fills_it_from_rows_stored_before(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0009")
    rng = random.Random(21)
    with engine.begin() as conn:
        conn.execute(db.devices.insert(), [{"device_id": d, "readings": 0} for d in ("u-1", "u-2")])
        _insert(conn, _rows(rng, 200))
    db.migrate(engine)
    with engine.connect() as conn:
        assert len(_kept(conn)) == 6
        assert _kept(conn) == _expected(conn)
    migrate_to(engine, "0009", down=True)
    assert "estimates_latest" not in sa.inspect(engine).get_table_names()
    with engine.begin() as conn:  # the triggers went with it: writing estimates still works
        _insert(conn, _rows(rng, 5))
    engine.dispose()
