"""Import of logged readings (CSV or JSON lines) with the same validation and rejects as MQTT.

A file is read line by line; its readings are handed, in chunks, to the very function that
checks MQTT payloads (:func:`tecfleet.ingest.payload.parse_message`, as a batch array on the
device's telemetry topic), and what passes is stored by the ingester's own idempotent batch
write. So a refused line becomes the same reject (code and sentence) as the same reading sent
over MQTT, with its line number in front, and a reading already stored is not stored again.

The formats (see ``ingest/PAYLOAD.md``):

- CSV: a header of the payload's field names (``ts`` first is usual), one reading a line;
  empty cells are left out. A line whose number of fields does not match the header is a
  ``bad_line`` reject.
- JSON lines: one payload per line, as it would be published: an object, a batch array or a
  SenML pack.

Importing a file twice stores its readings once (they are unique per device and timestamp) and
its rejects once: rejects are kept under ``import:<first 16 hex of the file's SHA-256>:<name>``,
and a file whose rejects are already kept does not add them again.
"""

from __future__ import annotations

import csv
import hashlib
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import orjson
from sqlalchemy.engine import Engine

from tecfleet.ingest.db import Reading, Reject, store_batch
from tecfleet.ingest.db.imports import rejects_kept_for
from tecfleet.ingest.errors import TecfleetError
from tecfleet.ingest.payload import parse_message
from tecfleet.ingest.settings import Settings

#: Readings handed to validation and stored in one transaction [readings]; the ingester's own
#: batches are of this order (``batch_max_readings`` 2000).
CHUNK_READINGS = 2000

_BOOLEAN_CELLS = {"true": True, "false": False, "1": True, "0": False}


class ImportFileError(TecfleetError):
    """A file cannot be imported at all (missing, unreadable, no header)."""


@dataclass
class FileReport:
    """What one file gave: lines read, readings stored, and every reject with its line."""

    path: Path
    lines: int = 0
    readings: int = 0
    stored: int = 0
    rejects: list[Reject] = field(default_factory=list)
    rejects_already_kept: bool = False

    @property
    def duplicates(self) -> int:
        return self.readings - self.stored


@dataclass(frozen=True, slots=True)
class _Line:
    number: int
    raw: bytes


def import_file(
    engine: Engine,
    settings: Settings,
    device_id: str,
    path: Path,
    progress: Callable[[int], object] | None = None,
) -> FileReport:
    """Validate and store one file's readings for ``device_id``; ``progress`` gets bytes read."""
    try:
        with path.open("rb") as whole:
            digest = hashlib.file_digest(whole, "sha256").hexdigest()
    except OSError as exc:
        raise ImportFileError(f"{path}: {exc.strerror or exc}") from exc
    report = FileReport(path)
    source = f"import:{digest[:16]}:{path.name}"[:1024]
    report.rejects_already_kept = rejects_kept_for(engine, source) > 0
    importer = _Importer(engine, settings, device_id, source, report)
    with path.open("rb") as handle:
        for chunk in _chunks(handle, progress):
            importer.take(chunk)
    importer.flush()
    return report


def _chunks(handle: Any, progress: Callable[[int], object] | None) -> Iterator[list[_Line]]:
    chunk: list[_Line] = []
    done_bytes = 0
    for number, raw in enumerate(handle, start=1):
        done_bytes += len(raw)
        chunk.append(_Line(number, raw.rstrip(b"\r\n")))
        if len(chunk) >= CHUNK_READINGS:
            yield chunk
            chunk = []
            if progress is not None:
                progress(done_bytes)
                done_bytes = 0
    if chunk:
        yield chunk
    if progress is not None and done_bytes:
        progress(done_bytes)


