"""The agent's main loop: read the sources, stamp, buffer, send the backlog oldest first.

One thread does all of it (paho's network thread aside), so the buffer has a single user. Each
turn: every source that is due is read and its readings are buffered together with the
source's new position; acknowledged readings leave the buffer; then, while connected and under
the in-flight window, the oldest buffered readings go out as one batch message, paced at
``backlog_messages_per_s``. A stop (SIGTERM) lets what is in flight be acknowledged, says
``offline`` and closes the buffer; anything not acknowledged is sent again after a restart.

With a ``[report]`` table the readings are samples instead: they wait in the buffer's
``samples`` and one reading per interval is sent, carrying the interval's summaries
(:mod:`.intervals`).
"""

from __future__ import annotations

import logging
import threading
import time
import uuid
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path
from typing import Protocol

from tecfleet.ingest.agent.buffer import Buffer, Stamped
from tecfleet.ingest.agent.intervals import close_intervals
from tecfleet.ingest.agent.link import Link
from tecfleet.ingest.agent.options import AgentConfig, Calibration, SourceSpec
from tecfleet.ingest.agent.sources import CommandSource, FollowedFile, Polled, Sample
from tecfleet.ingest.agent.sysfs import SysfsSource

log = logging.getLogger(__name__)

_BOOT_ID_FILE = Path("/proc/sys/kernel/random/boot_id")
# The longest wait between two turns while idle [s]; bounds how late a stop is noticed.
_IDLE_WAIT_S = 0.2


class Source(Protocol):
    key: str
    every_s: float

    def poll(self, position: str | None) -> Polled: ...


def make_source(spec: SourceSpec, config: AgentConfig) -> Source:
    if spec.kind in ("csv", "jsonl"):
        return FollowedFile(spec, config.options)
    if spec.kind == "command":
        return CommandSource(spec, config.options)
    return SysfsSource(spec, config.options)


def clock_is_set(now_s: float, release_year: int) -> bool:
    """False while the wall clock is before the agent's release year: obviously never set."""
    return now_s >= datetime(release_year, 1, 1, tzinfo=UTC).timestamp()


def boot_id() -> str:
    """This boot's id (Linux), else one for this process: the monotonic clock's epoch."""
    try:
        return _BOOT_ID_FILE.read_text().strip()
    except OSError:
        return f"process-{uuid.uuid4()}"


def calibrated(sample: Sample, calibration: dict[str, Calibration]) -> dict[str, float | bool]:
    """The sample's values with each channel's scale and offset applied."""
    out = dict(sample.values)
    for name, cal in calibration.items():
        value = out.get(name)
        if isinstance(value, float):
            out[name] = value * cal.scale + cal.offset
    return out


