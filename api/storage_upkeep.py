"""The service's scheduled storage job: day partitions made ahead of the clock and the
retention policy applied, on start and then every ``retention_every_s``. Any number of
processes may run it; on PostgreSQL one at a time does the work."""

from __future__ import annotations

import logging
import threading

from sqlalchemy.engine import Engine

from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import now_ms
from tecfleet.ingest.db.retention import RetentionPolicy, RetentionReport, apply_retention
from tecfleet.ingest.errors import TecfleetError
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)


def retention_policy(settings: Settings) -> RetentionPolicy:
    """The policy the settings ask for (raises ``StoreError`` on an unusable interval)."""
    return RetentionPolicy(
        raw_keep_days=settings.raw_retention_days,
        rollup_span_s=settings.rollup_interval_s,
        rollup_keep_days=settings.rollup_retention_days,
        partitions_ahead_days=settings.partitions_ahead_days,
    )


def describe(report: RetentionReport) -> str:
    """One line for a person: what one run did."""
    if report.skipped:
        return "retention: another process is applying it; nothing done here"
    if report.cutoff_ms is None:
        kept = "raw readings kept for ever"
    else:
        before = ms_to_rfc3339(report.cutoff_ms)
        kept = f"{report.readings_removed} raw readings from before {before} removed"

    return (
        f"retention: {report.partitions_added} partitions added, {kept}, "
        f"{report.buckets_written} rollup intervals written, "
        f"{report.partitions_dropped} partitions dropped, "
        f"{report.rollups_removed} expired rollups removed"
    )


def upkeep_loop(
    engine: Engine, policy: RetentionPolicy, every_s: float, stopping: threading.Event
) -> None:
    """Run the storage job every ``every_s`` seconds until ``stopping``; a failed run is logged
    and retried next time."""
    while not stopping.is_set():
        try:
            log.info(describe(apply_retention(engine, policy, now_ms())))
        except TecfleetError:
            log.exception("storage upkeep failed")
        stopping.wait(every_s)


def start_upkeep(engine: Engine, settings: Settings, stopping: threading.Event) -> threading.Thread:
    """Start the job in a thread; an unusable policy fails here, before the service runs."""
    policy = retention_policy(settings)
    thread = threading.Thread(
        target=upkeep_loop,
        args=(engine, policy, settings.retention_every_s, stopping),
        name="tecfleet-upkeep",
        daemon=True,
    )
    thread.start()
    return thread
