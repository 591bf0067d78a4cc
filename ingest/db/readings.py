"""Readings in and out: the ingester's idempotent batch write and the one reading loader."""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np
import sqlalchemy as sa
from numpy.typing import NDArray
from sqlalchemy.dialects import postgresql, sqlite
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db.calibration import calibrate_arrays
from tecfleet.ingest.db.engine import marker, now_ms
from tecfleet.ingest.db.tables import SUMMARY_COLUMNS, devices, readings, rejects
from tecfleet.ingest.errors import StoreError


class Reading(NamedTuple):
    """One validated reading of one device (temperatures in °C; a face temperature is None
    where the unit has no probe on that face).

    A named tuple rather than a dataclass: the ingester makes one per reading, and a tuple in
    the insert's column order goes to the driver as it is.
    """

    device_id: str
    ts_ms: int
    t_cabinet: float
    t_cold: float | None
    t_hot: float | None
    t_ambient: float
    current: float
    voltage: float
    seq: int | None = None
    rh: float | None = None
    door_open: bool | None = None
    # The optional interval summaries, in the order of ``SUMMARY_COLUMNS`` (None: not sent).
    interval_s: float | None = None
    t_cabinet_mean: float | None = None
    t_cold_mean: float | None = None
    t_hot_mean: float | None = None
    t_ambient_mean: float | None = None
    current_mean: float | None = None
    current_sq_mean: float | None = None
    power_mean: float | None = None
    on_share: float | None = None
    t_cabinet_min: float | None = None
    t_cabinet_max: float | None = None


assert Reading._fields[-len(SUMMARY_COLUMNS) :] == SUMMARY_COLUMNS
_NO_SUMMARY = (None,) * len(SUMMARY_COLUMNS)


@dataclass(frozen=True, slots=True)
class Reject:
    """One payload (or one item of a batch) that cannot be stored, and why."""

    topic: str
    payload: bytes
    code: str
    reason: str
    device_id: str | None = None
    item: int | None = None


@dataclass(frozen=True, slots=True)
class StatusUpdate:
    device_id: str
    status: str
    at_ms: int


def _newer(bound: Any) -> Any:
    """The device's newest stored reading is older than the batch's (or there is none)."""
    return sa.or_(devices.c.last_reading_ms.is_(None), devices.c.last_reading_ms < bound)


def _older(bound: Any) -> Any:
    """The device's first reading time is later than ``bound`` (or unknown)."""
    return sa.or_(devices.c.first_reading_ms.is_(None), devices.c.first_reading_ms > bound)


# Every right-hand side reads the row as it was before the update (SQL's rule), so the
# cabinet temperature follows the same test as the time it belongs to.
_DEVICE_BUMP = (
    devices.update()
    .where(devices.c.device_id == sa.bindparam("b_device"))
    .values(
        readings=devices.c.readings + sa.bindparam("b_count"),
        last_reading_ms=sa.case(
            (_newer(sa.bindparam("b_newest")), sa.bindparam("b_newest")),
            else_=devices.c.last_reading_ms,
        ),
        last_t_cabinet=sa.case(
            (_newer(sa.bindparam("b_newest")), sa.bindparam("b_t_cabinet")),
            else_=devices.c.last_t_cabinet,
        ),
        first_reading_ms=sa.case(
            (_older(sa.bindparam("b_oldest")), sa.bindparam("b_oldest")),
            else_=devices.c.first_reading_ms,
        ),
    )
)

_OWN = readings.c.device_id == sa.bindparam("b_device")
_NEWEST_TS = sa.select(sa.func.max(readings.c.ts_ms)).where(_OWN).scalar_subquery()
_OLDEST_TS = sa.select(sa.func.min(readings.c.ts_ms)).where(_OWN).scalar_subquery()

_DEVICE_RECOUNT = (
    devices.update()
    .where(devices.c.device_id == sa.bindparam("b_device"))
    .values(
        readings=sa.select(sa.func.count()).select_from(readings).where(_OWN).scalar_subquery(),
        last_reading_ms=_NEWEST_TS,
        last_t_cabinet=sa.select(readings.c.t_cabinet)
        .where(_OWN, readings.c.ts_ms == _NEWEST_TS)
        .scalar_subquery(),
        # The first ever: readings dropped by retention do not move it later.
        first_reading_ms=sa.case(
            (_older(_OLDEST_TS), _OLDEST_TS), else_=devices.c.first_reading_ms
        ),
    )
)


