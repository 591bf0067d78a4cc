"""Units without face probes: NULL face temperatures stored and read back, and migration 0005
up and down with the stored rows kept (SQLite and PostgreSQL)."""

from __future__ import annotations

import math

import pytest
import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.errors import StoreError
from tests.ingest.old_schema import migrate_to, store_raw

T0_MS = 1_790_000_000_000


def _reading(device: str, minute: int, t_cold: float | None, t_hot: float | None) -> db.Reading:
    return db.Reading(device, T0_MS + 60_000 * minute, 4.0, t_cold, t_hot, 22.0, 3.0, 8.0)


def test_missing_faces_are_stored_as_null_and_read_as_nan(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    rows = [
        _reading("full", 0, -3.0, 31.0),
        _reading("no_cold", 0, None, 31.5),
        _reading("no_faces", 0, None, None),
        _reading("no_faces", 1, None, None),
    ]
    assert db.store_batch(engine, rows) == 4
    cols = ("ts_ms", "t_cabinet", "t_cold", "t_hot", "voltage")
    with engine.connect() as c:
        full = db.read_arrays(c, "full", cols, 0, 2**62)
        no_cold = db.read_arrays(c, "no_cold", cols, 0, 2**62)
        no_faces = db.read_arrays(c, "no_faces", cols, 0, 2**62)
        stored = c.execute(
            sa.select(db.readings.c.t_cold, db.readings.c.t_hot).where(
                db.readings.c.device_id == "no_faces"
            )
        ).all()
    assert full.tolist() == [[T0_MS, 4.0, -3.0, 31.0, 8.0]]
    assert math.isnan(no_cold[0, 2]) and no_cold[0, 3] == 31.5
    assert no_faces.shape == (2, 5) and bool(math.isnan(no_faces[:, 2:4].sum()))
    assert no_faces[:, 1].tolist() == [4.0, 4.0]  # the other channels as sent
    assert stored == [(None, None), (None, None)]  # NULL in the table, not a sentinel number


def test_migration_0005_up_and_down_keeps_rows(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0004")
    with engine.begin() as c:
        c.execute(db.devices.insert().values(device_id="a", readings=0))
        c.execute(
            sa.text(
                "INSERT INTO readings (device_id, ts_ms, t_cabinet, t_cold, t_hot, t_ambient, "
                "current, voltage, received_ms) VALUES ('a', 1, 4.0, -3.0, 31.0, 22.0, 3.0, 8.0, 1)"
            )
        )
    before = sa.inspect(engine).get_columns("readings")
    assert not next(c for c in before if c["name"] == "t_cold")["nullable"]
    migrate_to(engine, "0005")
    after = {c["name"]: c for c in sa.inspect(engine).get_columns("readings")}
    assert after["t_cold"]["nullable"] and after["t_hot"]["nullable"]
    assert "basis" in {c["name"] for c in sa.inspect(engine).get_columns("estimates")}
    store_raw(engine, [_reading("a", 5, None, None)])
    with engine.connect() as c:
        n = c.execute(sa.select(sa.func.count()).select_from(db.readings)).scalar()
    assert n == 2
    # A NULL face cannot go back under NOT NULL: the downgrade refuses rather than drop rows.
    with pytest.raises(StoreError, match="1 stored readings lack a face temperature"):
        migrate_to(engine, "0004", down=True)
    with engine.begin() as c:
        c.execute(db.readings.delete().where(db.readings.c.t_cold.is_(None)))
    migrate_to(engine, "0004", down=True)
    down = {c["name"]: c for c in sa.inspect(engine).get_columns("readings")}
    assert not down["t_cold"]["nullable"] and not down["t_hot"]["nullable"]
    with engine.connect() as c:
        kept = c.execute(sa.text("SELECT ts_ms, t_cold, t_hot FROM readings")).all()
    assert [tuple(r) for r in kept] == [(1, -3.0, 31.0)]
