"""Evaluation on a real database: incremental, deterministic, restart-safe, and quiet on a
simulated healthy fleet."""

from __future__ import annotations

import sqlalchemy as sa

from tecfleet.analytics import alerts
from tecfleet.analytics.simulation import DeviceSpec, FleetSpec, simulate
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tests.analytics.alerts.cabinet import T0, cabinet_series


def _alert_rows(engine: sa.Engine) -> list[tuple[object, ...]]:
    with engine.connect() as conn:
        rows = conn.execute(sa.select(db.alerts).order_by(db.alerts.c.id)).fetchall()
    return [
        (r.kind, r.severity, r.state, r.opened_ms, r.resolved_ms, r.summary, r.reopen_count)
        for r in rows
    ]


def test_live_in_chunks_equals_backfill_and_restart_adds_nothing(tmp_path: object) -> None:
    first, second = cabinet_series(2400, hot=(1500, 1600)), cabinet_series(2400, hot=(1800, 1900))
    data = first[:1700] + second[1700:]
    urls = [f"sqlite:///{tmp_path}/{name}.db" for name in ("backfill", "live")]
    back, live = (db.make_engine(u) for u in urls)
    for e in (back, live):
        db.migrate(e)
    db.store_batch(back, data)
    alerts.evaluate(back)
    for start in range(0, len(data), 137):
        db.store_batch(live, data[start : start + 137])
        alerts.evaluate(live)
    assert _alert_rows(back) == _alert_rows(live)
    # the second spell came back within the reopen window: same alert, reopen counted
    assert len(_alert_rows(back)) == 1 and _alert_rows(back)[0][6] == 1
    back.dispose()
    fresh = db.make_engine(urls[0])  # a new process state on the same database
    assert alerts.evaluate(fresh) == []
    with fresh.connect() as conn:
        assert conn.execute(sa.select(sa.func.count()).select_from(db.alerts)).scalar() == 1
    fresh.dispose()
    live.dispose()


def test_healthy_simulated_fleet_raises_nothing_over_ten_days(engine: sa.Engine) -> None:
    start_s = T0 / 1000
    spec = FleetSpec(
        devices=tuple(
            DeviceSpec(f"ok-{i}", setpoint_c=5.0, t_amb_mean_c=20.0 + 2 * i) for i in range(3)
        ),
        start_s=start_s,
        interval_s=60.0,
        seed=11,
        random_use=False,
    )
    chunks, _truth = simulate(spec, days=10, chunk_steps=1440)
    for chunk in chunks:
        batch = []
        for row in chunk.payload_rows():
            for item, device in zip(row, chunk.device_ids, strict=True):
                if item is None:
                    continue
                batch.append(
                    Reading(
                        device,
                        round(item["ts"] * 1000),
                        item["t_cabinet"],
                        item["t_cold"],
                        item["t_hot"],
                        item["t_ambient"],
                        item["current"],
                        item["voltage"],
                        rh=item.get("rh"),
                        door_open=item.get("door_open"),
                    )
                )
        db.store_batch(engine, batch)
        found = alerts.evaluate(engine)
        assert [(c.device_id, c.kind, c.evidence) for c in found] == []
