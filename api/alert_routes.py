"""HTTP routes of alerts, maintenance windows, threshold overrides and webhooks."""

from __future__ import annotations

from typing import Annotated, Any

import sqlalchemy as sa
from fastapi import APIRouter, Depends, HTTPException, Query, Request, Response
from fastapi import Path as PathParam
from pydantic import BaseModel, ConfigDict, Field

from tecfleet.analytics import alerts as rules
from tecfleet.analytics.errors import AlertError
from tecfleet.api import notify
from tecfleet.api.auth import Principal, require
from tecfleet.api.errors import CursorError, WebhookError
from tecfleet.api.queries import decode_cursor, encode_cursor
from tecfleet.api.timefmt import ms_to_rfc3339, rfc3339_to_ms
from tecfleet.ingest import db
from tecfleet.ingest.db import alert_records as records
from tecfleet.ingest.errors import NotFoundError

router = APIRouter()
WRITE = require("write")
ADMIN = require("admin")
reader = Depends(require("read"))
Limit = Annotated[int, Query(ge=1, le=1000)]


def _unprocessable(field: str, msg: str) -> HTTPException:
    return HTTPException(422, [{"loc": ["body", field], "msg": msg, "type": "value_error"}])


def _page_cursor(cursor: str | None) -> int | None:
    after = decode_cursor(cursor)
    if after is not None and not isinstance(after, int):
        raise CursorError("cursor is not one this API handed out")
    return after


@router.get("/v1/alerts", dependencies=[reader], tags=["alerts"])
def alerts_list(
    request: Request,
    device: str | None = None,
    state: Annotated[str | None, Query(pattern="^(open|acknowledged|resolved)$")] = None,
    kind: str | None = None,
    limit: Limit = 100,
    cursor: str | None = None,
) -> dict[str, Any]:
    """Alerts, newest first."""
    if kind is not None and kind not in rules.KINDS:
        raise HTTPException(
            422, [{"loc": ["query", "kind"], "msg": "unknown kind", "type": "value_error"}]
        )
    a = db.alerts
    stmt = sa.select(a).order_by(a.c.id.desc()).limit(limit + 1)
    before = _page_cursor(cursor)
    if before is not None:
        stmt = stmt.where(a.c.id < before)
    if device is not None:
        stmt = stmt.where(a.c.device_id == device)
    if state is not None:
        stmt = stmt.where(a.c.state == state)
    if kind is not None:
        stmt = stmt.where(a.c.kind == kind)
    with request.app.state.engine.connect() as conn:
        rows = conn.execute(stmt).fetchall()
    items = [notify.alert_object(records.alert_row_dict(r)) for r in rows[:limit]]
    next_cursor = encode_cursor(int(rows[limit - 1].id)) if len(rows) > limit else None
    return {"items": items, "next_cursor": next_cursor}


@router.get("/v1/alerts/{alert_id}", dependencies=[reader], tags=["alerts"])
def alert_get(request: Request, alert_id: int) -> dict[str, Any]:
    """One alert with its audit trail (state changes, who acknowledged and when)."""
    engine = request.app.state.engine
    with engine.connect() as conn:
        row = conn.execute(sa.select(db.alerts).where(db.alerts.c.id == alert_id)).first()
    if row is None:
        raise NotFoundError(f"unknown alert {alert_id}")
    out: dict[str, Any] = notify.alert_object(records.alert_row_dict(row))
    out["history"] = [
        {**{k: v for k, v in h.items() if k != "at_ms"}, "at": ms_to_rfc3339(h["at_ms"])}
        for h in rules.audit_trail(engine, alert_id)
    ]
    return out


class AckIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    note: str | None = Field(None, max_length=2000)


@router.post("/v1/alerts/{alert_id}/ack", tags=["alerts"])
def alert_ack(
    request: Request,
    alert_id: int,
    body: AckIn | None = None,
    who: Principal = Depends(WRITE),
) -> dict[str, Any]:
    """Acknowledge an open alert (recorded with the key's name)."""
    row = rules.acknowledge(
        request.app.state.engine, alert_id, who.name, body.note if body is not None else None
    )
    out: dict[str, Any] = notify.alert_object(row)
    return out


class MaintenanceIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    device_id: str | None = Field(None, pattern=r"^[A-Za-z0-9_.\-]{1,64}$")
    site: str | None = Field(None, max_length=200)
    start: str
    end: str
    reason: str | None = Field(None, max_length=2000)


def _maintenance_out(r: Any) -> dict[str, Any]:
    return {
        "id": int(r.id),
        "device_id": r.device_id,
        "site": r.site,
        "start": ms_to_rfc3339(r.start_ms),
        "end": ms_to_rfc3339(r.end_ms),
        "reason": r.reason,
        "created_by": r.created_by,
    }


@router.post("/v1/maintenance", status_code=201, tags=["alerts"])
def maintenance_add(
    request: Request, body: MaintenanceIn, who: Principal = Depends(WRITE)
) -> dict[str, Any]:
    """Silence a device or a site: notices are held and sent at the end if still relevant."""
    times = {}
    for name in ("start", "end"):
        try:
            times[name] = rfc3339_to_ms(getattr(body, name))
        except ValueError as exc:
            raise _unprocessable(name, str(exc)) from exc
    engine = request.app.state.engine
    try:
        window_id = rules.add_maintenance(
            engine,
            times["start"],
            times["end"],
            device_id=body.device_id,
            site=body.site,
            reason=body.reason,
            created_by=who.name,
        )
    except AlertError as exc:
        raise _unprocessable("device_id", str(exc)) from exc
    m = db.maintenance_windows
    with engine.connect() as conn:
        return _maintenance_out(conn.execute(sa.select(m).where(m.c.id == window_id)).one())


