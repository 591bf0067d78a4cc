"""Webhook delivery following the Standard Webhooks specification.

Each notice is POSTed as JSON with headers ``webhook-id``, ``webhook-timestamp`` and
``webhook-signature`` = ``v1,<base64 HMAC-SHA256 of "{id}.{timestamp}.{body}">``.
``webhook-id`` stays the same across retries so the receiver can drop duplicates, and the
timestamp lets it refuse replays. Failures retry with exponential backoff and end as ``dead``
after ``max_attempts``; every attempt is written to the delivery log.

Targets must be http(s) and, unless private targets are allowed (on-premise receivers), must
not resolve to loopback, private, link-local, multicast or reserved addresses; the check is
repeated before every attempt because DNS may change.
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import ipaddress
import os
import secrets
import socket
import time
from typing import Any

import httpx
import orjson
from sqlalchemy.engine import Engine

from tecfleet.api.delivery.options import DeliveryOptions
from tecfleet.api.errors import WebhookError
from tecfleet.api.schemas.alerts import alert_object
from tecfleet.api.sealing import Sealer, sealer_for
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest.db import delivery as delivery_db

SECRET_PREFIX = "whsec_"
#: Environment switch for on-premise receivers on private addresses.
ALLOW_PRIVATE_ENV = "TECFLEET_WEBHOOK_ALLOW_PRIVATE"


def new_secret() -> str:
    """A signing secret in the Standard Webhooks form: ``whsec_`` + base64 of 24 random bytes."""
    return SECRET_PREFIX + base64.b64encode(secrets.token_bytes(24)).decode()


def sign(secret: str, msg_id: str, timestamp: int, body: bytes) -> str:
    """``v1,<signature>`` over ``{msg_id}.{timestamp}.{body}`` (Standard Webhooks)."""
    key = base64.b64decode(secret.removeprefix(SECRET_PREFIX))
    content = f"{msg_id}.{timestamp}.".encode() + body
    digest = hmac.new(key, content, hashlib.sha256).digest()
    return "v1," + base64.b64encode(digest).decode()


def allow_private_default() -> bool:
    return os.environ.get(ALLOW_PRIVATE_ENV, "").strip().lower() in ("1", "true", "yes")


def check_url(url: str, *, allow_private: bool) -> str:
    """The URL, normalised, if it may receive webhooks; WebhookError otherwise."""
    try:
        parsed = httpx.URL(url)
    except (httpx.InvalidURL, TypeError) as exc:
        raise WebhookError(f"invalid URL: {exc}") from exc
    if parsed.scheme not in ("http", "https") or not parsed.host:
        raise WebhookError("webhook URL must be http:// or https:// with a host")
    if allow_private:
        return str(parsed)
    port = parsed.port or (443 if parsed.scheme == "https" else 80)
    try:
        infos = socket.getaddrinfo(parsed.host, port, proto=socket.IPPROTO_TCP)
    except socket.gaierror as exc:
        raise WebhookError(f"cannot resolve {parsed.host!r}: {exc}") from exc
    for info in infos:
        address = ipaddress.ip_address(str(info[4][0]).split("%")[0])
        if (
            address.is_private
            or address.is_loopback
            or address.is_link_local
            or address.is_multicast
            or address.is_reserved
            or address.is_unspecified
        ):
            raise WebhookError(
                f"{parsed.host} resolves to {address}, a private or local address; "
                f"set {ALLOW_PRIVATE_ENV}=1 for on-premise receivers"
            )
    return str(parsed)


def webhook_body(row: Any) -> dict[str, Any]:
    """JSON body of a notice: ``type``, ``timestamp`` and ``data`` (Standard Webhooks style)."""
    payload = dict(row.payload)
    data: dict[str, Any]
    if "alert" in payload:
        data = {"alert": alert_object(payload["alert"])}
        data.update({k: v for k, v in payload.items() if k not in ("alert", "change")})
    else:
        data = {
            "site": payload.get("site"),
            "kind": payload.get("kind"),
            "devices": payload.get("devices"),
            "alerts": [alert_object(a) for a in payload.get("alerts", [])],
            "summary": payload.get("summary"),
        }
    return {"type": row.event, "timestamp": ms_to_rfc3339(int(row.event_ms)), "data": data}


class WebhookSender:
    """Attempts due deliveries, retries with backoff and records every outcome."""

    def __init__(
        self,
        engine: Engine,
        options: DeliveryOptions,
        *,
        allow_private: bool,
        sealer: Sealer | None = None,
    ) -> None:
        self.engine = engine
        self.options = options
        self.allow_private = allow_private
        self.sealer = sealer if sealer is not None else sealer_for(None)
        self._http = httpx.Client(timeout=options.timeout_s, follow_redirects=False)

    def close(self) -> None:
        self._http.close()

    def deliver_due(self, now: int) -> None:
        """Attempt every delivery due at ``now`` [ms]; those of deleted hooks are cancelled."""
        # Claimed a few at a time, each claim for twice as long as its attempts can take, so
        # no other delivery process sends them meanwhile.
        claim_ms = int(self.options.claim_batch * self.options.timeout_s * 2000)
        while True:
            due, notices = delivery_db.due_deliveries(
                self.engine, now, self.options.claim_batch, claim_ms
            )
            if not due:
                return
            for row in due:
                if row.deleted_ms is not None:
                    self._finish(row.id, "cancelled", row.attempts, None, "webhook deleted")
                    continue
                self._attempt(row, notices[row.notification_id])

    def _post(self, row: Any, notice: Any) -> int:
        """POST one signed notice; the HTTP status, or WebhookError / httpx.HTTPError."""
        body = orjson.dumps(webhook_body(notice))
        timestamp = int(time.time())
        url = check_url(row.url, allow_private=self.allow_private)
        response = self._http.post(
            url,
            content=body,
            headers={
                "content-type": "application/json",
                "webhook-id": row.msg_id,
                "webhook-timestamp": str(timestamp),
                "webhook-signature": sign(
                    self.sealer.open(row.secret), row.msg_id, timestamp, body
                ),
            },
        )
        return response.status_code

    def _attempt(self, row: Any, notice: Any) -> None:
        status: int | None = None
        error: str | None = None
        try:
            status = self._post(row, notice)
            if 200 <= status < 300:
                self._finish(row.id, "delivered", row.attempts + 1, status, None)
                return
            error = f"HTTP {status}"
        except WebhookError as exc:
            error = str(exc)
        except httpx.HTTPError as exc:
            error = f"{exc.__class__.__name__}: {exc}"
        attempts = row.attempts + 1
        if attempts >= self.options.max_attempts:
            self._finish(row.id, "dead", attempts, status, error)
            return
        delay = min(self.options.backoff_s * 2 ** (attempts - 1), self.options.backoff_max_s)
        delivery_db.schedule_retry(self.engine, row.id, attempts, status, error, int(delay * 1000))

    def _finish(
        self, delivery_id: int, state: str, attempts: int, status: int | None, error: str | None
    ) -> None:
        delivery_db.finish_delivery(self.engine, delivery_id, state, attempts, status, error)