#: Reading's fields without the interval summaries: most units send none, and a batch
#: without them is inserted without those columns.
_BASE_FIELDS = len(Reading._fields) - len(SUMMARY_COLUMNS)


def _insert_columns(summaries: bool) -> str:
    # Reading's field order (with or without the summaries), then the receive time.
    fields = Reading._fields if summaries else Reading._fields[:_BASE_FIELDS]
    return ", ".join((*fields, "received_ms"))


def _insert_readings_sql(connection: Connection, summaries: bool) -> str:
    columns = _insert_columns(summaries)
    values = ", ".join([marker(connection)] * (columns.count(",") + 1))
    return (
        f"INSERT INTO readings ({columns}) VALUES ({values})"
        " ON CONFLICT (device_id, ts_ms) DO NOTHING"
    )


#: Batches of at least this many readings go to PostgreSQL through COPY into a temporary table
#: and one INSERT ... SELECT from it; smaller ones through executemany. Measured by
#: tests/bench/bench_pg_store.py: about 1.4 times the rows per second from 200 readings a batch,
#: no gain at 50 (COPY pays a fixed cost of three more statements per batch).
COPY_MIN_ROWS = 200

_STAGE = "tecfleet_readings_in"
_STAGE_DDL = (
    f"CREATE TEMP TABLE IF NOT EXISTS {_STAGE} (device_id varchar(64), ts_ms bigint,"
    " t_cabinet float8, t_cold float8, t_hot float8, t_ambient float8, current float8,"
    " voltage float8, seq bigint, rh float8, door_open boolean, received_ms bigint"
    + "".join(f", {name} float8" for name in SUMMARY_COLUMNS)
    + ")"
)


def _copy_readings(connection: Connection, rows: Sequence[tuple[Any, ...]], summaries: bool) -> int:
    """Insert ``rows`` (Reading fields, with or without the summaries, then receive time)
    through COPY; returns how many were new. COPY itself cannot skip a reading already stored,
    so the batch goes to a temporary table of this session first and on with
    ``ON CONFLICT DO NOTHING``."""
    columns = _insert_columns(summaries)
    driver = connection.connection.driver_connection
    if driver is None:
        raise StoreError("the database connection is closed")
    with driver.cursor() as cursor:
        cursor.execute(_STAGE_DDL)
        with cursor.copy(f"COPY {_STAGE} ({columns}) FROM STDIN") as copy:
            for row in rows:
                copy.write_row(row)
        cursor.execute(
            f"INSERT INTO readings ({columns}) SELECT {columns} FROM {_STAGE}"
            " ON CONFLICT (device_id, ts_ms) DO NOTHING"
        )
        stored = int(cursor.rowcount)
        # emptied at once: the caller's transaction may store another batch
        cursor.execute(f"DELETE FROM {_STAGE}")
    return stored


def _insert(dialect_name: str, table: sa.Table) -> Any:
    if dialect_name == "postgresql":
        return postgresql.insert(table)
    return sqlite.insert(table)


def _bumps(batch_readings: Sequence[Reading]) -> list[dict[str, Any]]:
    """What each device gained from a batch of new readings: their count, the newest one's
    time and cabinet temperature, and the oldest one's time."""
    per_device: dict[str, dict[str, Any]] = {}
    for r in batch_readings:
        entry = per_device.get(r.device_id)
        if entry is None:
            per_device[r.device_id] = {
                "b_device": r.device_id, "b_count": 1, "b_newest": r.ts_ms,
                "b_t_cabinet": r.t_cabinet, "b_oldest": r.ts_ms,
            }  # fmt: skip
            continue
        entry["b_count"] += 1
        if r.ts_ms > entry["b_newest"]:
            entry["b_newest"], entry["b_t_cabinet"] = r.ts_ms, r.t_cabinet
        entry["b_oldest"] = min(entry["b_oldest"], r.ts_ms)
    return list(per_device.values())


