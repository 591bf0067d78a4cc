"""Interval summaries in the payload: optional fields checked like the instant ones, in JSON
and SenML (RFC 8428), stored in their own columns and read back; migration 0006 up and down
with the stored readings kept (SQLite and PostgreSQL)."""

from __future__ import annotations

import json
import math
from typing import Any

import pytest
import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.db.tables import SUMMARY_COLUMNS
from tecfleet.ingest.payload import parse_message
from tests.ingest.old_schema import migrate_to, store_raw

NOW = 1_790_000_000.0
TOPIC = "tecfleet/unit-9/telemetry"
BASE = {"t_cabinet": 4.9, "t_cold": 2.1, "t_hot": 23.0, "t_ambient": 20.4, "current": 0.0,
        "voltage": 0.31}  # fmt: skip
#: A 15-minute interval with the module on 45 % of it at about 4.2 A: the mean of the square
#: is at least the square of the mean (Jensen's inequality; for a current that is 0 or I_on,
#: mean(I²) = mean(I)²/on_share, here 1.9²/0.45 = 8.02 A²).
SUMMARY = {
    "interval_s": 900.0, "t_cabinet_mean": 5.1, "t_cold_mean": -1.2, "t_hot_mean": 27.5,
    "t_ambient_mean": 20.4, "current_mean": 1.9, "current_sq_mean": 8.02,
    "power_mean": 24.6, "on_share": 0.45, "t_cabinet_min": 4.4, "t_cabinet_max": 5.9,
}  # fmt: skip


def parse(doc: Any) -> Any:
    return parse_message(TOPIC, json.dumps(doc).encode(), prefix="tecfleet", now_s=NOW)


def test_every_summary_field_is_named_once_and_stored_in_that_order() -> None:
    assert tuple(SUMMARY) == SUMMARY_COLUMNS
    assert db.Reading._fields[-len(SUMMARY_COLUMNS) :] == SUMMARY_COLUMNS


def test_a_reading_with_summaries_keeps_them_and_one_without_has_none() -> None:
    out = parse([{"ts": NOW - 60, **BASE, **SUMMARY}, {"ts": NOW - 30, **BASE}])
    assert out.rejects == []
    with_, without = out.readings
    assert {name: getattr(with_, name) for name in SUMMARY_COLUMNS} == SUMMARY
    assert all(getattr(without, name) is None for name in SUMMARY_COLUMNS)
    assert with_.t_cabinet == 4.9  # the instant fields as sent


@pytest.mark.parametrize(
    ("field", "value", "code", "words"),
    [
        ("on_share", 1.2, "out_of_range", "less than or equal to 1"),
        ("interval_s", 0.0, "out_of_range", "greater than 0"),
        ("current_sq_mean", -0.1, "out_of_range", "greater than or equal to 0"),
        ("t_hot_mean", 400.0, "out_of_range", "less than or equal to 150"),
        ("current_mean", 60.0, "out_of_range", "less than or equal to 50"),
        ("power_mean", "24", "wrong_type", "valid number"),
        ("t_cabinet_mean", None, "wrong_type", "leave the summary out"),
    ],
)
def test_a_summary_sent_is_checked_like_the_instants(
    field: str, value: Any, code: str, words: str
) -> None:
    out = parse({"ts": NOW - 60, **BASE, **SUMMARY, field: value})
    assert out.readings == []
    (reject,) = out.rejects
    assert reject.code == code and field in reject.reason and words in reject.reason


def _senml(units: dict[str, str | None]) -> list[dict[str, Any]]:
    # One reading as a SenML pack: base name and time, then one record per field.
    pack: list[dict[str, Any]] = [{"bn": "unit-9:", "bt": NOW - 60}]
    for name, value in {**BASE, **SUMMARY}.items():
        rec: dict[str, Any] = {"n": name, "v": value}
        unit = units.get(name, "Cel" if name.startswith("t_") else None)
        if name in ("current", "current_mean"):
            unit = "A"
        if name == "voltage":
            unit = "V"
        if unit is not None:
            rec["u"] = unit
        pack.append(rec)
    return pack


def test_senml_pack_carries_the_summaries_with_their_units() -> None:
    # Units from the SenML units registry of RFC 8428, section 12.1: s, Cel, A, V, W and "/"
    # (a ratio); it has none for A² (from memory).
    out = parse(_senml({"interval_s": "s", "power_mean": "W", "on_share": "/"}))
    assert out.rejects == []
    (reading,) = out.readings
    assert reading.on_share == 0.45 and reading.power_mean == 24.6
    assert reading.current_sq_mean == 8.02


def test_senml_summary_with_a_wrong_unit_is_refused_and_named() -> None:
    out = parse(_senml({"interval_s": "min", "power_mean": "W", "on_share": "/"}))
    assert any(r.code == "bad_unit" and "interval_s" in r.reason for r in out.rejects)
    out = parse(_senml({"interval_s": "s", "power_mean": "W", "current_sq_mean": "A"}))
    assert any(r.code == "bad_unit" and "current_sq_mean" in r.reason for r in out.rejects)


def _reading(minute: int, summaries: bool) -> db.Reading:
    base = db.Reading("u", 1_790_000_000_000 + 60_000 * minute, 4.9, 2.1, 23.0, 20.4, 0.0, 0.3)
    return base._replace(**SUMMARY) if summaries else base


def test_summaries_are_stored_and_read_back_where_sent(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    assert db.store_batch(engine, [_reading(0, False), _reading(15, True)]) == 2
    with engine.connect() as c:
        arr = db.read_arrays(c, "u", ("ts_ms", *SUMMARY_COLUMNS), 0, 2**62)
    assert all(math.isnan(v) for v in arr[0, 1:])
    assert arr[1, 1:].tolist() == list(SUMMARY.values())
    engine.dispose()


def test_migration_0006_up_and_down_keeps_the_readings(db_url: str) -> None:
    engine = db.make_engine(db_url)
    migrate_to(engine, "0005")
    store_raw(engine, [_reading(0, False)])
    migrate_to(engine, "0006")
    cols = {c["name"] for c in sa.inspect(engine).get_columns("readings")}
    assert set(SUMMARY_COLUMNS) <= cols
    store_raw(engine, [_reading(15, True)])
    migrate_to(engine, "0005", down=True)
    cols = {c["name"] for c in sa.inspect(engine).get_columns("readings")}
    assert not set(SUMMARY_COLUMNS) & cols
    with engine.connect() as c:
        kept = c.execute(sa.text("SELECT ts_ms, t_cabinet FROM readings ORDER BY ts_ms")).all()
    assert [tuple(r) for r in kept] == [(1_790_000_000_000, 4.9), (1_790_000_900_000, 4.9)]
    engine.dispose()
