"""Sharded analysis throughput on PostgreSQL with 1, 2 and 4 analysis processes. Prints figures.

    python tests/bench/bench_analysis_shards.py [--devices 24] [--days 3] [--workers 1,2,4]

A fleet of simulated coolers (seeds 301-314) is stored once; each run copies that database
(``CREATE DATABASE ... TEMPLATE``), starts its processes, lets every one of them register its
heartbeat, then releases them together and times until every device's estimates and alerts
are up to its newest reading. Each process runs the same rounds as `tecfleet serve --roles
analytics` (:class:`ShardedAnalysis`). The figure is device-hours analysed per second of wall
time; the machine's cores and its other load bound it.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import sys
import time
from pathlib import Path
from typing import Any

import sqlalchemy as sa

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.analytics.runner.leases import ShardedAnalysis
from tecfleet.ingest import db
from tecfleet.ingest.db import leases as leases_db
from tecfleet.ingest.db.fleet import register
from tests.analytics.synthetic import Truth, simulate
from tests.services import Postgres

STEP_MS = 3_600_000


def store_fleet(url: str, devices: int, days: float) -> list[db.Reading]:
    """Store the fleet but for its last hour, which is returned (the live step)."""
    engine = db.make_engine(url)
    db.migrate(engine)
    tail: list[db.Reading] = []
    for k in range(devices):
        frame = simulate(Truth(), days, seed=301 + k % 14, door_every_h=9.0)
        rows = [
            db.Reading(f"unit-{k}", int(r.ts_ms), r.t_cabinet, r.t_cold, r.t_hot, r.t_ambient,
                       r.current, r.voltage)
            for r in frame.itertuples()
        ]  # fmt: skip
        cut = rows[-1].ts_ms // STEP_MS * STEP_MS - STEP_MS
        db.store_batch(engine, [r for r in rows if r.ts_ms < cut], [])
        tail.extend(r for r in rows if r.ts_ms >= cut)
        cabinet = {"setpoint_c": 5.0, "low_limit_c": 2.0, "high_limit_c": 8.0}
        register(engine, f"unit-{k}", {"site": f"site-{k % 3}", "cabinet": cabinet})
    engine.dispose()
    return tail


def lagging(engine: sa.Engine) -> int:
    """Devices whose estimates or alerts are not yet up to their newest reading."""
    with engine.connect() as c:
        found = c.execute(
            sa.text(
                "SELECT count(*) FROM devices d LEFT JOIN analysis_state s USING (device_id)"
                " LEFT JOIN alert_progress p USING (device_id)"
                " WHERE s.done_ms IS NULL OR s.done_ms < d.last_reading_ms / :step * :step"
                " OR p.done_ms IS NULL OR p.done_ms < d.last_reading_ms"
            ),
            {"step": STEP_MS},
        ).scalar_one()
    return int(found)


def worker(url: str, ready: Any, go: Any, finished: Any) -> None:
    """One analysis process: rounds until the whole fleet is analysed, then reports when
    (wall clock), so process start-up and exit stay out of the figure."""
    engine = db.make_engine(url)
    shards = ShardedAnalysis(engine, lease_s=120, devices_per_commit=4)
    with engine.begin() as conn:
        leases_db.heartbeat(conn, shards.worker_id, db.now_ms(), shards.lease_ms)
    ready.wait()
    go.wait()
    while lagging(engine):
        report = shards.round(now_ms=db.now_ms())
        if not report.steps:
            time.sleep(0.5)  # its share is done: wait like the live loop, leave the cores
    finished.put(time.time())
    shards.retire()
    engine.dispose()


def run(pg: Postgres, template: str, processes: int, tag: str) -> float:
    url = pg.url(tag)
    import psycopg

    with psycopg.connect(
        f"host=127.0.0.1 port={pg.port} user=postgres dbname=postgres", autocommit=True
    ) as admin:
        admin.execute(f'CREATE DATABASE "{tag}" TEMPLATE "{template}"')
    ctx = multiprocessing.get_context("spawn")
    ready = ctx.Barrier(processes + 1)
    go = ctx.Event()
    finished = ctx.Queue()
    procs = [ctx.Process(target=worker, args=(url, ready, go, finished)) for _ in range(processes)]
    for p in procs:
        p.start()
    ready.wait()
    start = time.time()
    go.set()
    ends = [finished.get(timeout=3600) for _ in procs]
    for p in procs:
        p.join()
    return max(ends) - start


def live_step(url: str, tail: list[db.Reading], devices: int) -> None:
    """One process's live round: every device's next hour arrives, then a round with nothing
    new (alerts still judge silence on the wall clock every round)."""
    engine = db.make_engine(url)
    db.store_batch(engine, tail, [])
    shards = ShardedAnalysis(engine, lease_s=120, devices_per_commit=20)
    for label in ("a new hour per device", "nothing new"):
        report = shards.round(now_ms=db.now_ms())
        assert len(report.analysed) == devices, report
        print(
            f"live round, {label:22s}: {report.seconds:6.2f} s for {devices} devices, "
            f"{1000 * report.seconds / devices:6.1f} ms per device"
        )
    shards.retire()
    with engine.connect() as c:
        size = c.execute(sa.text("SELECT pg_total_relation_size('readings')")).scalar_one()
        count = c.execute(sa.text("SELECT count(*) FROM readings")).scalar_one()
    per_reading = size / count
    print(
        f"disk: {per_reading:.0f} bytes per stored reading (table and indexes), "
        f"{per_reading * 525_600 / 1e6:.0f} MB per device-year at one reading a minute"
    )
    engine.dispose()


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--devices", type=int, default=24)
    parser.add_argument("--days", type=float, default=3.0)
    parser.add_argument("--workers", default="1,2,4")
    args = parser.parse_args()
    pg = Postgres()
    pg.start()
    try:
        template = "fleet"
        tail = store_fleet(pg.create_database(template), args.devices, args.days)
        hours = args.devices * args.days * 24 - args.devices
        print(f"fleet: {args.devices} devices x {args.days:g} days = {hours:.0f} device-hours")
        print(f"cores: {os.cpu_count()}, load average before: {os.getloadavg()[0]:.2f}")
        base = None
        for n in (int(w) for w in args.workers.split(",")):
            seconds = run(pg, template, n, f"run_{n}")
            rate = hours / seconds
            base = base or rate
            print(
                f"{n} analysis process(es): {seconds:6.1f} s, {rate:7.1f} device-hours/s "
                f"({rate / base:.2f}x one process), load average {os.getloadavg()[0]:.2f}"
            )
        live_step(pg.url(f"run_{args.workers.split(',')[0]}"), tail, args.devices)
    finally:
        pg.destroy()


if __name__ == "__main__":
    main()
