"""The analysis runner's stored data: estimates, each device's progress and carried state.

The runner writes estimate rows and a device's state in one transaction per run (or per
device in a worker process); the API reads estimates back through :func:`latest_estimates`
and :func:`estimate_rows`. The state is a JSON object whose meaning belongs to the runner:
here it goes in and out as text through the driver, exactly as given.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from itertools import chain
from typing import Any, NamedTuple

import orjson
import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from tecfleet.ingest.db.engine import marker, now_ms
from tecfleet.ingest.db.tables import analysis_state, devices, estimates, estimates_latest

__all__ = [
    "ESTIMATE_COLUMNS",
    "DeviceToAnalyze",
    "devices_with_readings",
    "done_ms_by_device",
    "estimate_rows",
    "latest_estimates",
    "read_states",
    "state_from_text",
    "state_text",
    "write_results",
]

#: Columns of an estimate row, in the order of the tuples :func:`write_results` takes.
ESTIMATE_COLUMNS = (
    "device_id", "key", "at_ms", "value", "stderr", "n", "reliable", "note", "basis",
)  # fmt: skip

#: Device states read per query (well under the bound parameters SQLite allows).
_STATES_PER_QUERY = 500


class DeviceToAnalyze(NamedTuple):
    """A registered device with stored readings: its registration and newest reading."""

    device_id: str
    module: Any
    cabinet: Any
    last_reading_ms: int


def devices_with_readings(conn: Connection, device_id: str | None = None) -> list[DeviceToAnalyze]:
    """Devices with at least one stored reading (one, or all by id), in id order."""
    dev_q = sa.select(
        devices.c.device_id,
        devices.c.module,
        devices.c.cabinet,
        devices.c.last_reading_ms,
    ).where(devices.c.last_reading_ms.is_not(None))
    if device_id is not None:
        dev_q = dev_q.where(devices.c.device_id == device_id)
    return [
        DeviceToAnalyze(d.device_id, d.module, d.cabinet, int(d.last_reading_ms))
        for d in conn.execute(dev_q.order_by(devices.c.device_id)).all()
    ]


def done_ms_by_device(conn: Connection) -> dict[str, int]:
    """End of the last analysed step of every device analysed before (epoch ms UTC)."""
    st = analysis_state
    return {
        r.device_id: int(r.done_ms) for r in conn.execute(sa.select(st.c.device_id, st.c.done_ms))
    }


def read_states(conn: Connection, device_ids: Sequence[str]) -> dict[str, dict[str, Any]]:
    """The carried states of these devices, each as the JSON object stored."""
    st = analysis_state
    states: dict[str, dict[str, Any]] = {}
    for k in range(0, len(device_ids), _STATES_PER_QUERY):
        q = sa.select(st.c.device_id, sa.cast(st.c.state, sa.Text).label("state")).where(
            st.c.device_id.in_(device_ids[k : k + _STATES_PER_QUERY])
        )
        states.update((r.device_id, state_from_text(r.state)) for r in conn.execute(q))
    return states


#: Estimate rows per statement on PostgreSQL: 9 parameters each, well under its 65,535.
_ROWS_PER_STATEMENT = 1000


def _insert_estimates(conn: Connection, rows: list[tuple[Any, ...]]) -> None:
    """Insert estimate rows (a row already stored at that time is kept). The driver's own
    cursor: SQLAlchemy's per-row parameter handling costs more than the statement itself for
    thousands of rows. On PostgreSQL many rows a statement, since ``estimates_latest`` is kept
    by a trigger fired once per statement; SQLite's executemany is one statement a row anyway."""
    mark = marker(conn)
    one = f"({', '.join([mark] * len(ESTIMATE_COLUMNS))})"
    head = f"INSERT INTO estimates ({', '.join(ESTIMATE_COLUMNS)}) VALUES "
    tail = " ON CONFLICT (device_id, key, at_ms) DO NOTHING"
    cursor = conn.connection.cursor()
    try:
        if conn.dialect.name != "postgresql":
            cursor.executemany(head + one + tail, rows)
            return
        for k in range(0, len(rows), _ROWS_PER_STATEMENT):
            chunk = rows[k : k + _ROWS_PER_STATEMENT]
            cursor.execute(head + ", ".join([one] * len(chunk)) + tail, list(chain(*chunk)))
    finally:
        cursor.close()


