"""A run over devices: who has complete steps to analyse, in this process or in workers."""

from __future__ import annotations

import multiprocessing
import os
import time
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass, field
from typing import Any

from sqlalchemy.engine import Engine
from threadpoolctl import threadpool_limits

from tecfleet.analytics.runner.device import analyze_device
from tecfleet.analytics.runner.settings import AnalysisSettings
from tecfleet.ingest import db
from tecfleet.ingest.db import analysis as analysis_db
from tecfleet.ingest.db.analysis import DeviceToAnalyze

__all__ = ["AnalysisReport", "analyze"]


@dataclass
class AnalysisReport:
    """What a run of :func:`analyze` did."""

    devices: int = 0
    steps: int = 0
    estimates: int = 0
    skipped: dict[str, str] = field(default_factory=dict)
    seconds: float = 0.0


def analyze(
    engine: Engine, *, device_id: str | None = None, settings: AnalysisSettings | None = None
) -> AnalysisReport:
    """Bring every estimate of one device (or of all) up to its newest stored reading."""
    cfg = settings or AnalysisSettings()
    started = time.perf_counter()
    report = AnalysisReport()
    with engine.connect() as conn:
        devices = analysis_db.devices_with_readings(conn, device_id)
        done = analysis_db.done_ms_by_device(conn)
    pending = {
        dev.device_id: _pending_steps(engine, dev, done.get(dev.device_id), cfg) for dev in devices
    }
    # Only the states of devices with a complete step to analyse are read: the service runs
    # far more often than a step completes.
    due = [dev.device_id for dev in devices if dev.device_id in done and pending[dev.device_id]]
    with engine.connect() as conn:
        states = analysis_db.read_states(conn, due)
    jobs = [
        (
            dev,
            (done[dev.device_id], states.get(dev.device_id, {})) if dev.device_id in done else None,
        )
        for dev in devices
    ]
    workers = _workers_for(engine, list(pending.values()), cfg)
    if workers > 1:
        # Largest first, so the processes finish together.
        jobs.sort(key=lambda j: -pending[j[0].device_id])
        url = engine.url.render_as_string(hide_password=False)
        ctx = multiprocessing.get_context("spawn")  # no inherited threads or connections
        with ProcessPoolExecutor(max_workers=workers, mp_context=ctx) as pool:
            futures = [pool.submit(_device_job, url, dev, saved, cfg) for dev, saved in jobs]
            results = [f.result() for f in futures]
    else:
        results = []
        # One transaction for the run: a live run is an hour per device, and a commit each
        # (a disk flush under synchronous=FULL) would cost more than the analysis.
        with engine.begin() as conn, threadpool_limits(cfg.blas_threads, user_api="blas"):
            for dev, saved in jobs:
                results.append((dev.device_id, *analyze_device(conn, dev, saved, cfg)))
    for dev_id, n_steps, n_est in sorted(results):
        report.devices += 1
        report.steps += n_steps
        report.estimates += n_est
        if n_steps == 0:
            report.skipped[dev_id] = "no complete step since the last run"
    report.seconds = time.perf_counter() - started
    return report


def _pending_steps(
    engine: Engine, dev: DeviceToAnalyze, done_ms: int | None, cfg: AnalysisSettings
) -> int:
    # Complete steps of a device not yet analysed.
    step = cfg.step_s * 1000
    if done_ms is not None:
        done = done_ms
    else:
        with engine.connect() as conn:
            first = db.first_reading_ms(conn, dev.device_id)
        if first is None:
            return 0
        done = first // step * step
    return max(dev.last_reading_ms // step * step - done, 0) // step


def _workers_for(engine: Engine, pending: list[int], cfg: AnalysisSettings) -> int:
    """Worker processes for this run: 1 unless several devices have much to catch up on."""
    workers = cfg.workers if cfg.workers is not None else min(2, os.cpu_count() or 1)
    database = engine.url.database or ""
    if workers <= 1 or sum(p > 0 for p in pending) < 2 or sum(pending) < cfg.parallel_min_steps:
        return 1
    if engine.url.get_backend_name() == "sqlite" and database in ("", ":memory:"):
        return 1  # a private in-memory database cannot be opened by another process
    return min(workers, len(pending))


#: Engines of a worker process, by URL (one per process, opened on its first job).
_WORKER_ENGINES: dict[str, Engine] = {}


def _device_job(
    url: str,
    dev: DeviceToAnalyze,
    saved: tuple[int, dict[str, Any]] | None,
    cfg: AnalysisSettings,
) -> tuple[str, int, int]:
    engine = _WORKER_ENGINES.get(url)
    if engine is None:
        engine = _WORKER_ENGINES[url] = db.make_engine(url)
    with engine.begin() as conn, threadpool_limits(cfg.blas_threads, user_api="blas"):
        return (dev.device_id, *analyze_device(conn, dev, saved, cfg))
