"""Sharded analysis on PostgreSQL: two `tecfleet serve --roles analytics` processes share a
fleet, one is killed with SIGKILL in the middle of a transaction, and the survivor takes its
devices over once their leases lapse.

The reference is the single-process analysis of the same stored readings (values the code
produced itself): sharding must change nothing, so every device ends with the same estimates,
the same alerts and the same outbox notices, none of them twice.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from collections import Counter
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
import sqlalchemy as sa

from tecfleet.analytics import alerts, runner
from tecfleet.analytics.runner.leases import ShardedAnalysis
from tecfleet.ingest import db
from tecfleet.ingest.db import leases as leases_db
from tecfleet.ingest.db.fleet import register
from tests.analytics.synthetic import Truth, simulate
from tests.ingest.mqtt_helpers import wait_for
from tests.services import Postgres

pytestmark = [pytest.mark.postgres, pytest.mark.slow]

DEVICES = 8
DAYS = 4.0
LEASE_S = 3.0
STEP_MS = 3_600_000


def _store_fleet(url: str, before_readings: Callable[[sa.Engine], None] | None = None) -> sa.Engine:
    """Every unit's readings; half the units registered with limits their cabinet cannot
    keep. The registrations go first, then ``before_readings`` runs (the analysers start),
    then each unit's readings arrive in one transaction."""
    engine = db.make_engine(url)
    db.migrate(engine)
    for k in range(0, DEVICES, 2):
        # A high limit below the thermostat's band: the cabinet is out of its limits.
        cabinet = {"setpoint_c": 5.0, "low_limit_c": 2.0, "high_limit_c": 4.0}
        register(engine, f"unit-{k}", {"site": "north", "cabinet": cabinet})
    if before_readings is not None:
        before_readings(engine)
    for k in range(DEVICES):
        frame = simulate(Truth(), DAYS, seed=201 + k, door_every_h=9.0)
        rows = [
            db.Reading(f"unit-{k}", int(r.ts_ms), r.t_cabinet, r.t_cold, r.t_hot, r.t_ambient,
                       r.current, r.voltage)
            for r in frame.itertuples()
        ]  # fmt: skip
        db.store_batch(engine, rows, [])
    return engine


def _outcome(engine: sa.Engine) -> dict[str, Any]:
    """Estimates per device, alerts and notices as stored (for the comparison)."""
    with engine.connect() as c:
        estimates = Counter(
            dict(c.execute(sa.text("SELECT device_id, count(*) FROM estimates GROUP BY 1")).all())
        )
        alert_rows = c.execute(sa.text("SELECT device_id, kind, opened_ms FROM alerts")).all()
        notices = c.execute(
            sa.text(
                "SELECT a.device_id, a.kind, a.opened_ms, n.event FROM notifications n"
                " JOIN alerts a ON a.id = n.alert_id"
            )
        ).all()
    return {
        "estimates": estimates,
        "alerts": Counter(tuple(r) for r in alert_rows),
        "notices": Counter(tuple(r) for r in notices),
    }


def _all_done(engine: sa.Engine) -> bool:
    with engine.connect() as c:
        lag = c.execute(
            sa.text(
                "SELECT count(*) FROM devices d LEFT JOIN analysis_state s USING (device_id)"
                " LEFT JOIN alert_progress p USING (device_id)"
                " WHERE s.done_ms IS NULL OR s.done_ms < d.last_reading_ms / :step * :step"
                " OR p.done_ms IS NULL OR p.done_ms < d.last_reading_ms"
            ),
            {"step": STEP_MS},
        ).scalar_one()
    return int(lag) == 0


def _heartbeats(engine: sa.Engine) -> int:
    with engine.connect() as c:
        return int(c.execute(sa.text("SELECT count(*) FROM analysis_workers")).scalar_one())


def _lease_writers(engine: sa.Engine) -> int:
    """Backends other than this one inside a transaction that holds lease rows locked."""
    with engine.connect() as c:
        found = c.execute(
            sa.text(
                "SELECT count(DISTINCT pid) FROM pg_locks WHERE relation ="
                " 'analysis_leases'::regclass AND mode = 'RowExclusiveLock'"
                " AND pid <> pg_backend_pid()"
            )
        ).scalar_one()
    return int(found)


