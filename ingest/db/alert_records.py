"""Stored alerts: the alert rows, their audit trail, the notifications outbox, per-device
evaluation progress, threshold overrides, maintenance windows, and the estimates the alert
rules read; and what the API reads of them (pages of alerts, maintenance windows).

Functions that take a ``Connection`` run inside the caller's transaction, so an alert change,
its audit row and its outbox notice commit together; those that take an ``Engine`` open their
own transaction.
"""

from __future__ import annotations

import math
from collections.abc import Collection, Mapping, Sequence
from typing import Any, Literal, get_args

import numpy as np
import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine, Row
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.ingest.db.engine import now_ms
from tecfleet.ingest.db.sites import devices_at
from tecfleet.ingest.db.tables import (
    alert_audit,
    alert_policies,
    alert_progress,
    alerts,
    devices,
    estimates,
    maintenance_windows,
    notifications,
    readings,
)
from tecfleet.ingest.errors import NotFoundError, StoreError

__all__ = [
    "MAINTENANCE_LIST_LIMIT",
    "NOTICE_ROUTES",
    "OPEN_STATES",
    "REPLACEABLE_PARTS",
    "ReplaceablePart",
    "absorb_notices",
    "acknowledge_alert",
    "active_maintenance",
    "alert_by_id",
    "alert_page",
    "alert_row",
    "alert_row_dict",
    "attach_symptoms",
    "audit_rows",
    "cancel_deferred",
    "devices_to_evaluate",
    "find_cause",
    "incident_members",
    "incident_symptoms",
    "insert_alert",
    "insert_audit",
    "insert_maintenance",
    "insert_notice",
    "jsonable",
    "load_overrides",
    "maintenance_window",
    "newest_maintenance_windows",
    "read_estimates",
    "read_progress",
    "release_held",
    "replacements",
    "set_incident",
    "set_told",
    "store_policy",
    "symptoms_by_incident",
    "told_notices",
    "unsent_notices",
    "update_alert",
    "write_progress",
]

#: The parts a maintenance window may record as replaced: the module and each probe.
ReplaceablePart = Literal["module", "cabinet_probe", "cold_probe", "hot_probe", "ambient_probe"]
REPLACEABLE_PARTS: tuple[str, ...] = get_args(ReplaceablePart)

#: Alert states in which an alert is still live.
OPEN_STATES = ("open", "acknowledged")
#: How an alert change reaches the outbox: ``send`` (pending, or held by maintenance),
#: ``absorb`` (kept for the record, never sent: a symptom inside an incident already told),
#: ``defer`` (sent at ``defer_until_ms`` unless the alert has reopened by then).
NOTICE_ROUTES = ("send", "absorb", "defer")


def jsonable(x: Any) -> Any:
    """``x`` with numpy scalars made plain and non-finite floats made None (JSON columns)."""
    if isinstance(x, dict):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [jsonable(v) for v in x]
    if isinstance(x, np.generic):
        x = x.item()
    if isinstance(x, float) and not math.isfinite(x):
        return None
    return x


def alert_row_dict(row: Any, symptoms: list[dict[str, Any]] | None = None) -> dict[str, Any]:
    """An ``alerts`` row as a dict with millisecond times (the API formats them); on the
    cause of an incident, ``symptoms`` lists the alerts it explains (id and kind)."""
    return {
        "id": int(row.id),
        "device_id": row.device_id,
        "kind": row.kind,
        "severity": row.severity,
        "state": row.state,
        "opened_ms": int(row.opened_ms),
        "updated_ms": int(row.updated_ms),
        "resolved_ms": None if row.resolved_ms is None else int(row.resolved_ms),
        "summary": row.summary,
        "evidence": row.evidence,
        "reopen_count": int(row.reopen_count or 0),
        "incident_id": None if row.incident_id is None else int(row.incident_id),
        "symptoms": list(symptoms or []),
    }


# ---------------------------------------------------------------------------
# Evaluation inputs
# ---------------------------------------------------------------------------


def devices_to_evaluate(conn: Connection, device_id: str | None) -> tuple[int | None, list[Any]]:
    """The newest reading time of the whole fleet [ms] (None without readings), and the
    devices to evaluate (every one, or only ``device_id``) ordered by id."""
    d = devices
    fleet_newest = conn.execute(sa.select(sa.func.max(d.c.last_reading_ms))).scalar()
    q = sa.select(
        d.c.device_id, d.c.site, d.c.module, d.c.cabinet, d.c.status, d.c.status_at_ms,
        d.c.last_reading_ms,
    ).order_by(d.c.device_id)  # fmt: skip
    if device_id is not None:
        q = q.where(d.c.device_id == device_id)
    return fleet_newest, list(conn.execute(q).fetchall())