def write_batch(
    connection: Connection,
    batch_readings: Sequence[Reading],
    batch_rejects: Sequence[Reject],
    statuses: Sequence[StatusUpdate] = (),
    *,
    payload_cap: int = 4096,
) -> int:
    """Store readings idempotently, plus rejects and status changes, in the caller's transaction.

    Returns the number of readings newly stored; a reading whose (device, timestamp) is already
    stored is skipped, so a redelivered message stores nothing twice.
    """
    dialect = connection.dialect.name
    received = now_ms()
    stored = 0
    device_ids = sorted({r.device_id for r in batch_readings} | {s.device_id for s in statuses})
    if device_ids:
        upsert = _insert(dialect, devices).on_conflict_do_nothing(index_elements=["device_id"])
        connection.execute(
            upsert, [{"device_id": d, "first_seen_ms": received, "readings": 0} for d in device_ids]
        )
    if batch_readings:
        # Straight to the driver's executemany: SQLAlchemy's per-row parameter processing
        # would cost more than the insert itself.
        tail = (received,)
        summaries = any(r[_BASE_FIELDS:] != _NO_SUMMARY for r in batch_readings)
        rows = [(r if summaries else r[:_BASE_FIELDS]) + tail for r in batch_readings]
        if dialect == "postgresql" and len(rows) >= COPY_MIN_ROWS:
            stored = _copy_readings(connection, rows, summaries)
        else:
            sql = _insert_readings_sql(connection, summaries)
            stored = connection.exec_driver_sql(sql, rows).rowcount
        if stored == len(rows):
            # Every row was new: the batch itself says what each device gained.
            connection.execute(_DEVICE_BUMP, _bumps(batch_readings))
        else:
            # Some rows were already stored (a redelivery or replay): recount those devices
            # from the index rather than guess which rows were new.
            touched = sorted({r.device_id for r in batch_readings})
            connection.execute(_DEVICE_RECOUNT, [{"b_device": d} for d in touched])
            stored = max(stored, 0)
    for status in statuses:
        connection.execute(
            devices.update()
            .where(devices.c.device_id == status.device_id)
            .where(sa.or_(devices.c.status_at_ms.is_(None), devices.c.status_at_ms <= status.at_ms))
            .values(status=status.status, status_at_ms=status.at_ms)
        )
    if batch_rejects:
        connection.execute(
            rejects.insert(),
            [
                {
                    "received_ms": received,
                    "topic": rej.topic[:1024],
                    "device_id": rej.device_id,
                    "item": rej.item,
                    "code": rej.code,
                    "reason": rej.reason[:2000],
                    "payload": bytes(rej.payload[:payload_cap]),
                    "payload_size": len(rej.payload),
                }
                for rej in batch_rejects
            ],
        )
    return stored


def store_batch(
    engine: Engine,
    batch_readings: Sequence[Reading],
    batch_rejects: Sequence[Reject] = (),
    statuses: Sequence[StatusUpdate] = (),
    *,
    payload_cap: int = 4096,
) -> int:
    """``write_batch`` in a transaction of its own; database failures become ``StoreError``."""
    try:
        with engine.begin() as connection:
            return write_batch(
                connection, batch_readings, batch_rejects, statuses, payload_cap=payload_cap
            )
    except SQLAlchemyError as exc:
        raise StoreError(f"could not store batch: {exc.__class__.__name__}: {exc}") from exc


def first_reading_ms(connection: Connection, device_id: str) -> int | None:
    """Time of a device's oldest stored reading (epoch ms UTC), None without readings."""
    first = connection.execute(
        sa.select(sa.func.min(readings.c.ts_ms)).where(readings.c.device_id == device_id)
    ).scalar()
    return None if first is None else int(first)


def carries_summaries(connection: Connection, device_id: str, start_ms: int, end_ms: int) -> bool:
    """Whether the device's newest reading with ``start_ms <= ts_ms < end_ms`` carries an
    interval summary (its ``interval_s``): one index lookup, so that a device that sends none
    is never loaded with them."""
    found = connection.execute(
        sa.select(readings.c.interval_s)
        .where(
            readings.c.device_id == device_id,
            readings.c.ts_ms >= start_ms,
            readings.c.ts_ms < end_ms,
        )
        .order_by(readings.c.ts_ms.desc())
        .limit(1)
    ).scalar()
    return found is not None


