"""Retention and rollups, on SQLite and on PostgreSQL: raw readings older than the days kept go,
their per-hour rollups match what pandas computes from the same rows (pandas ``resample`` is the
reference for min, max, mean and count per interval), late rows merge into kept rollups, and
estimates and alerts stay."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa

from tecfleet.ingest import db
from tecfleet.ingest.db.retention import RetentionPolicy, apply_retention, rollups
from tecfleet.ingest.db.tables import ROLLUP_CHANNELS, reading_rollups
from tecfleet.ingest.errors import StoreError

DAY_MS = 86_400_000
HOUR_MS = 3_600_000
# A whole UTC day (2026-09-21 00:00Z), so the test's days are the partitions' days.
T0_MS = 1_790_000_000_000 // DAY_MS * DAY_MS


def _fleet_rows(seed: int, start_ms: int, days: float) -> list[db.Reading]:
    """Two devices at irregular intervals, some without a cold-face probe or humidity, some
    with the door open."""
    rng = np.random.default_rng(seed)
    rows: list[db.Reading] = []
    for device in ("cab-a", "cab-b"):
        t = start_ms + int(rng.integers(0, 60_000))
        while t < start_ms + days * DAY_MS:
            faces = rng.random() > 0.2
            rows.append(
                db.Reading(
                    device,
                    t,
                    float(rng.normal(4.0, 1.5)),
                    float(rng.normal(-3.0, 2.0)) if faces else None,
                    float(rng.normal(31.0, 3.0)),
                    float(rng.normal(22.0, 2.0)),
                    float(rng.uniform(0.0, 5.0)),
                    float(rng.uniform(0.0, 12.0)),
                    seq=None,
                    rh=float(rng.uniform(20, 80)) if rng.random() > 0.3 else None,
                    door_open=bool(rng.random() < 0.1),
                )
            )
            t += int(rng.integers(30_000, 600_000))
    return rows


def _reference(rows: list[db.Reading], device: str, before_ms: int) -> pd.DataFrame:
    """min, max, mean and count per hour from pandas, from the rows a rollup replaces."""
    frame = pd.DataFrame([r._asdict() for r in rows if r.device_id == device])
    frame = frame[frame.ts_ms < before_ms].astype({"door_open": float})
    frame.index = pd.to_datetime(frame.ts_ms, unit="ms")
    hourly = frame.resample("1h")
    out = pd.DataFrame({"n": hourly["ts_ms"].count(), "door_open_n": hourly["door_open"].sum()})
    for ch in ROLLUP_CHANNELS:
        stats = hourly[ch].agg(["count", "min", "max", "mean"])
        stats.columns = [f"{ch}_{s}" for s in ("n", "min", "max", "mean")]
        out = out.join(stats)
    out = out[out.n > 0]
    out.index = pd.DatetimeIndex(out.index).as_unit("ms").asi8  # bucket start, epoch ms
    return out


def _compare(engine: sa.Engine, rows: list[db.Reading], device: str, before_ms: int) -> None:
    expected = _reference(rows, device, before_ms)
    with engine.connect() as c:
        kept = pd.DataFrame([r._asdict() for r in rollups(c, device, 3600)])
    kept = kept.set_index("bucket_ms").drop(columns=["device_id", "span_ms"])
    assert list(kept.index) == list(expected.index)
    for name in expected.columns:
        # Tolerance: float sums in another order (the database's) - a few ulps of the values.
        np.testing.assert_allclose(
            kept[name].to_numpy(float), expected[name].to_numpy(float), rtol=1e-12, atol=1e-12
        )


def _stored(engine: sa.Engine) -> list[tuple[str, int]]:
    with engine.connect() as c:
        q = sa.select(db.readings.c.device_id, db.readings.c.ts_ms)
        return sorted(tuple(r) for r in c.execute(q).all())  # type: ignore[misc]


def test_retention_rolls_up_what_it_removes_and_nothing_else(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    rows = _fleet_rows(201, T0_MS, 5.0)
    assert db.store_batch(engine, rows) == len(rows)
    with engine.begin() as c:
        c.execute(db.estimates.insert().values(device_id="cab-a", key="module.zt", at_ms=T0_MS))
        c.execute(
            db.alerts.insert().values(
                device_id="cab-a", kind="excursion", severity="warning", state="resolved",
                opened_ms=T0_MS, updated_ms=T0_MS, summary="warm", evidence={},
            )
        )  # fmt: skip
    now = T0_MS + 5 * DAY_MS + 7 * 60_000
    report = apply_retention(engine, RetentionPolicy(raw_keep_days=2.5), now)
    # 2.5 days before ``now`` rounded down to the hour: the policy as configured.
    cutoff = (now - int(2.5 * DAY_MS)) // HOUR_MS * HOUR_MS
    assert report.cutoff_ms == cutoff
    older = [r for r in rows if r.ts_ms < cutoff]
    assert report.readings_removed == len(older)
    assert _stored(engine) == sorted((r.device_id, r.ts_ms) for r in rows if r.ts_ms >= cutoff)
    for device in ("cab-a", "cab-b"):
        _compare(engine, rows, device, cutoff)
    with engine.connect() as c:
        counts = dict(c.execute(sa.select(db.devices.c.device_id, db.devices.c.readings)).all())
        assert c.execute(sa.select(sa.func.count()).select_from(db.estimates)).scalar() == 1
        assert c.execute(sa.select(sa.func.count()).select_from(db.alerts)).scalar() == 1
    for device in ("cab-a", "cab-b"):
        assert counts[device] == sum(1 for r in rows if r.device_id == device and r.ts_ms >= cutoff)
    if db_url.startswith("postgresql"):
        assert report.partitions_dropped == 2  # the first two whole days lie before the cutoff

    # Late rows for intervals already rolled up merge into them.
    late = [r._replace(ts_ms=r.ts_ms + 17) for r in _fleet_rows(202, T0_MS + DAY_MS, 0.3)]
    assert db.store_batch(engine, late) == len(late)
    apply_retention(engine, RetentionPolicy(raw_keep_days=2.5), now)
    for device in ("cab-a", "cab-b"):
        _compare(engine, rows + late, device, cutoff)
    assert _stored(engine) == sorted((r.device_id, r.ts_ms) for r in rows if r.ts_ms >= cutoff)


def test_rollups_older_than_kept_go_and_nothing_goes_without_a_limit(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    rows = _fleet_rows(203, T0_MS, 2.0)
    db.store_batch(engine, rows)
    now = T0_MS + 4 * DAY_MS
    forever = apply_retention(engine, RetentionPolicy(raw_keep_days=None), now)
    assert forever.cutoff_ms is None and forever.readings_removed == 0
    assert len(_stored(engine)) == len(rows)
    apply_retention(engine, RetentionPolicy(raw_keep_days=1.0), now)
    with engine.connect() as c:
        before = c.execute(sa.select(sa.func.count()).select_from(reading_rollups)).scalar()
    report = apply_retention(engine, RetentionPolicy(raw_keep_days=1.0, rollup_keep_days=3.0), now)
    with engine.connect() as c:
        left = c.execute(sa.select(reading_rollups.c.bucket_ms)).scalars().all()
    assert report.rollups_removed == before - len(left) > 0
    assert min(left) >= now - 3 * DAY_MS


def test_retention_waits_for_analysis_of_a_device_behind(db_url: str) -> None:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    rows = _fleet_rows(204, T0_MS, 4.0)
    db.store_batch(engine, rows)
    behind = T0_MS + DAY_MS + 30 * 60_000
    with engine.begin() as c:
        c.execute(
            db.analysis_state.insert().values(
                device_id="cab-b", done_ms=behind, state={}, updated_ms=0
            )
        )
    report = apply_retention(engine, RetentionPolicy(raw_keep_days=1.0), T0_MS + 4 * DAY_MS)
    # cab-b's analysis has reached only ``behind``: nothing at or after its hour goes.
    assert report.cutoff_ms == behind // HOUR_MS * HOUR_MS
    assert min(ts for _, ts in _stored(engine)) >= report.cutoff_ms


def test_policy_refuses_intervals_that_do_not_divide_a_day() -> None:
    with pytest.raises(StoreError, match="does not divide a day"):
        RetentionPolicy(raw_keep_days=30, rollup_span_s=7 * 3600)
    with pytest.raises(StoreError, match="at least one day"):
        RetentionPolicy(raw_keep_days=0.5)


def test_settings_give_the_policy_and_keep_everything_by_default() -> None:
    from tecfleet.api.storage_upkeep import retention_policy
    from tecfleet.ingest.settings import load_settings

    assert retention_policy(load_settings(env={})) == RetentionPolicy(raw_keep_days=None)
    env = {"TECFLEET_RAW_RETENTION_DAYS": "90", "TECFLEET_ROLLUP_INTERVAL_S": "900"}
    policy = retention_policy(load_settings(env=env))
    assert (policy.raw_keep_days, policy.rollup_span_s) == (90.0, 900)


def test_the_service_job_applies_the_policy_on_its_own(sqlite_url: str) -> None:
    import threading
    import time

    from tecfleet.api.storage_upkeep import start_upkeep
    from tecfleet.ingest.settings import load_settings

    engine = db.make_engine(sqlite_url)
    db.migrate(engine)
    old = _fleet_rows(206, db.now_ms() - 5 * DAY_MS, 1.0)  # all older than the 3 days kept
    db.store_batch(engine, old)
    settings = load_settings({"raw_retention_days": 3, "retention_every_s": 0.05}, env={})
    stopping = threading.Event()
    thread = start_upkeep(engine, settings, stopping)
    deadline = time.monotonic() + 30
    while _stored(engine) and time.monotonic() < deadline:
        time.sleep(0.05)
    stopping.set()
    thread.join(10)
    assert _stored(engine) == []
    with engine.connect() as c:
        kept = c.execute(sa.select(sa.func.sum(reading_rollups.c.n))).scalar()
    assert kept == len(old)  # every reading removed is counted in a rollup