def newest_receipt_ms(conn: Connection) -> int | None:
    """When the newest reading of any device was stored (wall clock) [ms]; None without any.
    Taken over each device's newest reading, which the (device, time) index finds."""
    d, r = devices, readings
    on = sa.and_(r.c.device_id == d.c.device_id, r.c.ts_ms == d.c.last_reading_ms)
    found = conn.execute(sa.select(sa.func.max(r.c.received_ms)).select_from(d.join(r, on)))
    value = found.scalar()
    return None if value is None else int(value)


def load_overrides(conn: Connection) -> dict[tuple[str, str], dict[str, Any]]:
    """Threshold overrides per (scope, name)."""
    rows = conn.execute(sa.select(alert_policies)).fetchall()
    return {(r.scope, r.name): dict(r.thresholds or {}) for r in rows}


def read_progress(conn: Connection, device_id: str) -> tuple[int, dict[str, Any]]:
    """Time of the last evaluated reading [ms] (-1 for none) and the carried rule state."""
    p = alert_progress
    prog = conn.execute(sa.select(p.c.done_ms, p.c.state).where(p.c.device_id == device_id)).first()
    if prog is None:
        return -1, {}
    return int(prog.done_ms), dict(prog.state)


def write_progress(conn: Connection, device_id: str, done_ms: int, state: Any) -> None:
    """Replace the device's evaluation progress."""
    p = alert_progress
    conn.execute(p.delete().where(p.c.device_id == device_id))
    conn.execute(
        p.insert().values(
            device_id=device_id,
            done_ms=done_ms,
            state=state,
            updated_ms=now_ms(),
        )
    )


def read_estimates(
    conn: Connection, device_id: str, keys: Sequence[str], after_ms: int
) -> dict[str, list[tuple[int, float]]]:
    """Reliable estimates of ``keys`` newer than ``after_ms`` [ms]: key -> [(at_ms, value)],
    oldest first."""
    e = estimates
    rows = conn.execute(
        sa.select(e.c.key, e.c.at_ms, e.c.value)
        .where(
            e.c.device_id == device_id, e.c.key.in_(keys), e.c.reliable.is_(True),
            e.c.value.is_not(None), e.c.at_ms > after_ms,
        )
        .order_by(e.c.at_ms)
    ).fetchall()  # fmt: skip
    out: dict[str, list[tuple[int, float]]] = {}
    for r in rows:
        out.setdefault(r.key, []).append((int(r.at_ms), float(r.value)))
    return out


# ---------------------------------------------------------------------------
# Alert rows, audit and outbox (inside the caller's transaction)
# ---------------------------------------------------------------------------


def insert_alert(
    conn: Connection,
    device_id: str,
    kind: str,
    severity: str,
    at_ms: int,
    summary: str,
    evidence: Any,
) -> int:
    """A new open alert; returns its id."""
    a = alerts
    return int(
        conn.execute(
            a.insert()
            .values(
                device_id=device_id, kind=kind, severity=severity,
                state="open", opened_ms=at_ms, updated_ms=at_ms, resolved_ms=None,
                summary=summary, evidence=evidence, reopen_count=0,
            )
            .returning(a.c.id)
        ).scalar_one()
    )  # fmt: skip


def update_alert(conn: Connection, alert_id: int, change: str, values: Mapping[str, Any]) -> None:
    """Write ``values`` to one alert; a ``reopened`` change also counts the reopen."""
    a = alerts
    extra: dict[str, Any] = {}
    if change == "reopened":
        extra["reopen_count"] = a.c.reopen_count + 1
    conn.execute(a.update().where(a.c.id == alert_id).values(**values, **extra))


def insert_audit(
    conn: Connection,
    alert_id: int,
    at_ms: int,
    from_state: str | None,
    to_state: str,
    severity: str,
    actor: str,
    note: str | None,
) -> None:
    """One row of an alert's audit trail."""
    conn.execute(
        alert_audit.insert().values(
            alert_id=alert_id, at_ms=at_ms, from_state=from_state, to_state=to_state,
            severity=severity, actor=actor, note=note,
        )
    )  # fmt: skip


