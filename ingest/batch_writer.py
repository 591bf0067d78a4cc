"""The ingester's one writer thread: batches off the inbox, one commit each, then acknowledges.

A batch closes at ``batch_max_readings`` readings or ``batch_max_wait_s`` after its first
message, whichever comes first. Its readings, rejects and status changes are stored in one
transaction; only after the commit is each message acknowledged, in the order received. While
the database is down the writer retries with backoff and acknowledges nothing, so the broker
keeps the messages.

The network thread hands messages over through an :class:`Inbox` that wakes the writer once a
batch, not once a message: two threads waking each other for every message cost more, under
the interpreter lock, than parsing the message.
"""

from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass

from sqlalchemy.engine import Engine

from tecfleet.ingest import metrics
from tecfleet.ingest.db import store_batch
from tecfleet.ingest.errors import StoreError
from tecfleet.ingest.payload import Parsed
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)

_TELEMETRY_MESSAGES = metrics.MESSAGES.labels("telemetry")
_STATUS_MESSAGES = metrics.MESSAGES.labels("status")


@dataclass(slots=True)
class Received:
    """One validated message waiting for its commit, with what its acknowledgement needs."""

    generation: int
    mid: int
    qos: int
    parsed: Parsed


class Inbox:
    """Messages from the network thread to the writer, handed over a batch at a time.

    ``put`` never blocks (the broker's in-flight window bounds what can arrive); ``take``
    blocks until a batch is complete: ``max_readings`` readings, ``max_messages`` messages (the
    broker's in-flight window: no more arrive before some are acknowledged), or ``max_wait_s``
    after the first message waiting.
    """

    def __init__(self, max_readings: int, max_wait_s: float, max_messages: int) -> None:
        self.max_readings = max_readings
        self.max_wait_s = max_wait_s
        self.max_messages = max_messages
        #: Most messages ever waiting at once [count].
        self.max_depth = 0
        self._items: list[Received] = []
        self._readings = 0
        self._lock = threading.Lock()
        self._waiting = threading.Event()  # set while something waits or once finished
        self._full = threading.Event()  # set while a whole batch waits or once finished
        self._finished = False
        self._first_at = 0.0  # monotonic arrival of the oldest message waiting [s]

    def __len__(self) -> int:
        return len(self._items)

    def put(self, item: Received) -> None:
        with self._lock:
            self._items.append(item)
            self._readings += len(item.parsed.readings)
            depth = len(self._items)
            if depth == 1:
                self._first_at = time.monotonic()
                self._waiting.set()
            if self._readings >= self.max_readings or depth >= self.max_messages:
                self._full.set()
        self.max_depth = max(self.max_depth, depth)

    def finish(self) -> None:
        """Let ``take`` hand out what waits without delay, then return None."""
        with self._lock:
            self._finished = True
            self._waiting.set()
            self._full.set()

    def take(self) -> list[Received] | None:
        """The next batch (possibly empty); None once finished and drained."""
        self._waiting.wait()
        self._full.wait(max(self._first_at + self.max_wait_s - time.monotonic(), 0.0))
        with self._lock:
            if not self._items:
                if self._finished:
                    return None
                self._waiting.clear()
                return []
            count, end = 0, 0
            while end < len(self._items) and count < self.max_readings:
                count += len(self._items[end].parsed.readings)
                end += 1
            batch, self._items = self._items[:end], self._items[end:]
            self._readings -= count
            self._first_at = time.monotonic()
            if not self._finished:
                if not self._items:
                    self._waiting.clear()
                if self._readings < self.max_readings and len(self._items) < self.max_messages:
                    self._full.clear()
        return batch


class BatchWriter:
    """Takes ``Received`` messages off ``inbox``, commits them in batches, acknowledges them.

    ``run()`` is the writer thread's body; ``finish()`` asks it to commit what is waiting and
    return. ``acknowledge`` is called for each message of a batch once the batch is committed.
    """

    def __init__(
        self,
        settings: Settings,
        engine: Engine,
        inbox: Inbox,
        stopping: threading.Event,
        acknowledge: Callable[[Received], None],
    ) -> None:
        self.settings = settings
        self.engine = engine
        self._inbox = inbox
        self._stopping = stopping
        self._acknowledge = acknowledge

    def finish(self) -> None:
        """Let the writer commit everything received so far, then return from ``run()``."""
        self._inbox.finish()

    def run(self) -> None:
        while True:
            batch = self._inbox.take()
            if batch is None:
                break
            if batch:
                metrics.QUEUE_DEPTH.set(len(batch) + len(self._inbox))
                self._commit(batch)
                metrics.QUEUE_DEPTH.set(len(self._inbox))

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
                    return
                log.warning("database unavailable (%s); retrying in %.1f s", exc, delay)
                time.sleep(delay)
                delay = min(delay * 2, 10.0)
        metrics.READINGS_STORED.inc(stored)
        metrics.READINGS_DUPLICATE.inc(len(readings) - stored)
        _STATUS_MESSAGES.inc(len(statuses))
        _TELEMETRY_MESSAGES.inc(len(batch) - len(statuses))
        for reject in rejects:
            metrics.REJECTS.labels(reject.code).inc()
        for item in batch:
            self._acknowledge(item)