READING_COLUMNS = (
    "ts_ms",
    "seq",
    "t_cabinet",
    "t_cold",
    "t_hot",
    "t_ambient",
    "current",
    "voltage",
    "rh",
    "door_open",
)

#: What ``read_arrays`` may also read: the optional interval summaries, and when the service
#: stored each reading (wall clock, ms).
_RECEIPT_COLUMNS = (*SUMMARY_COLUMNS, "received_ms")

#: Columns that may be NULL; they come back as NaN.
_NULLABLE = frozenset({"seq", "t_cold", "t_hot", "rh", *SUMMARY_COLUMNS})
#: A missing door flag reads as closed (0), an open door as 1.
_SELECT_AS = {"door_open": "CASE WHEN door_open THEN 1 ELSE 0 END"}
#: Address space SQLite may map per connection for reading (only what the file holds is mapped).
_SQLITE_MMAP_BYTES = 1 << 30


def read_arrays(
    connection: Connection,
    device_id: str,
    columns: Sequence[str],
    start_ms: int,
    end_ms: int,
) -> NDArray[np.float64]:
    """Readings of one device with ``start_ms <= ts_ms < end_ms`` (epoch ms UTC), oldest first,
    as a float array with one column per name in ``columns`` (temperatures in °C as stored;
    NULL as NaN; ``door_open`` as 1/0), the device's calibration offsets added. Every
    analysis reads readings through here.

    Plain SQL on the driver's own cursor: building SQLAlchemy result rows costs more than the
    analysis of them. Milliseconds since 1970 stay below 2**53, so ``ts_ms`` is exact in float.
    """
    unknown = [c for c in columns if c not in READING_COLUMNS and c not in _RECEIPT_COLUMNS]
    if unknown:
        raise StoreError(f"unknown reading columns {unknown}; known: {list(READING_COLUMNS)}")
    m = marker(connection)
    select = ", ".join(_SELECT_AS.get(c, c) for c in columns)
    sql = (
        f"SELECT {select} FROM readings "
        f"WHERE device_id = {m} AND ts_ms >= {m} AND ts_ms < {m} ORDER BY ts_ms"
    )
    cursor = connection.connection.cursor()
    try:
        if connection.dialect.name == "sqlite":
            # A device's rows lie scattered over the whole table (devices report interleaved):
            # memory-mapped pages halve the cost of visiting them compared with read() calls.
            cursor.execute(f"PRAGMA mmap_size = {_SQLITE_MMAP_BYTES}")
        cursor.execute(sql, (device_id, int(start_ms), int(end_ms)))
        rows = cursor.fetchall()
    finally:
        cursor.close()
    k = len(columns)
    if not rows:
        return np.zeros((0, k), np.float64)
    try:
        # fromiter over the flattened rows is the fastest way in; it cannot take None.
        flat = itertools.chain.from_iterable(rows)
        arr = np.fromiter(flat, np.float64, len(rows) * k).reshape(-1, k)
    except TypeError:
        if _NULLABLE.isdisjoint(columns):
            raise
        # A NULL among the rows (a unit without a face probe, no humidity sensor ...).
        arr = np.array(rows, dtype=np.float64)
    # Stored values stay as received; calibration offsets apply as they are read.
    return calibrate_arrays(connection, device_id, columns, arr)


def load_readings(
    engine: Engine,
    device_id: str,
    start_ms: int | None = None,
    end_ms: int | None = None,
    columns: Sequence[str] = READING_COLUMNS,
) -> Any:
    """:func:`read_arrays` in a connection of its own, as a pandas DataFrame (``ts_ms`` int64);
    ``start_ms`` is inclusive and ``end_ms`` exclusive, either open when None."""
    import pandas as pd

    try:
        with engine.connect() as connection:
            arr = read_arrays(
                connection,
                device_id,
                columns,
                -(2**62) if start_ms is None else start_ms,
                2**62 if end_ms is None else end_ms,
            )
    except SQLAlchemyError as exc:
        raise StoreError(f"could not load readings of {device_id}: {exc}") from exc
    frame = pd.DataFrame({c: arr[:, j] for j, c in enumerate(columns)})
    if "ts_ms" in frame:
        frame["ts_ms"] = frame["ts_ms"].astype(np.int64)
    return frame
