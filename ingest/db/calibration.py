"""Calibration offsets: per-sensor corrections with validity dates, added to stored values as
they are read (stored readings stay as received), and the rewind of a device's analysis
when an offset changes the readings it has already analysed."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, NamedTuple

import numpy as np
import sqlalchemy as sa
from numpy.typing import NDArray
from sqlalchemy.engine import Connection, Engine, Row

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.tables import (
    analysis_state,
    calibration_offsets,
    estimates,
)
from tecfleet.ingest.errors import StoreError

#: Reading columns an offset may correct, with their units.
SENSORS = {
    "t_cabinet": "°C",
    "t_cold": "°C",
    "t_hot": "°C",
    "t_ambient": "°C",
    "current": "A",
    "voltage": "V",
    "rh": "%",
}


class Offset(NamedTuple):
    """Add ``offset`` to ``sensor`` for readings with ``valid_from_ms <= ts_ms <
    valid_to_ms`` (epoch ms UTC; ``valid_to_ms`` None: open-ended)."""

    sensor: str
    offset: float
    valid_from_ms: int
    valid_to_ms: int | None


def active_offsets(conn: Connection, device_id: str) -> list[Offset]:
    """The device's offsets in force (not withdrawn), oldest first."""
    c = calibration_offsets
    rows = conn.execute(
        sa.select(c.c.sensor, c.c.offset, c.c.valid_from_ms, c.c.valid_to_ms)
        .where(c.c.device_id == device_id, c.c.deleted_ms.is_(None))
        .order_by(c.c.id)
    ).all()
    return [Offset(r.sensor, float(r.offset), int(r.valid_from_ms), r.valid_to_ms) for r in rows]


def calibrate_arrays(
    conn: Connection,
    device_id: str,
    columns: Sequence[str],
    arr: NDArray[np.float64],
) -> NDArray[np.float64]:
    """``arr`` (one column per name in ``columns``, a row per reading) with the device's
    offsets added where they are valid. The hook of
    :func:`tecfleet.ingest.db.readings.read_arrays`."""
    if arr.shape[0] == 0 or not any(c in SENSORS for c in columns):
        return arr
    offsets = active_offsets(conn, device_id)
    if not offsets:
        return arr
    if "ts_ms" not in columns:
        raise StoreError("calibrated readings are read with their ts_ms")
    times = arr[:, list(columns).index("ts_ms")]
    for off in offsets:
        if off.sensor not in columns:
            continue
        inside = times >= off.valid_from_ms
        if off.valid_to_ms is not None:
            inside &= times < off.valid_to_ms
        arr[inside, list(columns).index(off.sensor)] += off.offset
    return arr


def calibrate_row(row: dict[str, Any], offsets: Sequence[Offset]) -> dict[str, Any]:
    """One reading (a dict with ``ts_ms``) with the offsets valid at its time added."""
    ts = row["ts_ms"]
    for off in offsets:
        value = row.get(off.sensor)
        if value is None or ts < off.valid_from_ms:
            continue
        if off.valid_to_ms is None or ts < off.valid_to_ms:
            row[off.sensor] = value + off.offset
    return row


def add_offset(
    engine: Engine,
    device_id: str,
    offset: Offset,
    note: str | None,
    created_by: str | None,
) -> int:
    """Store an offset and rewind the device's analysis to its start; its id."""
    with engine.begin() as conn:
        result = conn.execute(
            calibration_offsets.insert().values(
                device_id=device_id,
                sensor=offset.sensor,
                offset=offset.offset,
                valid_from_ms=offset.valid_from_ms,
                valid_to_ms=offset.valid_to_ms,
                note=note,
                created_ms=now_ms(),
                created_by=created_by,
            )
        )
        rewind_analysis(conn, device_id, offset.valid_from_ms)
        return int(result.inserted_primary_key[0])  # type: ignore[index]


def withdraw_offset(engine: Engine, device_id: str, offset_id: int) -> Row[Any] | None:
    """Withdraw an offset in force (kept for the record) and rewind the analysis to its
    start; the offset's row, or None when the device has no such offset in force."""
    c = calibration_offsets
    with engine.begin() as conn:
        row = conn.execute(
            sa.select(c).where(
                c.c.id == offset_id, c.c.device_id == device_id, c.c.deleted_ms.is_(None)
            )
        ).first()
        if row is None:
            return None
        conn.execute(c.update().where(c.c.id == offset_id).values(deleted_ms=now_ms()))
        rewind_analysis(conn, device_id, int(row.valid_from_ms))
        return row


def offset_rows(engine: Engine, device_id: str, *, withdrawn: bool = False) -> list[Row[Any]]:
    """The device's offsets, oldest first (withdrawn ones too when asked)."""
    c = calibration_offsets
    stmt = sa.select(c).where(c.c.device_id == device_id).order_by(c.c.id)
    if not withdrawn:
        stmt = stmt.where(c.c.deleted_ms.is_(None))
    with engine.connect() as conn:
        return list(conn.execute(stmt).all())


def rewind_analysis(conn: Connection, device_id: str, from_ms: int) -> None:
    """Make the runner analyse the device again from ``from_ms`` on (epoch ms UTC).

    The runner's carried state (fits, baselines, CUSUM sums) is only kept for its newest
    step, so the only state known to hold at ``from_ms`` is the empty one: the progress row
    goes and the runner starts over from the first reading. Estimates from ``from_ms`` on go
    too, so that they are written again from the corrected readings; earlier ones are
    recomputed from unchanged readings and kept as they are.

    Alert progress is left where it is: alerts already raised, acknowledged and notified are
    a record of what the service said at the time, and judging that history again would
    notify every receiver of it a second time. Evaluation goes on from its progress with
    corrected readings and the re-run estimates.
    """
    conn.execute(analysis_state.delete().where(analysis_state.c.device_id == device_id))
    conn.execute(
        estimates.delete().where(estimates.c.device_id == device_id, estimates.c.at_ms >= from_ms)
    )
