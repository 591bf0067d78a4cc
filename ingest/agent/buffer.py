"""The agent's on-disk buffer (stdlib ``sqlite3``): every reading waits here until acknowledged.

A reading is written here before anything is sent, in one transaction with the position its
source reached, so a crash (even ``kill -9``) neither loses a reading nor reads it twice. A
reading leaves the buffer only when the broker acknowledged the message that carried it; a
resend after a lost acknowledgement is harmless because the service stores a device's reading
once per timestamp.

Policy when full (``buffer_max_readings``): the oldest readings are dropped, so the newest state
of the cooler always gets through, and the ``dropped`` counter says how many were lost.

Readings made while the wall clock was unset carry no time but the monotonic clock and the boot
they were made in; :meth:`Buffer.restamp` gives them their time once the wall clock is set,
within the same boot. They are never sent without a time.

When the agent reports by interval (``[report]``), what the sources give goes first to
``samples`` (with the source's position, in one transaction); closing an interval moves its
report to ``pending`` and forgets the samples before it in one transaction, so a crash
neither loses an interval nor reports it twice. The last report's sample stays: it starts the
next interval. A sample older than the last report (its interval is gone) is counted as late.
``samples`` has the same cap as ``pending``: while the clock stays unset, or a source gives no
sample past an interval's end, the oldest samples are dropped and ``dropped_samples`` counts
them, so a stalled interval cannot fill the controller's disk.
"""

from __future__ import annotations

import fcntl
import json
import sqlite3
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Any

from tecfleet.ingest.errors import TecfleetError

_SCHEMA = """
CREATE TABLE IF NOT EXISTS pending (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    seq INTEGER NOT NULL,
    ts_ms INTEGER,
    mono_ns INTEGER,
    boot_id TEXT,
    body TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS pending_unstamped ON pending (boot_id) WHERE ts_ms IS NULL;
CREATE TABLE IF NOT EXISTS samples (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    ts_ms INTEGER,
    mono_ns INTEGER,
    boot_id TEXT,
    body TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS positions (source TEXT PRIMARY KEY, position TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS counters (name TEXT PRIMARY KEY, value INTEGER NOT NULL);
"""

COUNTERS = ("next_seq", "dropped", "bad_lines", "sent", "late_samples", "dropped_samples")
#: Counter holding the time of the last interval report [ms since the epoch].
_REPORTED_UP_TO = "reported_up_to_ms"


class BufferError(TecfleetError):
    """The buffer file cannot be opened or written."""


@dataclass(frozen=True, slots=True)
class Stamped:
    """A reading ready for the buffer: its time [ms since the epoch], or the monotonic clock
    [ns] and boot id to stamp it with later."""

    ts_ms: int | None
    values: dict[str, Any]
    mono_ns: int | None = None
    boot_id: str | None = None


@dataclass(frozen=True, slots=True)
class Row:
    """A buffered reading ready to send."""

    id: int
    seq: int
    ts_ms: int
    body: str

    def item(self) -> dict[str, Any]:
        """The payload object: time in Unix seconds, seq, then the channels."""
        return {"ts": self.ts_ms / 1000.0, "seq": self.seq, **json.loads(self.body)}