def write_results(
    conn: Connection, device_id: str, rows: list[tuple[Any, ...]], done: int, state: dict[str, Any]
) -> None:
    """Store a device's new estimate rows (in :data:`ESTIMATE_COLUMNS` order; rows already
    stored are kept) and its progress ``done`` (epoch ms UTC) with its carried state."""
    if rows:
        _insert_estimates(conn, rows)
    # The driver's own cursor and orjson: through SQLAlchemy's JSON type, the state's
    # statement and encoding cost more than an hour's analysis of the device.
    mark = marker(conn)
    as_json = f"CAST({mark} AS JSON)" if conn.dialect.name == "postgresql" else mark
    sql = (
        "INSERT INTO analysis_state (device_id, done_ms, state, updated_ms) "
        f"VALUES ({mark}, {mark}, {as_json}, {mark}) ON CONFLICT (device_id) DO UPDATE SET "
        "done_ms = excluded.done_ms, state = excluded.state, updated_ms = excluded.updated_ms"
    )
    cursor = conn.connection.cursor()
    try:
        cursor.execute(sql, (device_id, done, state_text(state), now_ms()))
    finally:
        cursor.close()


def state_text(state: dict[str, Any]) -> str:
    """A carried state as the JSON text stored."""
    # orjson writes NaN as null where the standard library writes NaN: a state holding either
    # goes through the standard library, so that loading it gives back what was stored.
    out = orjson.dumps(state, option=orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS)
    return json.dumps(state) if b"null" in out else out.decode()


def state_from_text(text: str) -> dict[str, Any]:
    """A stored state's JSON text back as the object it was; TypeError if it is no object."""
    try:
        state = orjson.loads(text)
    except orjson.JSONDecodeError:
        state = json.loads(text)  # NaN, as the standard library writes it
    if not isinstance(state, dict):
        raise TypeError(f"analysis state is {type(state).__name__}, not an object")
    return state


_ESTIMATE_READ = (
    estimates.c.key,
    estimates.c.at_ms,
    estimates.c.value,
    estimates.c.stderr,
    estimates.c.n,
    estimates.c.reliable,
    estimates.c.note,
    estimates.c.basis,
)


def latest_estimates(engine: Engine, device_id: str) -> list[Any]:
    """Newest valued row of every estimate key of a device (key, at_ms, value, stderr, n,
    reliable, note, basis), in no particular order. A key that never had a value (the data
    cannot support one, e.g. a quantity the unit's sensors cannot reveal) comes with its
    newest row, value None, so that its reason is served."""
    with engine.connect() as conn:
        return list(conn.execute(latest_estimates_query(device_id)).all())


def latest_estimates_query(device_id: str) -> sa.Select[Any]:
    """The query behind :func:`latest_estimates`: the device's rows of ``estimates_latest``,
    which triggers keep to each key's newest row, a valued one before an unvalued one."""
    e = estimates_latest
    return sa.select(*(e.c[c.name] for c in _ESTIMATE_READ)).where(e.c.device_id == device_id)


def estimate_rows(
    engine: Engine,
    device_id: str,
    key: str,
    start_ms: int | None = None,
    end_ms: int | None = None,
) -> list[Any]:
    """Stored rows of one estimate key, oldest first (``start_ms`` inclusive, ``end_ms``
    exclusive; epoch ms UTC), with the columns of :func:`latest_estimates`."""
    e = estimates
    q = sa.select(*_ESTIMATE_READ).where(e.c.device_id == device_id, e.c.key == key)
    if start_ms is not None:
        q = q.where(e.c.at_ms >= start_ms)
    if end_ms is not None:
        q = q.where(e.c.at_ms < end_ms)
    with engine.connect() as conn:
        return list(conn.execute(q.order_by(e.c.at_ms)).all())