def insert_notice(
    conn: Connection,
    alert_id: int,
    event: str,
    at_ms: int,
    site: str | None,
    hold: int | None,
    *,
    route: str = "send",
    defer_until_ms: int | None = None,
) -> None:
    """An outbox notice of ``event`` carrying the alert as stored now (with its symptoms on
    the cause of an incident); ``hold`` [ms] holds it until a maintenance window ends;
    ``route`` (see NOTICE_ROUTES) says whether it goes out, stays on record only, or waits
    until ``defer_until_ms`` [ms]."""
    if route not in NOTICE_ROUTES:
        raise StoreError(f"unknown notice route {route!r}")
    row = alert_row(conn, alert_id)
    symptoms = symptoms_by_incident(conn, [alert_id]).get(alert_id)
    if route == "absorb":
        state, until = "absorbed", None
    elif route == "defer":
        state, until = "deferred", max(int(defer_until_ms or at_ms), hold or 0)
    else:
        state, until = ("held", hold) if hold is not None else ("pending", None)
    conn.execute(
        notifications.insert().values(
            created_ms=now_ms(),
            event_ms=at_ms,
            event=event,
            alert_id=alert_id,
            device_id=row.device_id,
            site=site,
            kind=row.kind,
            payload=jsonable({"alert": alert_row_dict(row, symptoms), "change": event}),
            state=state,
            hold_until_ms=until,
            mqtt_state=state,
        )
    )


def alert_row(conn: Connection, alert_id: int) -> Row[Any]:
    """One stored alert."""
    return conn.execute(sa.select(alerts).where(alerts.c.id == alert_id)).one()


# ---------------------------------------------------------------------------
# Incidents: a cause alert and the symptom alerts it explains (``alerts.incident_id``)
# ---------------------------------------------------------------------------


def find_cause(
    conn: Connection, device_id: str, kinds: Sequence[str], since_ms: int
) -> Row[Any] | None:
    """The device's alert of one of ``kinds`` that is open or resolved at or after
    ``since_ms`` [ms]: an open one first, then the most recently opened."""
    a = alerts
    live = a.c.state.in_(OPEN_STATES)
    return conn.execute(
        sa.select(a)
        .where(
            a.c.device_id == device_id,
            a.c.kind.in_(list(kinds)),
            sa.or_(live, a.c.resolved_ms >= since_ms),
        )
        .order_by(sa.case((live, 0), else_=1), a.c.opened_ms.desc(), a.c.id.desc())
        .limit(1)
    ).first()


def set_incident(conn: Connection, alert_id: int, incident_id: int) -> None:
    """Make ``alert_id`` part of the incident of cause ``incident_id`` (the cause too)."""
    a = alerts
    conn.execute(a.update().where(a.c.id == alert_id).values(incident_id=incident_id))
    conn.execute(
        a.update().where(a.c.id == incident_id, a.c.incident_id.is_(None))
        .values(incident_id=incident_id)
    )  # fmt: skip


def attach_symptoms(
    conn: Connection, cause_id: int, device_id: str, kinds: Sequence[str], since_ms: int
) -> list[Any]:
    """Attach the device's alerts of ``kinds`` that belong to no incident and are open or
    resolved at or after ``since_ms`` [ms] to the incident of ``cause_id``. Returns them as
    they were before (id, kind, opened_ms, severity)."""
    a = alerts
    found = list(
        conn.execute(
            sa.select(a.c.id, a.c.kind, a.c.opened_ms, a.c.severity).where(
                a.c.device_id == device_id, a.c.kind.in_(list(kinds)), a.c.id != cause_id,
                a.c.incident_id.is_(None),
                sa.or_(a.c.state.in_(OPEN_STATES), a.c.resolved_ms >= since_ms),
            )
        ).fetchall()
    )  # fmt: skip
    if not found:
        return []
    ids = [int(r.id) for r in found]
    conn.execute(a.update().where(a.c.id.in_(ids)).values(incident_id=cause_id))
    conn.execute(a.update().where(a.c.id == cause_id).values(incident_id=cause_id))
    return found


def unsent_notices(conn: Connection, alert_ids: Sequence[int], after_ms: int) -> list[Any]:
    """Notices of ``alert_ids`` not yet sent (pending or deferred) with their event at or
    after ``after_ms`` [ms], in event order: id, alert id, kind, event and the alert's
    severity."""
    n = notifications
    rows = conn.execute(
        sa.select(n.c.id, n.c.alert_id, n.c.kind, n.c.event, n.c.payload)
        .where(
            n.c.alert_id.in_(list(alert_ids)), n.c.state.in_(("pending", "deferred")),
            n.c.event_ms >= after_ms,
        )
        .order_by(n.c.event_ms, n.c.id)
    ).fetchall()  # fmt: skip
    return [
        (int(r.id), int(r.alert_id), r.kind, r.event, r.payload["alert"]["severity"]) for r in rows
    ]