class Buffer:
    """One SQLite file; used from one thread."""

    def __init__(self, path: Path, max_readings: int) -> None:
        self.max_readings = max_readings
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            self._lock = _hold_lock(path.with_name(path.name + ".lock"))
            # Each write opens its transaction with BEGIN IMMEDIATE; ``with self._db`` commits.
            self._db = sqlite3.connect(path, isolation_level="IMMEDIATE")
            # WAL with a full sync on every commit: a committed reading survives a power cut.
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=FULL")
            self._db.executescript(_SCHEMA)
        except (OSError, sqlite3.Error) as exc:
            raise BufferError(f"agent buffer {path}: {exc}") from exc

    def close(self) -> None:
        self._db.close()
        self._lock.close()

    def position(self, source: str) -> str | None:
        row = self._db.execute("SELECT position FROM positions WHERE source = ?", (source,))
        found = row.fetchone()
        return None if found is None else str(found[0])

    def add(
        self, readings: Sequence[Stamped], source: str, position: str | None, bad_lines: int = 0
    ) -> int:
        """Store readings (numbered on) with the source's new position; returns how many were
        dropped to keep the cap."""
        try:
            with self._db:
                self._insert_pending(readings)
                self._moved_on(source, position, bad_lines)
                return self._enforce_cap("pending", "dropped")
        except sqlite3.Error as exc:
            raise BufferError(f"could not write the agent buffer: {exc}") from exc

    def add_samples(
        self, samples: Sequence[Stamped], source: str, position: str | None, bad_lines: int = 0
    ) -> int:
        """Store samples for interval reports with the source's new position; returns how many
        were late (older than the last report) and left out. Past the cap the oldest samples
        are dropped (counted in ``dropped_samples``)."""
        floor_ms = self._counter(_REPORTED_UP_TO)
        kept = [s for s in samples if s.ts_ms is None or s.ts_ms >= floor_ms]
        try:
            with self._db:
                self._db.executemany(
                    "INSERT INTO samples (ts_ms, mono_ns, boot_id, body) VALUES (?,?,?,?)",
                    [(s.ts_ms, s.mono_ns, s.boot_id, json.dumps(s.values)) for s in kept],
                )
                self._bump("late_samples", len(samples) - len(kept))
                self._moved_on(source, position, bad_lines)
                self._enforce_cap("samples", "dropped_samples")
        except sqlite3.Error as exc:
            raise BufferError(f"could not write the agent buffer: {exc}") from exc
        return len(samples) - len(kept)

    def samples(self) -> list[Stamped] | None:
        """The open interval's samples, oldest first; None while some still wait for a time."""
        (held,) = self._db.execute("SELECT COUNT(*) FROM samples WHERE ts_ms IS NULL").fetchone()
        if held:
            return None
        rows = self._db.execute("SELECT ts_ms, body FROM samples ORDER BY ts_ms, id")
        return [Stamped(int(ts_ms), json.loads(body)) for ts_ms, body in rows]

    def add_reports(self, reports: Sequence[Stamped], keep_from_ms: int) -> int:
        """Queue interval reports and forget the samples before ``keep_from_ms``, in one
        transaction; returns how many readings were dropped to keep the cap."""
        try:
            with self._db:
                self._insert_pending(reports)
                self._db.execute("DELETE FROM samples WHERE ts_ms < ?", (keep_from_ms,))
                self._db.execute(
                    "INSERT INTO counters (name, value) VALUES (?, ?) "
                    "ON CONFLICT (name) DO UPDATE SET value = excluded.value",
                    (_REPORTED_UP_TO, keep_from_ms),
                )
                return self._enforce_cap("pending", "dropped")
        except sqlite3.Error as exc:
            raise BufferError(f"could not write the agent buffer: {exc}") from exc

    def _insert_pending(self, readings: Sequence[Stamped]) -> None:
        seq = self._counter("next_seq")
        self._db.executemany(
            "INSERT INTO pending (seq, ts_ms, mono_ns, boot_id, body) VALUES (?,?,?,?,?)",
            [
                (seq + n, r.ts_ms, r.mono_ns, r.boot_id, json.dumps(r.values))
                for n, r in enumerate(readings)
            ],
        )
        self._bump("next_seq", len(readings))

    def _moved_on(self, source: str, position: str | None, bad_lines: int) -> None:
        self._bump("bad_lines", bad_lines)
        if position is not None:
            self._db.execute(
                "INSERT INTO positions (source, position) VALUES (?, ?) "
                "ON CONFLICT (source) DO UPDATE SET position = excluded.position",
                (source, position),
            )

    def ready(self, after_id: int, limit: int) -> list[Row]:
        """Stamped readings after ``after_id``, oldest first."""
        rows = self._db.execute(
            "SELECT id, seq, ts_ms, body FROM pending WHERE id > ? AND ts_ms IS NOT NULL "
            "ORDER BY id LIMIT ?",
            (after_id, limit),
        )
        return [Row(*row) for row in rows]

    def remove(self, ids: Iterable[int]) -> None:
        """Forget readings the broker acknowledged."""
        chosen = [(i,) for i in ids]
        with self._db:
            self._db.executemany("DELETE FROM pending WHERE id = ?", chosen)
            self._bump("sent", len(chosen))

    def restamp(self, boot_id: str, wall_ms: int, mono_ns: int) -> int:
        """Give readings (and samples) of this boot made while the clock was unset their time;
        how many."""
        fixed = 0
        with self._db:
            for table in ("pending", "samples"):
                cursor = self._db.execute(
                    f"UPDATE {table} SET ts_ms = ? - (? - mono_ns) / 1000000 "
                    "WHERE ts_ms IS NULL AND boot_id = ?",
                    (wall_ms, mono_ns, boot_id),
                )
                fixed += cursor.rowcount
            # A sample whose time now falls before the last report missed its interval.
            late = self._db.execute(
                "DELETE FROM samples WHERE ts_ms < ?", (self._counter(_REPORTED_UP_TO),)
            ).rowcount
            self._bump("late_samples", late)
        return fixed

    def counts(self) -> dict[str, int]:
        """Pending, held (no time yet) and the counters."""
        pending, held = self._db.execute(
            "SELECT COUNT(*), COUNT(*) - COUNT(ts_ms) FROM pending"
        ).fetchone()
        out = {"pending": int(pending), "held": int(held)}
        out.update({name: self._counter(name) for name in COUNTERS})
        return out

    def _counter(self, name: str) -> int:
        row = self._db.execute("SELECT value FROM counters WHERE name = ?", (name,)).fetchone()
        return 0 if row is None else int(row[0])

    def _bump(self, name: str, by: int) -> None:
        if by:
            self._db.execute(
                "INSERT INTO counters (name, value) VALUES (?, ?) "
                "ON CONFLICT (name) DO UPDATE SET value = value + excluded.value",
                (name, by),
            )

    def _enforce_cap(self, table: str, counter: str) -> int:
        """Drop the oldest rows of ``table`` past the cap; how many (added to ``counter``)."""
        (count,) = self._db.execute(f"SELECT COUNT(*) FROM {table}").fetchone()
        excess = int(count) - self.max_readings
        if excess <= 0:
            return 0
        self._db.execute(
            f"DELETE FROM {table} WHERE id IN (SELECT id FROM {table} ORDER BY id LIMIT ?)",
            (excess,),
        )
        self._bump(counter, excess)
        return excess


def _hold_lock(path: Path) -> IO[bytes]:
    """An exclusive lock held while the file stays open: one agent per buffer. The kernel
    drops it when the process ends, however it ends."""
    handle = path.open("ab")
    try:
        fcntl.flock(handle.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    except OSError as exc:
        handle.close()
        raise BufferError(f"another agent is using the buffer ({path} is locked)") from exc
    return handle
