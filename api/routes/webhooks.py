"""Webhook routes (admin only): register, list, delete, and the delivery log."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Response

from tecfleet.api.deps import ADMIN, Admin, AllowPrivateDep, EngineDep, LogLimit
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
    engine: EngineDep, body: WebhookIn, who: Admin, allow_private: AllowPrivateDep
) -> WebhookCreatedOut:
    """Register a receiver; the signing secret is in this answer only."""
    try:
        return webhooks.create_webhook(
            engine,
            body.url,
            description=body.description,
            created_by=who.name,
            allow_private=allow_private,
        )
    except WebhookError as exc:
        raise unprocessable("body", "url", str(exc)) from exc


@router.get("/v1/webhooks", response_model=Page[WebhookOut], dependencies=[ADMIN], responses=KEYED)
def webhook_list(engine: EngineDep) -> dict[str, Any]:
    return {"items": webhooks.list_webhooks(engine), "next_cursor": None}


@router.delete(
    "/v1/webhooks/{webhook_id}",
    status_code=204,
    response_class=Response,
    dependencies=[ADMIN],
    responses=KEYED_LOOKUP,
)
def webhook_delete(engine: EngineDep, webhook_id: int) -> Response:
    webhooks.delete_webhook(engine, webhook_id)
    return Response(status_code=204)


@router.get(
    "/v1/webhooks/{webhook_id}/deliveries",
    response_model=Page[DeliveryOut],
    dependencies=[ADMIN],
    responses=KEYED_LOOKUP,
)
def webhook_deliveries(
    engine: EngineDep, webhook_id: int, limit: LogLimit = 100, cursor: str | None = None
) -> dict[str, Any]:
    """Delivery log of one hook, newest first: state, attempts, last answer."""
    items, next_cursor = webhooks.list_deliveries(engine, webhook_id, limit, cursor)
    return {"items": items, "next_cursor": next_cursor}
