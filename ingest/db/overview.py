"""The whole fleet in a few statements, for its overview page: every device with its newest
reading, its open alerts by severity, and the newest valued estimate of chosen keys."""

from __future__ import annotations

from collections.abc import Collection, Sequence
from typing import Any, NamedTuple

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from tecfleet.ingest.db.fleet import OPEN_STATES
from tecfleet.ingest.db.sites import devices_at
from tecfleet.ingest.db.tables import alerts, devices, estimates_latest

__all__ = ["CountRows", "FleetRows", "LatestEstimate", "count_rows", "fleet_rows"]


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
    estimate of each of ``keys``, in three statements."""
    d = devices.c
    device_q = sa.select(devices, d.last_t_cabinet.label("t_cabinet_now")).order_by(d.device_id)
    alert_q, estimate_q = _open_alerts(), _latest_of(keys, device_id)
    if device_id is not None:
        device_q = device_q.where(d.device_id == device_id)
        alert_q = alert_q.where(alerts.c.device_id == device_id)
    return _read(engine, device_q, alert_q, estimate_q)


def _open_alerts() -> sa.Select[Any]:
    """Open alerts counted per device and severity."""
    return (
        sa.select(alerts.c.device_id, alerts.c.severity, sa.func.count().label("n"))
        .where(alerts.c.state.in_(OPEN_STATES))
        .group_by(alerts.c.device_id, alerts.c.severity)
    )


def _by_device(conn: Connection, alert_q: sa.Select[Any]) -> dict[str, dict[str, int]]:
    """Open alerts per device and severity, from the rows of :func:`_open_alerts`."""
    found: dict[str, dict[str, int]] = {}
    for row in conn.execute(alert_q).all():
        found.setdefault(row.device_id, {})[row.severity] = int(row.n)
    return found


def _read(
    engine: Engine, device_q: sa.Select[Any], alert_q: sa.Select[Any], estimate_q: sa.Select[Any]
) -> FleetRows:
    with engine.connect() as conn:
        device_rows = list(conn.execute(device_q).all())
        open_alerts = _by_device(conn, alert_q)
        found: dict[str, dict[str, LatestEstimate]] = {}
        for row in conn.execute(estimate_q).all():
            found.setdefault(row.device_id, {})[row.key] = LatestEstimate(
                int(row.at_ms),
                float(row.value),
                None if row.stderr is None else float(row.stderr),
                int(row.n),
                bool(row.reliable),
            )
    return FleetRows(device_rows, open_alerts, found)


def _latest_of(keys: Sequence[str], device_id: str | None) -> sa.Select[Any]:
    """Each device's newest valued row of each of ``keys``, from ``estimates_latest`` (one row
    per device and key, kept by triggers)."""
    e = estimates_latest.c
    q = sa.select(e.device_id, e.key, e.at_ms, e.value, e.stderr, e.n, e.reliable).where(
        e.key.in_(list(keys)), e.value.is_not(None)
    )
    return q if device_id is None else q.where(e.device_id == device_id)


class CountRows(NamedTuple):
    """What the fleet's counts read: a light row per device (id, site, status, newest reading's
    time and cabinet temperature, the registration's cabinet limits), open alerts per device
    and severity, the highest valued units of each ranked key, and each unit's valued COP
    beside its best COP (None where that has no value)."""

    devices: list[Any]
    open_alerts: dict[str, dict[str, int]]
    highest: dict[str, list[Any]]
    cop_pairs: list[tuple[float, float | None]]


def count_rows(
    engine: Engine,
    ranked_keys: Sequence[str],
    cop_keys: tuple[str, str],
    top: int,
    sites: Collection[str] | None = None,
) -> CountRows:
    """Of every device (at ``sites`` when given): its light row, its open alerts, the ``top``
    devices by each of ``ranked_keys`` (highest value first, then by id), and the pairs of
    ``cop_keys`` values. The database ranks and pairs, so nothing is read per device beyond
    one light row."""
    d, e = devices.c, estimates_latest.c
    device_q = sa.select(
        d.device_id, d.site, d.status, d.last_reading_ms, d.last_t_cabinet.label("t_cabinet_now"),
        d.cabinet["low_limit_c"].as_float().label("low_limit_c"),
        d.cabinet["high_limit_c"].as_float().label("high_limit_c"),
    )  # fmt: skip
    alert_q = _open_alerts()
    if sites is not None:
        device_q = device_q.where(d.site.in_(list(sites)))
        alert_q = alert_q.where(alerts.c.device_id.in_(devices_at(sites)))
    with engine.connect() as conn:
        device_rows = list(conn.execute(device_q).all())
        open_alerts = _by_device(conn, alert_q)
        highest = {key: list(conn.execute(_highest(key, top, sites)).all()) for key in ranked_keys}
        best = estimates_latest.alias("best")
        cop_q = (
            sa.select(e.value, best.c.value)
            .join(
                best,
                sa.and_(best.c.device_id == e.device_id, best.c.key == cop_keys[1]),
                isouter=True,
            )
            .where(e.key == cop_keys[0], e.value.is_not(None))
        )
        if sites is not None:
            cop_q = cop_q.where(e.device_id.in_(devices_at(sites)))
        pairs = [(float(c), None if b is None else float(b)) for c, b in conn.execute(cop_q).all()]
    return CountRows(device_rows, open_alerts, highest, pairs)


def _highest(key: str, top: int, sites: Collection[str] | None) -> sa.Select[Any]:
    d, e = devices.c, estimates_latest.c
    q = (
        sa.select(e.device_id, d.label, e.value, e.reliable)
        .join(devices, d.device_id == e.device_id)
        .where(e.key == key, e.value.is_not(None))
        .order_by(e.value.desc(), e.device_id)
        .limit(top)
    )
    return q if sites is None else q.where(d.site.in_(list(sites)))
