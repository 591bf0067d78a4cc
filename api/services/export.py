"""CSV exports of readings, estimates, alerts and the audit trail, streamed: rows are read a
chunk at a time and written out as they come, so an export of any length holds only one
chunk in memory."""

from __future__ import annotations

import csv
import io
from collections.abc import Collection, Iterable, Iterator, Sequence
from typing import Any

import orjson
from sqlalchemy.engine import Engine

from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import calibration as calibration_db
from tecfleet.ingest.db import export as export_db

#: Bytes of CSV gathered before they are sent [bytes].
_FLUSH_BYTES = 64 * 1024

READING_HEADER = ("ts", *export_db.READING_EXPORT[1:])
ESTIMATE_HEADER = ("at", "key", "value", "stderr", "n", "reliable", "note", "basis")
ALERT_HEADER = (
    "id", "device_id", "kind", "severity", "state", "opened_at", "updated_at", "resolved_at",
    "summary", "evidence",
)  # fmt: skip


def csv_stream(header: Sequence[str], rows: Iterable[Sequence[Any]]) -> Iterator[bytes]:
    """The header and rows as CSV (RFC 4180 line ends), in pieces of about 64 KiB."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(header)
    for row in rows:
        writer.writerow(row)
        if buffer.tell() >= _FLUSH_BYTES:
            yield buffer.getvalue().encode()
            buffer.seek(0)
            buffer.truncate()
    yield buffer.getvalue().encode()


def reading_rows(
    engine: Engine, device_id: str, start_ms: int, end_ms: int, *, raw: bool = False
) -> Iterator[tuple[Any, ...]]:
    """Readings as CSV rows of :data:`READING_HEADER`, calibrated unless ``raw``."""
    offsets: list[calibration_db.Offset] = []
    if not raw:
        with engine.connect() as conn:
            offsets = calibration_db.active_offsets(conn, device_id)
    for r in export_db.iter_readings(engine, device_id, start_ms, end_ms):
        values = r._asdict()
        if offsets:
            values = calibration_db.calibrate_row(values, offsets)
        yield (ms_to_rfc3339(values["ts_ms"]), *(values[c] for c in export_db.READING_EXPORT[1:]))


def estimate_rows(
    engine: Engine, device_id: str, start_ms: int, end_ms: int, key: str | None
) -> Iterator[tuple[Any, ...]]:
    for r in export_db.iter_estimates(engine, device_id, start_ms, end_ms, key):
        yield (ms_to_rfc3339(r.at_ms), r.key, r.value, r.stderr, r.n, r.reliable, r.note, r.basis)


def alert_rows(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None,
    sites: Collection[str] | None,
) -> Iterator[tuple[Any, ...]]:
    for r in export_db.iter_alerts(engine, start_ms, end_ms, device_id=device_id, sites=sites):
        yield (
            r.id,
            r.device_id,
            r.kind,
            r.severity,
            r.state,
            ms_to_rfc3339(r.opened_ms),
            ms_to_rfc3339(r.updated_ms),
            ms_to_rfc3339(r.resolved_ms),
            r.summary,
            orjson.dumps(r.evidence, option=orjson.OPT_SERIALIZE_NUMPY).decode(),
        )