class Agent:
    """Sources -> buffer -> broker, for one device."""

    def __init__(self, config: AgentConfig, wall_clock: Callable[[], float] = time.time) -> None:
        self.config = config
        self._wall_clock = wall_clock
        self.buffer = Buffer(config.buffer, config.options.buffer_max_readings)
        self.link = Link(config)
        self.sources = [make_source(spec, config) for spec in config.sources]
        self._boot = boot_id()
        self._last_stamp_ms = 0
        self._clock_warned = False

    def run(self, stop: threading.Event) -> None:
        """Until ``stop`` is set; then a clean stop."""
        options = self.config.options
        due = [0.0] * len(self.sources)
        sent_up_to = 0  # buffer id of the newest reading handed to the connection
        next_send = 0.0
        self.link.start()
        if self.config.report is not None:
            self._report()  # intervals closed by samples buffered before a crash
        try:
            while not stop.is_set():
                now = time.monotonic()
                for index, source in enumerate(self.sources):
                    if now >= due[index]:
                        due[index] = now + source.every_s
                        self._read(source)
                self._settle()
                busy = False
                if (
                    self.link.connected.is_set()
                    and self.link.in_flight() < options.max_inflight_messages
                    and now >= next_send
                ):
                    rows = self.buffer.ready(sent_up_to, options.batch_max_readings)
                    if rows:
                        self.link.send(rows)
                        sent_up_to = rows[-1].id
                        next_send = now + 1.0 / options.backlog_messages_per_s
                        busy = True
                wake = min([*due, next_send if busy else now + _IDLE_WAIT_S])
                stop.wait(max(0.0, min(wake - time.monotonic(), _IDLE_WAIT_S)))
        finally:
            self._finish()

    def _read(self, source: Source) -> None:
        polled = source.poll(self.buffer.position(source.key))
        if not polled.samples and polled.position is None and not polled.bad_lines:
            return
        stamped = [self._stamp(sample) for sample in polled.samples]
        if self.config.report is not None:
            late = self.buffer.add_samples(stamped, source.key, polled.position, polled.bad_lines)
            if late:
                log.warning("%d samples older than the last report left out", late)
            if stamped:
                self._report()
            return
        dropped = self.buffer.add(stamped, source.key, polled.position, polled.bad_lines)
        if dropped:
            log.warning("buffer full: dropped the %d oldest readings", dropped)

    def _report(self) -> None:
        """Queue the reports of the intervals the buffered samples close."""
        assert self.config.report is not None
        stamped = self.buffer.samples()
        if not stamped:
            return
        samples = [Sample(s.ts_ms / 1000.0, s.values) for s in stamped if s.ts_ms is not None]
        reports, keep_from_s = close_intervals(samples, self.config.report)
        if keep_from_s is None:
            return
        for report in reports:
            if report.summary.reason is not None and self.config.report.summaries:
                log.info(
                    "report at %.3f sent without summaries: %s", report.ts_s, report.summary.reason
                )
        readings = [
            Stamped(round(r.ts_s * 1000.0), {**r.values, **r.summary.fields}) for r in reports
        ]
        dropped = self.buffer.add_reports(readings, round(keep_from_s * 1000.0))
        if dropped:
            log.warning("buffer full: dropped the %d oldest readings", dropped)

    def _stamp(self, sample: Sample) -> Stamped:
        values = calibrated(sample, self.config.calibration)
        if sample.ts_s is not None:
            return Stamped(round(sample.ts_s * 1000.0), values)
        wall_s = self._wall_clock()
        if not clock_is_set(wall_s, self.config.options.release_year):
            if not self._clock_warned:
                log.warning(
                    "the wall clock is unset (%s); readings are held until it is set",
                    datetime.fromtimestamp(wall_s, UTC).isoformat(),
                )
                self._clock_warned = True
            return Stamped(None, values, time.monotonic_ns(), self._boot)
        # Strictly increasing: readings stamped in one go must not share a millisecond.
        self._last_stamp_ms = max(round(wall_s * 1000.0), self._last_stamp_ms + 1)
        return Stamped(self._last_stamp_ms, values)

    def _settle(self) -> None:
        """Forget what was acknowledged; give held readings their time once the clock is set."""
        done = self.link.acknowledged()
        if done:
            self.buffer.remove(done)
        wall_s = self._wall_clock()
        if self._clock_warned and clock_is_set(wall_s, self.config.options.release_year):
            fixed = self.buffer.restamp(self._boot, round(wall_s * 1000.0), time.monotonic_ns())
            log.info("the wall clock is set; %d held readings stamped", fixed)
            self._clock_warned = False
            if self.config.report is not None:
                self._report()

    def _finish(self) -> None:
        deadline = time.monotonic() + 5.0
        while self.link.in_flight() and time.monotonic() < deadline:
            self._settle()
            time.sleep(0.05)
        self._settle()
        self.link.stop()
        counts = self.buffer.counts()
        self.buffer.close()
        log.info(
            "agent stopped: %d readings waiting, %d held without time, %d sent, %d dropped, "
            "%d unreadable lines",
            counts["pending"],
            counts["held"],
            counts["sent"],
            counts["dropped"],
            counts["bad_lines"],
        )
