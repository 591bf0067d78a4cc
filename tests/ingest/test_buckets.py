"""Buckets computed in the database, on SQLite and PostgreSQL, checked against pandas'
``resample`` of the same readings (the reference library's own min, max and mean)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from tecfleet.ingest import db
from tecfleet.ingest.db import buckets
from tecfleet.ingest.errors import StoreError

T0 = 1_700_000_000_000  # a fixed moment [ms]
MIN = 60_000


def _readings(n: int = 600) -> list[db.Reading]:
    rng = np.random.default_rng(5)
    t_cab = 5.0 + rng.normal(0, 1.5, n)
    current = rng.uniform(0.0, 5.0, n)
    return [
        db.Reading(
            "u1",
            T0 + i * MIN + int(rng.integers(0, 20_000)),
            float(t_cab[i]),
            -3.0,
            31.0,
            22.0,
            float(current[i]),
            2.5 * float(current[i]),
        )
        for i in range(n)
    ]


def test_reading_buckets_match_pandas_resample(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    rows = _readings()
    db.store_batch(engine, rows)
    every = 37 * MIN  # an odd width, so that bucket edges fall between readings
    start, end = T0 + 5 * MIN, T0 + 500 * MIN
    got = buckets.reading_buckets(engine, "u1", start, end, every, ("t_cabinet", "power"))
    frame = pd.DataFrame(
        {
            "ts": [r.ts_ms for r in rows],
            "t_cabinet": [r.t_cabinet for r in rows],
            "power": [r.current * r.voltage for r in rows],
        }
    )
    frame = frame[(frame.ts >= start) & (frame.ts < end)]
    frame.index = pd.to_datetime(frame.ts, unit="ms")
    origin = pd.Timestamp(start, unit="ms")
    ref = frame.resample(pd.Timedelta(milliseconds=every), origin=origin).agg(
        ["min", "max", "mean", "count"]
    )
    ref = ref[ref[("t_cabinet", "count")] > 0]
    assert [b.start_ms for b in got] == [int(t.value // 1_000_000) for t in ref.index]
    assert [b.n for b in got] == list(ref[("t_cabinet", "count")])
    for name in ("t_cabinet", "power"):
        lo, hi, mean = (np.array([b.channels[name][k] for b in got]) for k in range(3))
        np.testing.assert_allclose(lo, ref[(name, "min")], rtol=1e-12)
        np.testing.assert_allclose(hi, ref[(name, "max")], rtol=1e-12)
        np.testing.assert_allclose(mean, ref[(name, "mean")], rtol=1e-9)


def test_estimate_buckets_group_by_key_and_count_reliable_rows(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    db.store_batch(engine, _readings(5))
    values = [
        (k, T0 + h * 3_600_000, 3.0 + 0.01 * h, h % 3 != 0) for k in ("a", "b") for h in range(48)
    ]
    with engine.begin() as conn:
        conn.execute(
            db.estimates.insert(),
            [
                {
                    "device_id": "u1",
                    "key": k,
                    "at_ms": at,
                    "value": v,
                    "stderr": 0.1,
                    "n": 5,
                    "reliable": ok,
                }
                for k, at, v, ok in values
            ]
            + [
                {
                    "device_id": "u1",
                    "key": "a",
                    "at_ms": T0 + 1,
                    "value": None,
                    "stderr": None,
                    "n": 0,
                    "reliable": False,
                }
            ],
        )
    got = buckets.estimate_buckets(engine, "u1", ["a", "b"], T0, T0 + 48 * 3_600_000, 86_400_000)
    assert [(b.key, b.start_ms) for b in got] == [
        ("a", T0),
        ("a", T0 + 86_400_000),
        ("b", T0),
        ("b", T0 + 86_400_000),
    ]
    first = got[0]
    hours = np.arange(24)
    # the valueless row is left out; reliable: hours not divisible by 3 (16 of 24)
    assert (first.n, first.reliable_n) == (24, 16)
    assert first.mean == pytest.approx(float(np.mean(3.0 + 0.01 * hours)), rel=1e-12)
    assert (first.low, first.high) == pytest.approx((3.0, 3.23))


def test_a_bucket_width_must_be_positive(sqlite_url: str) -> None:
    engine = db.make_engine(sqlite_url)
    db.migrate(engine)
    with pytest.raises(StoreError):
        buckets.reading_buckets(engine, "u1", T0, T0 + MIN, 0)