def told_notices(
    conn: Connection, alert_id: int, before_ms: int | None = None
) -> list[tuple[str, str]]:
    """The notices of one alert that were or will be told (neither absorbed, suppressed nor
    still deferred), with their event before ``before_ms`` [ms] if given, in event order:
    event and the alert's severity."""
    n = notifications
    end = 2**62 if before_ms is None else int(before_ms)
    rows = conn.execute(
        sa.select(n.c.event, n.c.payload)
        .where(
            n.c.alert_id == alert_id, n.c.event_ms < end,
            n.c.state.not_in(("absorbed", "suppressed", "deferred")),
        )
        .order_by(n.c.event_ms, n.c.id)
    ).fetchall()  # fmt: skip
    return [(r.event, r.payload["alert"]["severity"]) for r in rows]


def set_told(conn: Connection, alert_id: int, severity: str | None) -> None:
    """The highest severity told of one alert (None: nothing told since its resolution)."""
    conn.execute(alerts.update().where(alerts.c.id == alert_id).values(told_severity=severity))


def absorb_notices(conn: Connection, notice_ids: Sequence[int]) -> None:
    """Keep these notices on record only: they are never sent."""
    if notice_ids:
        n = notifications
        conn.execute(
            n.update()
            .where(n.c.id.in_(list(notice_ids)))
            .values(state="absorbed", mqtt_state="absorbed")
        )


def incident_members(conn: Connection, incident_id: int, exclude_id: int) -> list[Any]:
    """Kind and severity of the alerts of one incident (cause and symptoms) but one."""
    a = alerts
    return list(
        conn.execute(
            sa.select(a.c.kind, a.c.severity).where(
                sa.or_(a.c.incident_id == incident_id, a.c.id == incident_id),
                a.c.id != exclude_id,
            )
        ).fetchall()
    )


def symptoms_by_incident(
    conn: Connection, cause_ids: Sequence[int]
) -> dict[int, list[dict[str, Any]]]:
    """Per cause id, the symptom alerts of its incident (id and kind), oldest first."""
    if not cause_ids:
        return {}
    a = alerts
    rows = conn.execute(
        sa.select(a.c.id, a.c.kind, a.c.incident_id)
        .where(a.c.incident_id.in_(list(cause_ids)), a.c.id != a.c.incident_id)
        .order_by(a.c.id)
    ).fetchall()
    out: dict[int, list[dict[str, Any]]] = {}
    for r in rows:
        out.setdefault(int(r.incident_id), []).append({"id": int(r.id), "kind": r.kind})
    return out


def cancel_deferred(conn: Connection, alert_id: int) -> bool:
    """The alert has come back: its resolution notice still waiting is never sent. Returns
    whether there was one (the people told still see the alert open)."""
    n = notifications
    done = conn.execute(
        n.update()
        .where(n.c.alert_id == alert_id, n.c.state == "deferred")
        .values(state="suppressed", mqtt_state="suppressed")
    )
    return bool(done.rowcount)


def active_maintenance(conn: Connection, device_id: str, site: str | None) -> list[tuple[int, int]]:
    """Maintenance windows (start, end) [ms] that cover this device or its site."""
    m = maintenance_windows
    cond = m.c.device_id == device_id
    if site is not None:
        cond = sa.or_(cond, sa.and_(m.c.device_id.is_(None), m.c.site == site))
    rows = conn.execute(sa.select(m.c.start_ms, m.c.end_ms).where(cond)).fetchall()
    return [(int(r.start_ms), int(r.end_ms)) for r in rows]


def replacements(conn: Connection, device_id: str) -> list[tuple[int, list[str]]]:
    """The device's maintenance windows that replaced parts: (end [ms], part names), oldest
    end first."""
    m = maintenance_windows
    rows = conn.execute(
        sa.select(m.c.end_ms, m.c.replaced).where(m.c.device_id == device_id).order_by(m.c.end_ms)
    ).fetchall()
    return [(int(r.end_ms), list(r.replaced)) for r in rows if r.replaced]