def _lease_owners(engine: sa.Engine) -> set[str]:
    """Process ids of the last owners of every device's lease, lapsed or not."""
    with engine.connect() as c:
        owners = c.execute(sa.text("SELECT owner FROM analysis_leases")).scalars().all()
    return {str(owner).split(":")[1] if owner else "" for owner in owners}


def _owners(engine: sa.Engine) -> int:
    with engine.connect() as c:
        return len(set(leases_db.holders(c, db.now_ms()).values()))


def _worker(url: str, log: Path) -> subprocess.Popen[bytes]:
    env = dict(
        os.environ,
        TECFLEET_ANALYSIS_LEASE_S=str(LEASE_S),
        TECFLEET_ANALYSIS_DEVICES_PER_COMMIT="1",
    )
    with log.open("wb") as out:
        return subprocess.Popen(
            [sys.executable, "-m", "tecfleet.api.cli", "serve", "--roles", "analytics",
             "--db", url, "--analyze-every", "0.2"],
            env=env, stdout=out, stderr=out,
        )  # fmt: skip


def test_a_killed_analyser_is_taken_over_and_nothing_is_done_twice(
    postgres: Postgres, tmp_path: Path
) -> None:
    reference = _store_fleet(postgres.create_database(f"t_ref_{os.getpid()}"))
    runner.analyze(reference, settings=runner.AnalysisSettings(workers=1))
    alerts.evaluate(reference, now_ms=db.now_ms())
    expected = _outcome(reference)
    assert sum(expected["estimates"].values()) > 0
    assert len({a[0] for a in expected["alerts"]}) >= DEVICES // 2  # every unit out of limits

    url = postgres.create_database(f"t_shard_{os.getpid()}")
    workers: list[subprocess.Popen[bytes]] = []

    def start_both(engine: sa.Engine) -> None:
        # Both analysers up before any reading: the fleet is split from the first round, so
        # the one killed below dies with work of its own undone.
        workers.extend(_worker(url, tmp_path / f"{name}.log") for name in ("victim", "survivor"))
        assert wait_for(lambda: _heartbeats(engine) == 2, 120, 0.05)

    try:
        engine = _store_fleet(url, start_both)
        victim, survivor = workers
        # Both holding devices and inside a transaction at once: kill one right there.
        assert wait_for(
            lambda: _owners(engine) == 2 and _lease_writers(engine) >= 2 and not _all_done(engine),
            120,
            0.01,
        )
        victim.send_signal(signal.SIGKILL)
        victim.wait(10)
        with engine.connect() as c:
            held = leases_db.holders(c, db.now_ms())
        orphaned = {d for d, owner in held.items() if f":{victim.pid}:" in owner}
        assert orphaned, held  # the victim held devices when it died
        assert not _all_done(engine)
        assert wait_for(lambda: _all_done(engine), 300, every_s=0.5), (
            tmp_path / "survivor.log"
        ).read_text()[-3000:]
        # The survivor takes every device over once the victim's leases and heartbeat lapse.
        assert wait_for(lambda: _lease_owners(engine) == {str(survivor.pid)}, 60)
    finally:
        for worker in workers[1:]:  # the survivor stops cleanly, handing its leases back
            worker.send_signal(signal.SIGTERM)
            worker.wait(60)
        for worker in workers:
            if worker.poll() is None:
                worker.kill()
    got = _outcome(engine)
    assert got["estimates"] == expected["estimates"]
    assert got["alerts"] == expected["alerts"]
    assert max(got["alerts"].values()) == 1  # no alert raised twice
    assert got["notices"] == expected["notices"]
    assert max(got["notices"].values()) == 1  # no notice written twice
    assert "Traceback" not in (tmp_path / "survivor.log").read_text()


def test_two_workers_split_the_fleet_and_a_clean_stop_hands_it_over(postgres: Postgres) -> None:
    engine = _store_fleet(postgres.create_database(f"t_split_{os.getpid()}"))
    first = ShardedAnalysis(engine, lease_s=60, devices_per_commit=2, worker_id="w-1")
    second = ShardedAnalysis(engine, lease_s=60, devices_per_commit=2, worker_id="w-2")
    first.round()  # alone: the whole fleet
    assert len(first.round().held) == DEVICES
    second.round()  # a second worker is seen: the first gives back its excess
    first.round()
    b = second.round()
    a = first.round()
    assert len(a.held) == len(b.held) == DEVICES // 2
    assert not set(a.held) & set(b.held)
    first.retire()
    assert len(second.round().held) == DEVICES
    assert _all_done(engine)