@router.get("/v1/maintenance", dependencies=[reader], tags=["alerts"])
def maintenance_list(request: Request) -> dict[str, Any]:
    m = db.maintenance_windows
    with request.app.state.engine.connect() as conn:
        rows = conn.execute(sa.select(m).order_by(m.c.id.desc()).limit(1000)).fetchall()
    return {"items": [_maintenance_out(r) for r in rows], "next_cursor": None}


@router.put(
    "/v1/alert-policies/{scope}/{name}",
    dependencies=[Depends(ADMIN)],
    tags=["alerts"],
)
def policy_put(
    request: Request,
    scope: Annotated[str, PathParam(pattern="^(device|site)$")],
    name: str,
    thresholds: dict[str, Any],
) -> dict[str, Any]:
    """Threshold overrides for a device or a site (names of AlertPolicy fields)."""
    try:
        rules.set_policy(request.app.state.engine, scope, name, thresholds)
    except AlertError as exc:
        raise _unprocessable("thresholds", str(exc)) from exc
    return {"scope": scope, "name": name, "thresholds": thresholds}


# -- webhooks ------------------------------------------------------------------------------

admin = Depends(ADMIN)


class WebhookIn(BaseModel):
    model_config = ConfigDict(extra="forbid")
    url: str = Field(max_length=2000)
    description: str | None = Field(None, max_length=200)


def _allow_private(request: Request) -> bool:
    flag = getattr(request.app.state, "webhook_allow_private", None)
    return notify.allow_private_default() if flag is None else bool(flag)


def _hook_out(r: Any) -> dict[str, Any]:
    return {
        "id": int(r.id),
        "url": r.url,
        "description": r.description,
        "created_at": ms_to_rfc3339(r.created_ms),
    }


@router.post("/v1/webhooks", status_code=201, tags=["webhooks"])
def webhook_add(
    request: Request, body: WebhookIn, who: Principal = Depends(ADMIN)
) -> dict[str, Any]:
    """Register a receiver; the signing secret is in this answer only."""
    try:
        hook: dict[str, Any] = notify.create_webhook(
            request.app.state.engine,
            body.url,
            description=body.description,
            created_by=who.name,
            allow_private=_allow_private(request),
        )
    except WebhookError as exc:
        raise _unprocessable("url", str(exc)) from exc
    return hook


@router.get("/v1/webhooks", dependencies=[admin], tags=["webhooks"])
def webhook_list(request: Request) -> dict[str, Any]:
    w = db.webhooks
    with request.app.state.engine.connect() as conn:
        rows = conn.execute(
            sa.select(w).where(w.c.deleted_ms.is_(None)).order_by(w.c.id)
        ).fetchall()
    return {"items": [_hook_out(r) for r in rows], "next_cursor": None}


def _live_hook(request: Request, webhook_id: int) -> Any:
    w = db.webhooks
    with request.app.state.engine.connect() as conn:
        row = conn.execute(
            sa.select(w).where(w.c.id == webhook_id, w.c.deleted_ms.is_(None))
        ).first()
    if row is None:
        raise NotFoundError(f"unknown webhook {webhook_id}")
    return row


@router.delete(
    "/v1/webhooks/{webhook_id}", status_code=204, dependencies=[admin], tags=["webhooks"]
)
def webhook_delete(request: Request, webhook_id: int) -> Response:
    _live_hook(request, webhook_id)
    with request.app.state.engine.begin() as conn:
        conn.execute(
            db.webhooks.update()
            .where(db.webhooks.c.id == webhook_id)
            .values(deleted_ms=db.now_ms())
        )
    return Response(status_code=204)


@router.get("/v1/webhooks/{webhook_id}/deliveries", dependencies=[admin], tags=["webhooks"])
def webhook_deliveries(
    request: Request, webhook_id: int, limit: Limit = 100, cursor: str | None = None
) -> dict[str, Any]:
    """Delivery log of one hook, newest first: state, attempts, last answer."""
    _live_hook(request, webhook_id)
    d, n = db.webhook_deliveries, db.notifications
    stmt = (
        sa.select(d, n.c.event, n.c.alert_id)
        .join(n, n.c.id == d.c.notification_id)
        .where(d.c.webhook_id == webhook_id)
        .order_by(d.c.id.desc())
        .limit(limit + 1)
    )
    before = _page_cursor(cursor)
    if before is not None:
        stmt = stmt.where(d.c.id < before)
    with request.app.state.engine.connect() as conn:
        rows = conn.execute(stmt).fetchall()
    items = [
        {
            "id": int(r.id),
            "msg_id": r.msg_id,
            "event": r.event,
            "alert_id": r.alert_id,
            "state": r.state,
            "attempts": int(r.attempts),
            "created_at": ms_to_rfc3339(r.created_ms),
            "last_attempt_at": ms_to_rfc3339(r.last_attempt_ms),
            "next_attempt_at": ms_to_rfc3339(r.next_attempt_ms) if r.state == "pending" else None,
            "last_status": r.last_status,
            "last_error": r.last_error,
            "delivered_at": ms_to_rfc3339(r.delivered_ms),
        }
        for r in rows[:limit]
    ]
    next_cursor = encode_cursor(int(rows[limit - 1].id)) if len(rows) > limit else None
    return {"items": items, "next_cursor": next_cursor}
