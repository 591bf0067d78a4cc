"""Alert routes: the list, one alert with its audit trail, and acknowledgement."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter, Query

from tecfleet.api.deps import READ, EngineDep, LogLimit, Reader, RowId, Writer
from tecfleet.api.errors import unprocessable
from tecfleet.api.schemas import KEYED, KEYED_LOOKUP, AckIn, AlertDetailOut, AlertOut, Page
from tecfleet.api.services import alerts

router = APIRouter(tags=["alerts"])


@router.get("/v1/alerts", response_model=Page[AlertOut], responses=KEYED)
def alerts_list(
    engine: EngineDep,
    who: Reader,
    device: str | None = None,
    state: Annotated[str | None, Query(pattern="^(open|acknowledged|resolved)$")] = None,
    kind: str | None = None,
    incident: Annotated[
        int | None,
        Query(
            ge=1,
            le=2**63 - 1,
            description="only the alerts of the incident whose cause has this id",
        ),
    ] = None,
    limit: LogLimit = 100,
    cursor: str | None = None,
) -> dict[str, Any]:
    """Alerts, newest first (of the key's sites); the cause of an incident lists its
    symptoms."""
    if kind is not None and not alerts.known_kind(kind):
        raise unprocessable("query", "kind", "unknown kind")
    items, next_cursor = alerts.list_alerts(
        engine,
        limit,
        cursor,
        device=device,
        state=state,
        kind=kind,
        incident=incident,
        sites=who.sites,
    )
    return {"items": items, "next_cursor": next_cursor}


@router.get(
    "/v1/alerts/{alert_id}",
    response_model=AlertDetailOut,
    dependencies=[READ],
    responses=KEYED_LOOKUP,
)
def alert_get(engine: EngineDep, alert_id: RowId) -> AlertDetailOut:
    """One alert with its audit trail (state changes, who acknowledged and when)."""
    return alerts.get_alert(engine, alert_id)


@router.post("/v1/alerts/{alert_id}/ack", response_model=AlertOut, responses=KEYED_LOOKUP)
def alert_ack(
    engine: EngineDep, alert_id: RowId, who: Writer, body: AckIn | None = None
) -> AlertOut:
    """Acknowledge an open alert (recorded with the key's name, and in the audit trail)."""
    return alerts.acknowledge(engine, alert_id, who, body.note if body is not None else None)
