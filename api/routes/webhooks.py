"""Webhook routes (admin only): register, list, delete, and the delivery log."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Request, Response

from tecfleet.api.deps import FLEET_ADMIN, AllowPrivateDep, EngineDep, FleetAdmin, LogLimit, RowId
from tecfleet.api.errors import WebhookError, unprocessable
from tecfleet.api.schemas import (
    KEYED,
    KEYED_LOOKUP,
    DeliveryOut,
    Page,
    WebhookCreatedOut,
    WebhookIn,
    WebhookOut,
)
from tecfleet.api.services import webhooks

router = APIRouter(tags=["webhooks"])


@router.post("/v1/webhooks", status_code=201, response_model=WebhookCreatedOut, responses=KEYED)
def webhook_add(
    request: Request,
    engine: EngineDep,
    body: WebhookIn,
    who: FleetAdmin,
    allow_private: AllowPrivateDep,
) -> WebhookCreatedOut:
    """Register a receiver; the signing secret is in this answer only (stored sealed)."""
    try:
        return webhooks.create_webhook(
            engine,
            body.url,
            description=body.description,
            who=who,
            allow_private=allow_private,
            sealer=request.app.state.sealer,
        )
    except WebhookError as exc:
        raise unprocessable("body", "url", str(exc)) from exc


@router.get(
    "/v1/webhooks", response_model=Page[WebhookOut], dependencies=[FLEET_ADMIN], responses=KEYED
)
def webhook_list(engine: EngineDep) -> dict[str, Any]:
    return {"items": webhooks.list_webhooks(engine), "next_cursor": None}


@router.delete(
    "/v1/webhooks/{webhook_id}",
    status_code=204,
    response_class=Response,
    responses=KEYED_LOOKUP,
)
def webhook_delete(engine: EngineDep, webhook_id: RowId, who: FleetAdmin) -> Response:
    """Delete a receiver; deliveries still pending to it are cancelled."""
    webhooks.delete_webhook(engine, webhook_id, who)
    return Response(status_code=204)


@router.get(
    "/v1/webhooks/{webhook_id}/deliveries",
    response_model=Page[DeliveryOut],
    dependencies=[FLEET_ADMIN],
    responses=KEYED_LOOKUP,
)
def webhook_deliveries(
    engine: EngineDep, webhook_id: RowId, limit: LogLimit = 100, cursor: str | None = None
) -> dict[str, Any]:
    """Delivery log of one hook, newest first: state, attempts, last answer."""
    items, next_cursor = webhooks.list_deliveries(engine, webhook_id, limit, cursor)
    return {"items": items, "next_cursor": next_cursor}
