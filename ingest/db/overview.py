"""The whole fleet in a few statements, for its overview page: every device with its newest
reading, its open alerts by severity, and the newest valued estimate of chosen keys."""

from __future__ import annotations

from collections.abc import Collection, Sequence
from typing import Any, NamedTuple

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from tecfleet.ingest.db.fleet import OPEN_STATES
from tecfleet.ingest.db.sites import devices_at
from tecfleet.ingest.db.tables import alerts, devices, estimates_latest, readings

__all__ = ["FleetRows", "LatestEstimate", "fleet_rows", "state_rows"]


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
    d, r = devices.c, readings.c
    first = sa.select(sa.func.min(r.ts_ms)).where(r.device_id == d.device_id).scalar_subquery()
    device_q = sa.select(
        devices, _cabinet_now().label("t_cabinet_now"), first.label("first_reading_ms")
    ).order_by(d.device_id)
    alert_q, estimate_q = _open_alerts(), _latest_of(keys, device_id)
    if device_id is not None:
        device_q = device_q.where(d.device_id == device_id)
        alert_q = alert_q.where(alerts.c.device_id == device_id)
    return _read(engine, device_q, alert_q, estimate_q)


def _cabinet_now() -> Any:
    """The cabinet temperature of each device's newest reading, as a scalar subquery."""
    d, r = devices.c, readings.c
    return (
        sa.select(r.t_cabinet)
        .where(r.device_id == d.device_id, r.ts_ms == d.last_reading_ms)
        .scalar_subquery()
    )


def _open_alerts() -> sa.Select[Any]:
    """Open alerts counted per device and severity."""
    return (
        sa.select(alerts.c.device_id, alerts.c.severity, sa.func.count().label("n"))
        .where(alerts.c.state.in_(OPEN_STATES))
        .group_by(alerts.c.device_id, alerts.c.severity)
    )


def _read(
    engine: Engine, device_q: sa.Select[Any], alert_q: sa.Select[Any], estimate_q: sa.Select[Any]
) -> FleetRows:
    with engine.connect() as conn:
        device_rows = list(conn.execute(device_q).all())
        open_alerts: dict[str, dict[str, int]] = {}
        for row in conn.execute(alert_q):
            open_alerts.setdefault(row.device_id, {})[row.severity] = int(row.n)
        found: dict[str, dict[str, LatestEstimate]] = {}
        for row in conn.execute(estimate_q):
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


def state_rows(
    engine: Engine, keys: Sequence[str], sites: Collection[str] | None = None
) -> FleetRows:
    """What the fleet's counts need, of every device (at ``sites`` when given): id, label,
    site, status, newest reading's time and cabinet temperature, and the cabinet registration
    (for its limits); open alerts per device and severity; the newest valued estimate of
    each of ``keys``."""
    d = devices.c
    device_q = sa.select(
        d.device_id, d.label, d.site, d.status, d.last_reading_ms, d.cabinet,
        _cabinet_now().label("t_cabinet_now"),
    )  # fmt: skip
    alert_q, estimate_q = _open_alerts(), _latest_of(keys, None)
    if sites is not None:
        device_q = device_q.where(d.site.in_(list(sites)))
        alert_q = alert_q.where(alerts.c.device_id.in_(devices_at(sites)))
        estimate_q = estimate_q.where(estimates_latest.c.device_id.in_(devices_at(sites)))
    return _read(engine, device_q, alert_q, estimate_q)
