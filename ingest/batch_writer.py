"""The ingester's one writer thread: batches off the queue, one commit each, then acknowledges.

A batch closes at ``batch_max_readings`` readings or ``batch_max_wait_s`` after its first
message, whichever comes first. Its readings, rejects and status changes are stored in one
transaction; only after the commit is each message acknowledged, in the order received. While
the database is down the writer retries with backoff and acknowledges nothing, so the broker
keeps the messages.
"""

from __future__ import annotations

import logging
import queue
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.ingest import metrics
from tecfleet.ingest.db import store_batch
from tecfleet.ingest.errors import StoreError
from tecfleet.ingest.payload import Parsed
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)

_STOP = object()


@dataclass(slots=True)
class Received:
    """One validated message waiting for its commit, with what its acknowledgement needs."""

    generation: int
    mid: int
    qos: int
    parsed: Parsed


class BatchWriter:
    """Takes ``Received`` messages off ``inbox``, commits them in batches, acknowledges them.

    ``run()`` is the writer thread's body; ``finish()`` asks it to commit what is queued and
    return. ``acknowledge`` is called for each message of a batch once the batch is committed.
    """

    def __init__(
        self,
        settings: Settings,
        engine: Engine,
        inbox: queue.Queue[Any],
        stopping: threading.Event,
        acknowledge: Callable[[Received], None],
    ) -> None:
        self.settings = settings
        self.engine = engine
        self._inbox = inbox
        self._stopping = stopping
        self._acknowledge = acknowledge

    def finish(self) -> None:
        """Let the writer commit everything queued so far, then return from ``run()``."""
        self._inbox.put(_STOP)

    def run(self) -> None:
        done = False
        while not done:
            first = self._inbox.get()
            if first is _STOP:
                break
            batch, done = _take_batch(
                self._inbox, first, self.settings.batch_max_readings, self.settings.batch_max_wait_s
            )
            self._commit(batch)
        leftovers = _drain(self._inbox)
        if leftovers:
            self._commit(leftovers, give_up_after_s=10.0)

    def _commit(self, batch: list[Received], give_up_after_s: float | None = None) -> None:
        readings = [r for item in batch for r in item.parsed.readings]
        rejects = [r for item in batch for r in item.parsed.rejects]
        statuses = [item.parsed.status for item in batch if item.parsed.status is not None]
        delay = 0.2
        started = time.monotonic()
        while True:
            try:
                with metrics.BATCH_SECONDS.time():
                    stored = store_batch(
                        self.engine,
                        readings,
                        rejects,
                        statuses,
                        payload_cap=self.settings.reject_payload_cap_bytes,
                    )
                break
            except StoreError as exc:
                metrics.STORE_FAILURES.inc()
                waited = time.monotonic() - started
                if self._stopping.is_set() and give_up_after_s is None:
                    give_up_after_s = 10.0
                if give_up_after_s is not None and waited > give_up_after_s:
                    # Not acknowledged: the broker hands these over again next session.
                    log.error("giving up on %d messages at shutdown: %s", len(batch), exc)
                    metrics.QUEUE_DEPTH.dec(len(batch))
                    return
                log.warning("database unavailable (%s); retrying in %.1f s", exc, delay)
                time.sleep(delay)
                delay = min(delay * 2, 10.0)
        metrics.READINGS_STORED.inc(stored)
        metrics.READINGS_DUPLICATE.inc(len(readings) - stored)
        for reject in rejects:
            metrics.REJECTS.labels(reject.code).inc()
        for item in batch:
            self._acknowledge(item)
        metrics.QUEUE_DEPTH.dec(len(batch))


def _take_batch(
    inbox: queue.Queue[Any], first: Received, max_readings: int, max_wait_s: float
) -> tuple[list[Received], bool]:
    """The batch opened by ``first``, and whether the stop marker closed it."""
    batch: list[Received] = [first]
    count = len(first.parsed.readings)
    deadline = time.monotonic() + max_wait_s
    while count < max_readings:
        remaining = deadline - time.monotonic()
        try:
            item = inbox.get(timeout=remaining) if remaining > 0 else inbox.get_nowait()
        except queue.Empty:
            break
        if item is _STOP:
            return batch, True
        batch.append(item)
        count += len(item.parsed.readings)
    return batch, False


def _drain(inbox: queue.Queue[Any]) -> list[Received]:
    """Whatever arrived before the stop marker was read."""
    leftovers = []
    while True:
        try:
            item = inbox.get_nowait()
        except queue.Empty:
            break
        if item is not _STOP:
            leftovers.append(item)
    return leftovers
