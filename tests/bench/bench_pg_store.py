"""PostgreSQL storage figures: readings/s stored through ``store_batch`` by executemany and by
COPY at several batch sizes, and the runner's live step on day-partitioned readings.

Run: ``python tests/bench/bench_pg_store.py [--part store,live] [--devices N] [--days D]``.
Prints figures; asserts nothing. Starts its own PostgreSQL cluster (Debian's server binaries).
"""

from __future__ import annotations

import argparse
import importlib
import statistics
import sys
import time
from pathlib import Path

import numpy as np
import sqlalchemy as sa
from alembic import command
from alembic.config import Config

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tecfleet.ingest import db
from tecfleet.ingest.db.retention import RetentionPolicy, apply_retention
from tests.bench.bench_diagnostics import _chunk_readings
from tests.services import Postgres

# the module, not the table that the package exports under the same name
store = importlib.import_module("tecfleet.ingest.db.readings")

DAY_MS = 86_400_000


def _synthetic(n: int, devices: int, start_ms: int, seed: int) -> list[db.Reading]:
    rng = np.random.default_rng(seed)
    values = rng.normal(size=(n, 6))
    return [
        db.Reading(f"dev-{i % devices:05d}", start_ms + (i // devices) * 60_000,
                   4 + v[0], -3 + v[1], 31 + v[2], 22 + v[3], 3 + abs(v[4]), 8 + v[5])
        for i, v in enumerate(values)
    ]  # fmt: skip


def part_store(pg: Postgres, total: int, seed: int) -> None:
    print(f"\n== store_batch on partitioned readings: {total} readings per run, seed {seed} ==")
    print("batch  executemany/s  COPY/s  ratio")
    now = db.now_ms()
    shipped = store.COPY_MIN_ROWS
    for size in (1, 10, 50, 200, 2000):
        rates = []
        for mode in ("executemany", "copy"):
            engine = db.make_engine(pg.create_database(f"store_{size}_{mode}"))
            db.migrate(engine)
            rows = _synthetic(total if size > 1 else total // 5, 500, now - DAY_MS, seed)
            store.COPY_MIN_ROWS = 10**9 if mode == "executemany" else 1
            db.store_batch(engine, rows[:size])  # devices registered, connection warm
            t0 = time.perf_counter()
            for i in range(size, len(rows), size):
                db.store_batch(engine, rows[i : i + size])
            rates.append((len(rows) - size) / (time.perf_counter() - t0))
            engine.dispose()
        print(f"{size:5d}  {rates[0]:13.0f}  {rates[1]:6.0f}  {rates[1] / rates[0]:5.2f}")
    store.COPY_MIN_ROWS = shipped


# The primary key carrying every reading column: one device's rows are read from index pages
# alone where the visibility map allows (an index-only scan).
_COVERING = (
    "ALTER TABLE readings DROP CONSTRAINT pk_readings; ALTER TABLE readings ADD CONSTRAINT"
    " pk_readings PRIMARY KEY (device_id, ts_ms) INCLUDE (seq, t_cabinet, t_cold, t_hot,"
    " t_ambient, current, voltage, rh, door_open, received_ms)"
)


def _plain_readings(engine: sa.Engine) -> None:
    """The readings table as it was before partitioning (revision 0005), for comparison."""
    config = Config()
    config.set_main_option("script_location", "tecfleet.ingest:migrations")
    with engine.begin() as connection:
        config.attributes["connection"] = connection
        command.downgrade(config, "0005")


def part_live(pg: Postgres, n_dev: int, days: float, seed: int, schema: str) -> None:
    """The live step with history in day partitions, as a running service keeps them, or in
    the plain table of revision 0005."""
    print(f"\n== Live step, {schema} readings: {n_dev} devices, {days:g} days, seed {seed} ==")
    start_s = 1_735_689_600.0  # 2025-01-01T00:00Z
    spec = sim.random_fleet(n_dev, seed=seed, start_s=start_s, days=days + 1.0)
    simulator = sim.Simulator(spec)
    engine = db.make_engine(pg.create_database(f"live_{seed}_{schema}_{time.time_ns()}"))
    db.migrate(engine)
    if schema == "plain":
        _plain_readings(engine)
    else:
        if schema == "covering":
            with engine.begin() as c:
                c.execute(sa.text(_COVERING))
        # the service's upkeep keeps day partitions ahead of the readings
        first_ms = int(start_s * 1000)
        apply_retention(engine, RetentionPolicy(partitions_ahead_days=int(days) + 3), first_ms)
    total = round(days * 86_400.0 / spec.interval_s)
    for _ in range(0, total, 360):
        db.store_batch(engine, _chunk_readings(spec, simulator.run(360)))
    with engine.connect().execution_options(isolation_level="AUTOCOMMIT") as c:
        c.execute(sa.text("VACUUM ANALYZE readings"))  # what autovacuum does to settled rows
    t0 = time.perf_counter()
    runner.analyze(engine)
    print(f"analyze from scratch: {time.perf_counter() - t0:.1f} s")
    hour = round(3600.0 / spec.interval_s)
    per_reading = []
    for _ in range(6):
        rows = _chunk_readings(spec, simulator.run(hour))
        db.store_batch(engine, rows)
        t0 = time.perf_counter()
        runner.analyze(engine)
        per_reading.append((time.perf_counter() - t0) / max(len(rows), 1))
    print(f"incremental: median over 6 hours {1e6 * statistics.median(per_reading):.0f} µs per "
          f"reading (range {1e6 * min(per_reading):.0f}-{1e6 * max(per_reading):.0f})")  # fmt: skip
    engine.dispose()


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--part", default="store,live")
    ap.add_argument("--readings", type=int, default=20_000)
    ap.add_argument("--devices", type=int, default=100)
    ap.add_argument("--days", type=float, default=3.0)
    ap.add_argument("--seed", type=int, default=301)
    ap.add_argument(
        "--schema", default="partitioned,plain",
        help="readings tables the live part runs on, in turn: partitioned (this revision), "
        "plain (revision 0005's table), covering (partitioned, every column in the key)",
    )  # fmt: skip
    args = ap.parse_args(argv)
    parts = set(args.part.split(","))
    pg = Postgres()
    pg.start()
    try:
        if "store" in parts:
            part_store(pg, args.readings, args.seed)
        if "live" in parts:
            for schema in args.schema.split(","):
                part_live(pg, args.devices, args.days, args.seed, schema)
    finally:
        pg.destroy()
    return 0


if __name__ == "__main__":
    sys.exit(main())