class _Importer:
    """Turns chunks of lines into validated readings and rejects, and stores them."""

    def __init__(
        self, engine: Engine, settings: Settings, device_id: str, source: str, report: FileReport
    ) -> None:
        self.engine = engine
        self.settings = settings
        self.device_id = device_id
        self.topic = f"{settings.topic_prefix}/{device_id}/telemetry"
        self.source = source
        self.report = report
        self.header: list[str] | None = None
        self.csv: bool | None = None
        self.readings: list[Reading] = []
        self.rejects: list[Reject] = []

    def take(self, lines: list[_Line]) -> None:
        items: list[Any] = []
        numbers: list[int] = []
        for line in lines:
            self.report.lines += 1
            if not line.raw.strip():
                continue
            if self.csv is None:
                self.csv = not line.raw.lstrip().startswith((b"{", b"["))
            item = self._csv_item(line) if self.csv else self._json_payload(line)
            if item is not None:
                items.append(item)
                numbers.append(line.number)
        if items:
            self._validate(items, numbers, lines)
        if len(self.readings) >= CHUNK_READINGS:
            self.flush()

    def flush(self) -> None:
        rejects = [] if self.report.rejects_already_kept else self.rejects
        if self.readings or rejects:
            self.report.stored += store_batch(
                self.engine,
                self.readings,
                rejects,
                payload_cap=self.settings.reject_payload_cap_bytes,
            )
        self.report.readings += len(self.readings)
        self.report.rejects.extend(self.rejects)
        self.readings, self.rejects = [], []

    def _csv_item(self, line: _Line) -> dict[str, Any] | None:
        try:
            cells = next(csv.reader([line.raw.decode("utf-8")]))
        except (UnicodeDecodeError, csv.Error) as exc:
            self._reject(line, "bad_line", f"cannot be read as CSV: {exc}")
            return None
        if self.header is None:
            # A spreadsheet's export may start with a byte order mark.
            self.header = [name.strip().lstrip("\ufeff") for name in cells]
            if "ts" not in self.header:
                raise ImportFileError(f"{self.report.path}: the CSV header has no ts column")
            return None
        if len(cells) != len(self.header):
            self._reject(
                line, "bad_line", f"{len(cells)} fields where the header names {len(self.header)}"
            )
            return None
        return {
            name: _cell(name, cell.strip())
            for name, cell in zip(self.header, cells, strict=True)
            if cell.strip()
        }

    def _json_payload(self, line: _Line) -> Any:
        try:
            return orjson.loads(line.raw)
        except orjson.JSONDecodeError:
            # The MQTT check explains exactly what is wrong with it.
            return _Raw(line.raw)

    def _validate(self, items: list[Any], numbers: list[int], lines: list[_Line]) -> None:
        raw_by_number = {line.number: line.raw for line in lines}
        objects = [(n, item) for n, item in zip(numbers, items, strict=True) if _plain(item)]
        if objects:
            payload = orjson.dumps([item for _n, item in objects])
            parsed = self._parse(payload)
            self.readings.extend(parsed.readings)
            for reject in parsed.rejects:
                number = objects[reject.item or 0][0]
                self._keep(reject, number, raw_by_number[number])
        for number, item in zip(numbers, items, strict=True):
            if _plain(item):
                continue
            # A batch array or a SenML pack on one line: checked as the message it is.
            payload = item.raw if isinstance(item, _Raw) else orjson.dumps(item)
            parsed = self._parse(payload)
            self.readings.extend(parsed.readings)
            for reject in parsed.rejects:
                self._keep(reject, number, raw_by_number[number])

    def _parse(self, payload: bytes) -> Any:
        return parse_message(
            self.topic,
            payload,
            prefix=self.settings.topic_prefix,
            now_s=time.time(),
            future_tolerance_s=self.settings.future_tolerance_s,
            max_payload_bytes=max(self.settings.max_payload_bytes, len(payload)),
        )

    def _keep(self, reject: Reject, number: int, raw: bytes) -> None:
        self.rejects.append(
            replace(
                reject,
                topic=self.source,
                payload=raw,
                reason=f"line {number}: {reject.reason}",
                item=number,
            )
        )

    def _reject(self, line: _Line, code: str, reason: str) -> None:
        reject = Reject(self.source, line.raw, code, reason, self.device_id)
        self._keep(reject, line.number, line.raw)


@dataclass(frozen=True, slots=True)
class _Raw:
    """A JSON line that does not decode, passed on as bytes for the MQTT check to explain."""

    raw: bytes


def _plain(item: Any) -> bool:
    """True for a reading object, which can go into a shared batch array."""
    return isinstance(item, dict) and "n" not in item and "bn" not in item


def _cell(name: str, text: str) -> Any:
    """A CSV cell as the JSON value a device would have sent; text the MQTT check refuses."""
    if name == "door_open":
        return _BOOLEAN_CELLS.get(text.lower(), text)
    if name == "seq":
        try:
            return int(text)
        except ValueError:
            return text
    if name == "device_id":
        return text
    try:
        return float(text)
    except ValueError:
        # ts in RFC 3339, or a value the check will refuse as the wrong type
        return text
