"""The whole fleet in a few statements, for its overview page: every device with its newest
reading, its open alerts by severity, and the newest valued estimate of chosen keys."""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any, NamedTuple

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from tecfleet.ingest.db.fleet import OPEN_STATES
from tecfleet.ingest.db.tables import alerts, devices, estimates, readings

__all__ = ["FleetRows", "LatestEstimate", "fleet_rows"]

#: Device ids (and times) bound per statement, well under the parameters SQLite allows.
_IDS_PER_QUERY = 500


class LatestEstimate(NamedTuple):
    """The newest valued row of one estimate key of one device (time in ms)."""

    at_ms: int
    value: float
    stderr: float | None
    n: int
    reliable: bool


class FleetRows(NamedTuple):
    """What the overview reads: device rows (registration, progress, the newest reading's
    cabinet temperature and the time of the first reading), open alerts per device and
    severity, and the newest valued estimate per device and key."""

    devices: list[Any]
    open_alerts: dict[str, dict[str, int]]
    estimates: dict[str, dict[str, LatestEstimate]]


def fleet_rows(engine: Engine, keys: Sequence[str], device_id: str | None = None) -> FleetRows:
    """Every device (by id; or the one ``device_id``), its open alerts and the newest valued
    estimate of each of ``keys``: per key, one statement finds each device's newest time by
    walking the (device, key, time) index, and one reads the rows at those times by the same
    index."""
    d, r = devices.c, readings.c
    newest = (
        sa.select(r.t_cabinet)
        .where(r.device_id == d.device_id, r.ts_ms == d.last_reading_ms)
        .scalar_subquery()
    )
    first = sa.select(sa.func.min(r.ts_ms)).where(r.device_id == d.device_id).scalar_subquery()
    device_q = sa.select(
        devices, newest.label("t_cabinet_now"), first.label("first_reading_ms")
    ).order_by(d.device_id)
    alert_q = (
        sa.select(alerts.c.device_id, alerts.c.severity, sa.func.count().label("n"))
        .where(alerts.c.state.in_(OPEN_STATES))
        .group_by(alerts.c.device_id, alerts.c.severity)
    )
    if device_id is not None:
        device_q = device_q.where(d.device_id == device_id)
        alert_q = alert_q.where(alerts.c.device_id == device_id)
    with engine.connect() as conn:
        device_rows = list(conn.execute(device_q).all())
        open_alerts: dict[str, dict[str, int]] = {}
        for row in conn.execute(alert_q):
            open_alerts.setdefault(row.device_id, {})[row.severity] = int(row.n)
        found: dict[str, dict[str, LatestEstimate]] = {}
        for key in keys:
            times = {
                row.device_id: int(row.at_ms)
                for row in conn.execute(_newest_of_key(key, device_id))
                if row.at_ms is not None
            }
            for row in _rows_at(conn, key, times):
                found.setdefault(row.device_id, {})[key] = LatestEstimate(
                    int(row.at_ms),
                    float(row.value),
                    None if row.stderr is None else float(row.stderr),
                    int(row.n),
                    bool(row.reliable),
                )
    return FleetRows(device_rows, open_alerts, found)


def _rows_at(conn: Connection, key: str, newest: dict[str, int]) -> list[Any]:
    """The rows of ``key`` at each device's time in ``newest``. Fleets report on the same
    clock, so the distinct times are few: the statement asks for every device at any of them
    (an index range each) and the rows at another device's time are dropped here."""
    e = estimates.c
    ids, times = sorted(newest), sorted(set(newest.values()))
    out: list[Any] = []
    for k in range(0, len(ids), _IDS_PER_QUERY):
        for t in range(0, len(times), _IDS_PER_QUERY):
            q = sa.select(e.device_id, e.at_ms, e.value, e.stderr, e.n, e.reliable).where(
                e.device_id.in_(ids[k : k + _IDS_PER_QUERY]),
                e.key == key,
                e.at_ms.in_(times[t : t + _IDS_PER_QUERY]),
            )
            out += [row for row in conn.execute(q) if newest[row.device_id] == row.at_ms]
    return out


def _newest_of_key(key: str, device_id: str | None) -> sa.Select[Any]:
    """Each device's id and the time of its newest valued row of ``key`` (None if none)."""
    e2, d = estimates.alias("e2").c, devices.c
    # Walking the (device, key, time) index backwards stops at the newest valued row; a max()
    # over the valued rows would visit every row of the key to read its value.
    newest_at = (
        sa.select(e2.at_ms)
        .where(e2.device_id == d.device_id, e2.key == key, e2.value.is_not(None))
        .order_by(e2.at_ms.desc())
        .limit(1)
        .scalar_subquery()
    )
    q = sa.select(d.device_id, newest_at.label("at_ms"))
    return q if device_id is None else q.where(d.device_id == device_id)
