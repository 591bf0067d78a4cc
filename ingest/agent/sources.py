"""Where readings come from: a growing CSV or JSON-lines file, or a command's output.

A followed file is read from a position (inode, byte offset, line number) that the buffer stores
in the same transaction as the readings read up to it, so a restart (even after ``kill -9``)
resumes exactly there and never reads a line twice. Only complete lines (ending in a newline)
are read; a half-written last line waits for the next look. A file replaced by another (a new
inode) or cut shorter than the position is read again from its start.

A line that cannot be read is skipped, logged with its line number and counted; the service
checks ranges and types of what is sent, so the agent only turns text into numbers.
"""

from __future__ import annotations

import csv
import json
import logging
import os
import subprocess
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from tecfleet.ingest.agent.options import CHANNELS, AgentOptions, SourceSpec

log = logging.getLogger(__name__)

Value = float | bool


@dataclass(frozen=True, slots=True)
class Sample:
    """One reading as a source gave it: Unix seconds (None: stamp it now) and its channels."""

    ts_s: float | None
    values: dict[str, Value]


@dataclass(slots=True)
class Polled:
    """What one look at a source found, and the position to store with it."""

    samples: list[Sample] = field(default_factory=list)
    position: str | None = None
    bad_lines: int = 0


class LineError(ValueError):
    """One line of a source cannot be read; the message says why."""


def parse_ts(value: Any) -> float | None:
    """Unix seconds from RFC 3339 text with an offset or a number; None when empty."""
    if value is None or value == "":
        return None
    if isinstance(value, bool):
        raise LineError("ts must be RFC 3339 or Unix seconds, not a boolean")
    if isinstance(value, int | float):
        return float(value)
    text = str(value).strip()
    try:
        return float(text)
    except ValueError:
        pass
    try:
        parsed = datetime.fromisoformat(text)
    except ValueError as exc:
        raise LineError(f"ts {text[:40]!r} is neither RFC 3339 nor Unix seconds") from exc
    if parsed.utcoffset() is None:
        raise LineError(f"ts {text[:40]!r} has no UTC offset")
    return parsed.timestamp()


_TRUE = frozenset({"1", "true", "yes", "open"})
_FALSE = frozenset({"0", "false", "no", "closed"})


def channel_value(name: str, value: Any) -> Value:
    """A channel's value as a number (or the door flag as a boolean)."""
    if name == "door_open":
        if isinstance(value, bool):
            return value
        text = str(value).strip().lower()
        if text in _TRUE or text in _FALSE:
            return text in _TRUE
        raise LineError(f"door_open {str(value)[:20]!r} is not true/false")
    if isinstance(value, bool):
        raise LineError(f"{name} must be a number, not a boolean")
    try:
        return float(value)
    except (TypeError, ValueError) as exc:
        raise LineError(f"{name} {str(value)[:20]!r} is not a number") from exc


def sample_of(record: dict[str, Any]) -> Sample:
    """The sample in one record (a CSV row or a JSON object); empty cells are left out."""
    values = {
        name: channel_value(name, record[name])
        for name in CHANNELS
        if record.get(name) not in (None, "")
    }
    if not values:
        raise LineError("no channel of the payload is in this line")
    return Sample(parse_ts(record.get("ts")), values)


class FollowedFile:
    """A CSV (header of the payload's field names) or JSON-lines file that keeps growing."""

    def __init__(self, spec: SourceSpec, options: AgentOptions) -> None:
        assert spec.path is not None
        self.path = spec.path
        self.kind = spec.kind
        self.key = f"{spec.kind}:{spec.path}"
        self.every_s = spec.every_s or options.follow_every_s
        self.chunk_bytes = options.follow_chunk_bytes

    def poll(self, position: str | None) -> Polled:
        """Complete lines after ``position`` (at most one chunk), and the position after them."""
        try:
            handle = self.path.open("rb")
        except FileNotFoundError:
            return Polled()
        with handle:
            inode = os.fstat(handle.fileno()).st_ino
            offset, line_no = _resume(position, inode, os.fstat(handle.fileno()).st_size)
            header = self._header(handle) if self.kind == "csv" else None
            if header is not None and offset == 0:
                offset = handle.tell()
                line_no = 1
            handle.seek(offset)
            chunk = handle.read(self.chunk_bytes)
        end = chunk.rfind(b"\n")
        if end < 0:
            return Polled()
        polled = Polled()
        for raw in chunk[: end + 1].splitlines():
            line_no += 1
            if not raw.strip():
                continue
            try:
                polled.samples.append(self._parse(raw, header))
            except (LineError, UnicodeDecodeError) as exc:
                polled.bad_lines += 1
                log.warning("%s line %d skipped: %s", self.path, line_no, exc)
        polled.position = f"{inode}:{offset + end + 1}:{line_no}"
        return polled

    @staticmethod
    def _header(handle: Any) -> list[str] | None:
        first = handle.readline()
        if not first.endswith(b"\n"):
            return None
        return [name.strip() for name in next(csv.reader([first.decode("utf-8")]))]

    def _parse(self, raw: bytes, header: list[str] | None) -> Sample:
        text = raw.decode("utf-8")
        if header is None:
            try:
                record = json.loads(text)
            except json.JSONDecodeError as exc:
                raise LineError(f"not JSON: {exc.msg}") from exc
            if not isinstance(record, dict):
                raise LineError("not a JSON object")
            return sample_of(record)
        cells = next(csv.reader([text]))
        if len(cells) != len(header):
            raise LineError(f"{len(cells)} fields where the header names {len(header)}")
        return sample_of(dict(zip(header, cells, strict=True)))


def _resume(position: str | None, inode: int, size: int) -> tuple[int, int]:
    """(byte offset, line number) to go on from; the start for a new or shortened file."""
    if not position:
        return 0, 0
    stored_inode, offset, line_no = (int(part) for part in position.split(":"))
    if stored_inode != inode or offset > size:
        log.info("followed file was replaced or truncated; reading it from the start")
        return 0, 0
    return offset, line_no


class CommandSource:
    """A program run on a schedule that prints one JSON object per reading on its output."""

    def __init__(self, spec: SourceSpec, options: AgentOptions) -> None:
        self.command = list(spec.command)
        self.key = f"command:{' '.join(spec.command)}"
        self.every_s = spec.every_s or options.read_every_s
        self.timeout_s = options.command_timeout_s

    def poll(self, _position: str | None) -> Polled:
        try:
            done = subprocess.run(
                self.command, capture_output=True, timeout=self.timeout_s, check=False, text=True
            )
        except (OSError, subprocess.TimeoutExpired) as exc:
            log.warning("command %s failed: %s", self.command[0], exc)
            return Polled()
        if done.returncode != 0:
            log.warning(
                "command %s exited %d: %s", self.command[0], done.returncode, done.stderr[-300:]
            )
            return Polled()
        polled = Polled()
        for number, line in enumerate(done.stdout.splitlines(), start=1):
            if not line.strip():
                continue
            try:
                record = json.loads(line)
                if not isinstance(record, dict):
                    raise LineError("not a JSON object")
                polled.samples.append(sample_of(record))
            except (LineError, json.JSONDecodeError) as exc:
                polled.bad_lines += 1
                log.warning("command %s output line %d skipped: %s", self.command[0], number, exc)
        return polled