def release_held(conn: Connection, device_id: str, reference_ms: int) -> None:
    """Maintenance over: held notices of alerts still open go out once, the rest are dropped.
    Deferred resolutions whose wait is over go out if the alert is still resolved."""
    _release_deferred(conn, device_id, reference_ms)
    n = notifications
    held = conn.execute(
        sa.select(n.c.id, n.c.alert_id, n.c.hold_until_ms, n.c.site, n.c.kind)
        .where(n.c.device_id == device_id, n.c.state == "held", n.c.hold_until_ms <= reference_ms)
        .order_by(n.c.id)
    ).fetchall()
    if not held:
        return
    by_alert: dict[int, list[Any]] = {}
    for r in held:
        by_alert.setdefault(int(r.alert_id), []).append(r)
    for alert_id, rs in by_alert.items():
        conn.execute(
            n.update()
            .where(n.c.id.in_([r.id for r in rs]))
            .values(state="suppressed", mqtt_state="suppressed")
        )
        row = conn.execute(sa.select(alerts).where(alerts.c.id == alert_id)).one()
        if row.state in OPEN_STATES:
            _release_one(conn, row, device_id, rs)


def _release_deferred(conn: Connection, device_id: str, reference_ms: int) -> None:
    n, a = notifications, alerts
    due = conn.execute(
        sa.select(n.c.id, n.c.alert_id, a.c.state)
        .join(a, a.c.id == n.c.alert_id)
        .where(
            n.c.device_id == device_id, n.c.state == "deferred",
            n.c.hold_until_ms <= reference_ms,
        )
    ).fetchall()  # fmt: skip
    for r in due:
        state = "suppressed" if r.state in OPEN_STATES else "pending"
        conn.execute(n.update().where(n.c.id == r.id).values(state=state, mqtt_state=state))
        if state == "pending":
            set_told(conn, int(r.alert_id), None)  # its resolution is told now


def _release_one(conn: Connection, row: Row[Any], device_id: str, held: list[Any]) -> None:
    """The one notice of a still-open alert whose notices maintenance held back."""
    at = max(int(r.hold_until_ms) for r in held)
    conn.execute(
        notifications.insert().values(
            created_ms=now_ms(), event_ms=at, event="alert.opened",
            alert_id=int(row.id), device_id=device_id, site=held[0].site, kind=held[0].kind,
            payload=jsonable(
                {
                    "alert": alert_row_dict(row),
                    "change": "alert.opened",
                    "after_maintenance": True,
                }
            ),
            state="pending", hold_until_ms=None, mqtt_state="pending",
        )
    )  # fmt: skip


# ---------------------------------------------------------------------------
# Operators' actions (own transactions)
# ---------------------------------------------------------------------------


def acknowledge_alert(
    engine: Engine, alert_id: int, actor: str, note: str | None = None
) -> dict[str, Any]:
    """Mark an open alert acknowledged by ``actor``, with its audit row and outbox notice in
    the same transaction; an alert in any other state is returned unchanged."""
    a = alerts
    now = now_ms()
    try:
        with engine.begin() as conn:
            row = conn.execute(sa.select(a).where(a.c.id == alert_id)).first()
            if row is None:
                raise NotFoundError(f"unknown alert {alert_id}")
            if row.state == "open":
                row = _acknowledge_open(conn, row, actor, note, now)
            return alert_row_dict(row, symptoms_by_incident(conn, [alert_id]).get(alert_id))
    except SQLAlchemyError as exc:
        raise StoreError(f"could not acknowledge alert {alert_id}: {exc}") from exc


def _acknowledge_open(
    conn: Connection, row: Row[Any], actor: str, note: str | None, now: int
) -> Row[Any]:
    a = alerts
    alert_id = int(row.id)
    conn.execute(a.update().where(a.c.id == alert_id).values(state="acknowledged", updated_ms=now))
    conn.execute(
        alert_audit.insert().values(
            alert_id=alert_id, at_ms=now, from_state="open", to_state="acknowledged",
            severity=row.severity, actor=actor[:200], note=note,
        )
    )  # fmt: skip
    row = conn.execute(sa.select(a).where(a.c.id == alert_id)).one()
    site = conn.execute(
        sa.select(devices.c.site).where(devices.c.device_id == row.device_id)
    ).scalar()
    conn.execute(
        notifications.insert().values(
            created_ms=now, event_ms=now, event="alert.acknowledged", alert_id=alert_id,
            device_id=row.device_id, site=site, kind=row.kind,
            payload=jsonable(
                {
                    "alert": alert_row_dict(row),
                    "change": "alert.acknowledged",
                    "by": actor,
                }
            ),
            state="pending", mqtt_state="pending",
        )
    )  # fmt: skip
    return row


