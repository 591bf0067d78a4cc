"""Sharded analysis: several processes share the fleet through device leases.

Each process running the analytics role on PostgreSQL is a worker with its own id. A round
claims the worker's fair share of devices (see :mod:`tecfleet.ingest.db.leases`), then, a few
devices per transaction, holds their leases and brings each one's estimates and alerts up to
its newest stored reading, exactly as the single-process round does for every device. Estimates,
alert changes, their outbox notices and each device's progress commit under the held lease, so
a device is never analysed by two processes at once and no alert is raised twice: a worker that
dies mid-transaction leaves nothing behind but its leases, which lapse after ``lease_s`` and are
taken over from the last committed progress.
"""

from __future__ import annotations

import os
import socket
import time
import uuid
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy.engine import Connection, Engine
from threadpoolctl import threadpool_limits

from tecfleet.analytics.alerts.engine import evaluate_device
from tecfleet.analytics.alerts.policy import AlertPolicy, policy_for
from tecfleet.analytics.runner.device import analyze_device
from tecfleet.analytics.runner.settings import AnalysisSettings
from tecfleet.ingest.db import alert_records as records
from tecfleet.ingest.db import analysis as analysis_db
from tecfleet.ingest.db import leases as leases_db
from tecfleet.ingest.db import now_ms as wall_ms
from tecfleet.ingest.db.analysis import DeviceToAnalyze

__all__ = ["ShardReport", "ShardedAnalysis", "new_worker_id"]


def new_worker_id() -> str:
    """Host, process and a random part: a restarted process is a new worker."""
    return f"{socket.gethostname()[:60]}:{os.getpid()}:{uuid.uuid4().hex[:8]}"


@dataclass
class ShardReport:
    """What one round of one worker did."""

    workers: int = 0
    held: list[str] = field(default_factory=list)
    analysed: list[str] = field(default_factory=list)
    steps: int = 0
    estimates: int = 0
    alert_changes: int = 0
    seconds: float = 0.0


class ShardedAnalysis:
    """The analysis rounds of one worker process.

    ``lease_s`` [s]: how long a claimed device stays this worker's without a round renewing it
    (and how long a silent worker still counts as alive); ``devices_per_commit`` [count]:
    devices analysed per transaction.
    """

    def __init__(
        self,
        engine: Engine,
        *,
        lease_s: float,
        devices_per_commit: int,
        worker_id: str | None = None,
        settings: AnalysisSettings | None = None,
        policy: AlertPolicy | None = None,
    ) -> None:
        self.engine = engine
        self.worker_id = worker_id or new_worker_id()
        self.lease_ms = int(lease_s * 1000)
        self.devices_per_commit = max(devices_per_commit, 1)
        self.settings = settings or AnalysisSettings()
        self.policy = policy or AlertPolicy()

    def round(self, now_ms: int | None = None) -> ShardReport:
        """Claim this worker's share, then analyse it; ``now_ms`` [ms] is the wall clock that
        judges silence (offline), the live service's clock when None."""
        started = time.perf_counter()
        report = ShardReport()
        with self.engine.begin() as conn:
            report.workers = leases_db.heartbeat(conn, self.worker_id, wall_ms(), self.lease_ms)
        with self.engine.begin() as conn:
            report.held = leases_db.claim(
                conn, self.worker_id, wall_ms(), self.lease_ms, report.workers
            )
        step = self.devices_per_commit
        with threadpool_limits(self.settings.blas_threads, user_api="blas"):
            for k in range(0, len(report.held), step):
                if k:
                    # A long round still counts as alive, so the others keep to their share.
                    with self.engine.begin() as conn:
                        leases_db.heartbeat(conn, self.worker_id, wall_ms(), self.lease_ms)
                self._analyse_batch(report.held[k : k + step], now_ms, report)
        report.seconds = time.perf_counter() - started
        return report

    def _analyse_batch(self, ids: list[str], now_ms: int | None, report: ShardReport) -> None:
        """Hold ``ids`` again, then analyse those still this worker's in one transaction."""
        with self.engine.begin() as conn:
            mine = leases_db.hold(conn, self.worker_id, ids, wall_ms(), self.lease_ms)
            overrides = records.load_overrides(conn)
            done = leases_db.progress(conn, mine)
            devs = leases_db.devices_of(conn, mine)
            # Only the states of devices with a complete step to analyse are read: a round
            # comes far more often than a step completes.
            step_ms = self.settings.step_s * 1000
            due = [
                d.device_id
                for d in devs
                if d.device_id in done
                and d.last_reading_ms // step_ms * step_ms > done[d.device_id]
            ]
            states = analysis_db.read_states(conn, due)
            for dev in devs:
                saved = None
                if dev.device_id in done:
                    saved = (done[dev.device_id], states.get(dev.device_id, {}))
                self._analyse(conn, dev, saved, now_ms, overrides, report)

    def retire(self) -> None:
        """Give the leases back at once (a clean stop); the others take over next round."""
        with self.engine.begin() as conn:
            leases_db.retire(conn, self.worker_id)

    def _analyse(
        self,
        conn: Connection,
        dev: Any,
        saved: tuple[int, dict[str, Any]] | None,
        now_ms: int | None,
        overrides: dict[tuple[str, str], dict[str, Any]],
        report: ShardReport,
    ) -> None:
        """Estimates, then alerts, of one held device in the caller's transaction; ``saved``
        is its progress and carried state (None if never analysed)."""
        target = DeviceToAnalyze(dev.device_id, dev.module, dev.cabinet, int(dev.last_reading_ms))
        steps, estimates = analyze_device(conn, target, saved, self.settings)
        report.steps += steps
        report.estimates += estimates
        report.analysed.append(dev.device_id)
        reference = now_ms if now_ms is not None else wall_ms()
        policy = policy_for(self.policy, overrides, dev.device_id, dev.site)
        changes = evaluate_device(conn, dev, policy, reference, reference)
        report.alert_changes += len(changes)
