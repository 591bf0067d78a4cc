"""Webhook registry: register, list and delete hooks, and read their delivery log."""

from __future__ import annotations

from typing import Any

from sqlalchemy.engine import Engine

from tecfleet.api.auth import Principal
from tecfleet.api.delivery.webhooks import check_url, new_secret
from tecfleet.api.pagination import int_cursor, next_cursor
from tecfleet.api.schemas.webhooks import DeliveryOut, WebhookCreatedOut, WebhookOut
from tecfleet.api.sealing import Sealer, sealer_for
from tecfleet.api.services.audit import record_change
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import delivery as delivery_db
from tecfleet.ingest.db import now_ms
from tecfleet.ingest.errors import NotFoundError


def create_webhook(
    engine: Engine,
    url: str,
    *,
    description: str | None = None,
    who: Principal | str | None = None,
    allow_private: bool = False,
    sealer: Sealer | None = None,
) -> WebhookCreatedOut:
    """Register a hook; the answer carries the secret, the only time it is shown. The
    secret is stored sealed (see :mod:`tecfleet.api.sealing`); a hook made by ``who`` goes to
    the audit trail."""
    clean = check_url(url, allow_private=allow_private)
    secret = new_secret()
    sealed = (sealer or sealer_for(None)).seal(secret)
    now = now_ms()
    by = who.name if isinstance(who, Principal) else who
    hook_id = delivery_db.insert_webhook(engine, clean, sealed, description, now, by)
    if who is not None:
        record_change(
            engine,
            who,
            "webhook.create",
            f"webhook/{hook_id}",
            {"url": clean, "description": description},
        )
    return WebhookCreatedOut(
        id=hook_id,
        url=clean,
        description=description,
        created_at=ms_to_rfc3339(now),
        secret=secret,
    )


def _hook_out(r: Any) -> WebhookOut:
    return WebhookOut(
        id=int(r.id),
        url=r.url,
        description=r.description,
        created_at=ms_to_rfc3339(r.created_ms),
    )


def list_webhooks(engine: Engine) -> list[WebhookOut]:
    """Hooks not deleted, oldest first (never their secrets)."""
    return [_hook_out(r) for r in delivery_db.live_webhooks(engine)]


def require_webhook(engine: Engine, webhook_id: int) -> None:
    """NotFoundError unless the hook exists and is not deleted."""
    if delivery_db.live_webhook(engine, webhook_id) is None:
        raise NotFoundError(f"unknown webhook {webhook_id}")


def delete_webhook(engine: Engine, webhook_id: int, who: Principal | None = None) -> None:
    require_webhook(engine, webhook_id)
    delivery_db.delete_webhook(engine, webhook_id)
    if who is not None:
        record_change(engine, who, "webhook.delete", f"webhook/{webhook_id}", {})


def _delivery_out(r: Any) -> DeliveryOut:
    return DeliveryOut(
        id=int(r.id),
        msg_id=r.msg_id,
        event=r.event,
        alert_id=r.alert_id,
        state=r.state,
        attempts=int(r.attempts),
        created_at=ms_to_rfc3339(r.created_ms),
        last_attempt_at=ms_to_rfc3339(r.last_attempt_ms),
        next_attempt_at=ms_to_rfc3339(r.next_attempt_ms) if r.state == "pending" else None,
        last_status=r.last_status,
        last_error=r.last_error,
        delivered_at=ms_to_rfc3339(r.delivered_ms),
    )


def list_deliveries(
    engine: Engine, webhook_id: int, limit: int, cursor: str | None
) -> tuple[list[DeliveryOut], str | None]:
    """Delivery log of one hook, newest first: state, attempts, last answer."""
    require_webhook(engine, webhook_id)
    before = int_cursor(cursor)
    rows = delivery_db.deliveries_page(engine, webhook_id, before, limit)
    return [_delivery_out(r) for r in rows[:limit]], next_cursor(rows, limit, "id")