def audit_rows(engine: Engine, alert_id: int) -> list[dict[str, Any]]:
    """State changes of one alert, oldest first."""
    t = alert_audit
    with engine.connect() as conn:
        rows = conn.execute(
            sa.select(t).where(t.c.alert_id == alert_id).order_by(t.c.id)
        ).fetchall()
    return [
        {
            "at_ms": int(r.at_ms), "from_state": r.from_state, "to_state": r.to_state,
            "severity": r.severity, "actor": r.actor, "note": r.note,
        }
        for r in rows
    ]  # fmt: skip


def store_policy(engine: Engine, scope: str, name: str, thresholds: Mapping[str, Any]) -> None:
    """Replace the threshold overrides of one ``device`` or ``site``."""
    t = alert_policies
    with engine.begin() as conn:
        conn.execute(t.delete().where(t.c.scope == scope, t.c.name == name))
        conn.execute(
            t.insert().values(
                scope=scope, name=name, thresholds=dict(thresholds), updated_ms=now_ms()
            )
        )


def insert_maintenance(
    engine: Engine,
    start_ms: int,
    end_ms: int,
    *,
    device_id: str | None,
    site: str | None,
    reason: str | None,
    created_by: str | None,
    replaced: Sequence[str] = (),
) -> int:
    """Store a maintenance window with the parts replaced during it; returns its id."""
    values: dict[str, Any] = {
        "device_id": device_id, "site": site, "start_ms": start_ms, "end_ms": end_ms,
        "reason": reason, "created_ms": now_ms(), "created_by": created_by,
    }  # fmt: skip
    if replaced:
        values["replaced"] = list(replaced)  # none: the column stays NULL, as on older rows
    with engine.begin() as conn:
        return int(
            conn.execute(
                maintenance_windows.insert().values(**values).returning(maintenance_windows.c.id)
            ).scalar_one()
        )


# What the API reads of alerts and maintenance windows.

#: Maintenance windows listed at most (newest first).
MAINTENANCE_LIST_LIMIT = 1000


def alert_page(
    engine: Engine,
    limit: int,
    before_id: int | None,
    *,
    device: str | None = None,
    state: str | None = None,
    kind: str | None = None,
    incident: int | None = None,
    sites: Collection[str] | None = None,
) -> list[Row[Any]]:
    """Up to ``limit + 1`` alerts, newest first, with ids below ``before_id``, filtered
    (``incident``: the alerts of the incident whose cause has that id; ``sites``: only the
    alerts of devices at these sites)."""
    a = alerts
    stmt = sa.select(a).order_by(a.c.id.desc()).limit(limit + 1)
    if before_id is not None:
        stmt = stmt.where(a.c.id < before_id)
    if device is not None:
        stmt = stmt.where(a.c.device_id == device)
    if state is not None:
        stmt = stmt.where(a.c.state == state)
    if kind is not None:
        stmt = stmt.where(a.c.kind == kind)
    if incident is not None:
        stmt = stmt.where(a.c.incident_id == incident)
    if sites is not None:
        stmt = stmt.where(a.c.device_id.in_(devices_at(sites)))
    with engine.connect() as conn:
        return list(conn.execute(stmt).fetchall())


def incident_symptoms(engine: Engine, cause_ids: Sequence[int]) -> dict[int, list[dict[str, Any]]]:
    """Per cause id, the symptoms of its incident (see ``symptoms_by_incident``)."""
    with engine.connect() as conn:
        return symptoms_by_incident(conn, cause_ids)


def alert_by_id(engine: Engine, alert_id: int) -> Row[Any] | None:
    with engine.connect() as conn:
        return conn.execute(sa.select(alerts).where(alerts.c.id == alert_id)).first()


def maintenance_window(engine: Engine, window_id: int) -> Row[Any]:
    m = maintenance_windows
    with engine.connect() as conn:
        return conn.execute(sa.select(m).where(m.c.id == window_id)).one()


def newest_maintenance_windows(engine: Engine) -> list[Row[Any]]:
    m = maintenance_windows
    with engine.connect() as conn:
        return list(
            conn.execute(
                sa.select(m).order_by(m.c.id.desc()).limit(MAINTENANCE_LIST_LIMIT)
            ).fetchall()
        )
