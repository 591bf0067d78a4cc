"""Delivery of alert notices: the outbox drained to MQTT and to signed webhooks.

``tecfleet.analytics.alerts`` writes one row in ``notifications`` in the same transaction as
each alert change; :class:`Notifier` (a thread) drains it, so a notice survives a restart:

* MQTT: the contract's alert object, QoS 1, on ``<prefix>/<device_id>/alerts``; a row is
  marked sent only after the broker acknowledged it (at-least-once).
* Webhooks: one delivery row per (hook, notice), POSTed as JSON following the Standard
  Webhooks specification (headers ``webhook-id``, ``webhook-timestamp``, ``webhook-signature``
  = ``v1,<base64 HMAC-SHA256 of "{id}.{timestamp}.{body}">``). ``webhook-id`` stays the same
  across retries so the receiver can drop duplicates, and the timestamp lets it refuse
  replays. Failures retry with exponential backoff and end as ``dead`` after ``max_attempts``.
* Site grouping: "opened" notices of one site and kind whose event times fall in one
  ``group_window_s`` bucket become one grouped webhook notice once ``group_min_devices``
  devices are in it (a site power cut gives one notice, not twenty). Each device's alert
  object still goes to its own MQTT topic, since that is per-device state, not a page.

Webhook targets must be http(s) and, unless private targets are allowed (on-premise
receivers), must not resolve to loopback, private, link-local, multicast or reserved
addresses; the check is repeated before every attempt because DNS may change.
"""

from __future__ import annotations

import base64
import hashlib
import hmac
import ipaddress
import logging
import os
import secrets
import socket
import threading
import time
from collections.abc import Mapping
from typing import Any

import httpx
import orjson
import sqlalchemy as sa
from paho.mqtt import client as mqtt
from paho.mqtt.enums import CallbackAPIVersion
from sqlalchemy.engine import Engine

from tecfleet.api.errors import WebhookError
from tecfleet.api.timefmt import ms_to_rfc3339
from tecfleet.ingest import db
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)

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


def alert_object(alert: Mapping[str, Any]) -> dict[str, Any]:
    """The contract's alert object from a row dict with millisecond times."""
    return {
        "id": alert["id"],
        "device_id": alert["device_id"],
        "kind": alert["kind"],
        "severity": alert["severity"],
        "state": alert["state"],
        "opened_at": ms_to_rfc3339(alert["opened_ms"]),
        "updated_at": ms_to_rfc3339(alert["updated_ms"]),
        "resolved_at": ms_to_rfc3339(alert.get("resolved_ms")),
        "summary": alert["summary"],
        "evidence": alert["evidence"],
        "reopen_count": alert.get("reopen_count", 0),
    }


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


class Notifier(threading.Thread):
    """Drains the outbox to MQTT and webhooks until :meth:`stop`.

    ``settings`` None means no MQTT (webhooks only). Times in seconds.
    """

    def __init__(
        self,
        engine: Engine,
        settings: Settings | None = None,
        *,
        poll_s: float = 1.0,
        timeout_s: float = 10.0,
        max_attempts: int = 8,
        backoff_s: float = 5.0,
        backoff_max_s: float = 3600.0,
        group_min_devices: int = 3,
        group_window_s: float = 900.0,
        group_hold_s: float = 10.0,
        allow_private: bool | None = None,
    ) -> None:
        super().__init__(name="tecfleet-notifier", daemon=True)
        self.engine = engine
        self.settings = settings
        self.poll_s = poll_s
        self.timeout_s = timeout_s
        self.max_attempts = max_attempts
        self.backoff_s = backoff_s
        self.backoff_max_s = backoff_max_s
        self.group_min_devices = group_min_devices
        self.group_window_ms = int(group_window_s * 1000)
        self.group_hold_ms = int(group_hold_s * 1000)
        self.allow_private = allow_private_default() if allow_private is None else allow_private
        self._halt = threading.Event()
        self._mqtt: mqtt.Client | None = None
        self._http = httpx.Client(timeout=timeout_s, follow_redirects=False)

    # -- lifecycle -----------------------------------------------------------------------

    def stop(self, timeout_s: float = 10.0) -> None:
        self._halt.set()
        if self.is_alive():
            self.join(timeout_s)

    def run(self) -> None:
        try:
            while not self._halt.is_set():
                try:
                    self.drain_once()
                except Exception:  # keep draining after a database or broker hiccup
                    log.exception("notifier round failed")
                self._halt.wait(self.poll_s)
        finally:
            self._http.close()
            if self._mqtt is not None:
                self._mqtt.loop_stop()
                self._mqtt.disconnect()

    def drain_once(self) -> None:
        """One round: fan out new notices, publish to MQTT, attempt due webhook deliveries."""
        now = db.now_ms()
        self.fan_out(now)
        self.fan_out(now)  # group notices made by the first pass go out in this round too
        if self.settings is not None:
            self.publish_mqtt()
        self.deliver_due(now)

    # -- fan-out and grouping ------------------------------------------------------------

    def fan_out(self, now: int) -> None:
        n, w, d = db.notifications, db.webhooks, db.webhook_deliveries
        with self.engine.begin() as conn:
            pending = conn.execute(
                sa.select(n).where(n.c.state == "pending").order_by(n.c.id)
            ).fetchall()
            if not pending:
                return
            hooks = [
                int(h)
                for h in conn.execute(sa.select(w.c.id).where(w.c.deleted_ms.is_(None))).scalars()
            ]
            ready: list[Any] = []
            buckets: dict[tuple[str, str, int], list[Any]] = {}
            for row in pending:
                if row.event == "alert.opened" and row.site:
                    if now - int(row.created_ms) < self.group_hold_ms:
                        continue  # let the rest of a site-wide event arrive first
                    key = (row.site, row.kind, int(row.event_ms) // self.group_window_ms)
                    buckets.setdefault(key, []).append(row)
                else:
                    ready.append(row)
            for (site, kind, bucket), rows in buckets.items():
                existing = conn.execute(
                    sa.select(n.c.id).where(
                        n.c.event == "site.alerts_opened",
                        n.c.site == site,
                        n.c.kind == kind,
                        n.c.event_ms >= bucket * self.group_window_ms,
                        n.c.event_ms < (bucket + 1) * self.group_window_ms,
                    )
                ).scalar()
                devices = sorted({r.device_id for r in rows})
                if existing is None and len(devices) < self.group_min_devices:
                    ready.extend(rows)
                    continue
                if existing is None:
                    alerts_ = [r.payload["alert"] for r in rows]
                    summary = (
                        f"{len(devices)} units at site {site} raised {kind} within "
                        f"{self.group_window_ms // 60000} min; check the site (power, "
                        "climate) before the single units."
                    )
                    existing = conn.execute(
                        n.insert()
                        .values(
                            created_ms=now,
                            event_ms=min(int(r.event_ms) for r in rows),
                            event="site.alerts_opened",
                            site=site,
                            kind=kind,
                            payload={
                                "site": site,
                                "kind": kind,
                                "devices": devices,
                                "alerts": alerts_,
                                "summary": summary,
                            },
                            state="pending",
                            mqtt_state="none",
                        )
                        .returning(n.c.id)
                    ).scalar_one()
                conn.execute(
                    n.update()
                    .where(n.c.id.in_([r.id for r in rows]))
                    .values(state="grouped", group_id=existing)
                )
            for row in ready:
                for hook in hooks:
                    conn.execute(
                        d.insert().values(
                            webhook_id=hook,
                            notification_id=row.id,
                            msg_id=f"msg_tf{row.id}",
                            state="pending",
                            attempts=0,
                            created_ms=now,
                            next_attempt_ms=now,
                        )
                    )
                conn.execute(n.update().where(n.c.id == row.id).values(state="fanned_out"))

    # -- MQTT ----------------------------------------------------------------------------

    def _client(self) -> mqtt.Client:
        if self._mqtt is not None and self._mqtt.is_connected():
            return self._mqtt
        settings = self.settings
        assert settings is not None
        if self._mqtt is None:
            import ssl

            client = mqtt.Client(
                callback_api_version=CallbackAPIVersion.VERSION2,
                client_id=f"{settings.mqtt_client_id}-alerts",
            )
            credentials = settings.mqtt_credentials
            if credentials is not None:
                client.username_pw_set(*credentials)
            if settings.mqtt_tls:
                client.tls_set(cert_reqs=ssl.CERT_REQUIRED)
            client.connect(settings.mqtt_host, settings.mqtt_port, keepalive=30)
            client.loop_start()
            self._mqtt = client
        deadline = time.monotonic() + self.timeout_s
        while not self._mqtt.is_connected() and time.monotonic() < deadline:
            time.sleep(0.02)
        return self._mqtt

    def publish_mqtt(self) -> None:
        assert self.settings is not None
        n = db.notifications
        with self.engine.connect() as conn:
            rows = conn.execute(
                sa.select(n.c.id, n.c.device_id, n.c.payload)
                .where(n.c.mqtt_state == "pending")
                .order_by(n.c.id)
                .limit(500)
            ).fetchall()
        if not rows:
            return
        client = self._client()
        prefix = self.settings.topic_prefix
        for row in rows:
            body = orjson.dumps(alert_object(row.payload["alert"]))
            info = client.publish(f"{prefix}/{row.device_id}/alerts", body, qos=1)
            info.wait_for_publish(self.timeout_s)
            if not info.is_published():
                return  # broker gone; the rest stays pending for the next round
            with self.engine.begin() as conn:
                conn.execute(n.update().where(n.c.id == row.id).values(mqtt_state="sent"))

    # -- webhooks ------------------------------------------------------------------------

    def deliver_due(self, now: int) -> None:
        d, w, n = db.webhook_deliveries, db.webhooks, db.notifications
        with self.engine.connect() as conn:
            due = conn.execute(
                sa.select(d, w.c.url, w.c.secret, w.c.deleted_ms)
                .join(w, w.c.id == d.c.webhook_id)
                .where(d.c.state == "pending", d.c.next_attempt_ms <= now)
                .order_by(d.c.id)
                .limit(200)
            ).fetchall()
            notices = {
                r.id: r
                for r in conn.execute(
                    sa.select(n).where(n.c.id.in_({r.notification_id for r in due}))
                )
            }
        for row in due:
            if row.deleted_ms is not None:
                self._finish(row.id, "cancelled", row.attempts, None, "webhook deleted")
                continue
            self._attempt(row, notices[row.notification_id])

    def _attempt(self, row: Any, notice: Any) -> None:
        body = orjson.dumps(webhook_body(notice))
        timestamp = int(time.time())
        status: int | None = None
        error: str | None = None
        try:
            url = check_url(row.url, allow_private=self.allow_private)
            response = self._http.post(
                url,
                content=body,
                headers={
                    "content-type": "application/json",
                    "webhook-id": row.msg_id,
                    "webhook-timestamp": str(timestamp),
                    "webhook-signature": sign(row.secret, row.msg_id, timestamp, body),
                },
            )
            status = response.status_code
            if 200 <= status < 300:
                self._finish(row.id, "delivered", row.attempts + 1, status, None)
                return
            error = f"HTTP {status}"
        except WebhookError as exc:
            error = str(exc)
        except httpx.HTTPError as exc:
            error = f"{exc.__class__.__name__}: {exc}"
        attempts = row.attempts + 1
        if attempts >= self.max_attempts:
            self._finish(row.id, "dead", attempts, status, error)
            return
        delay = min(self.backoff_s * 2 ** (attempts - 1), self.backoff_max_s)
        with self.engine.begin() as conn:
            conn.execute(
                db.webhook_deliveries.update()
                .where(db.webhook_deliveries.c.id == row.id)
                .values(
                    attempts=attempts,
                    last_attempt_ms=db.now_ms(),
                    last_status=status,
                    last_error=error,
                    next_attempt_ms=db.now_ms() + int(delay * 1000),
                )
            )

    def _finish(
        self, delivery_id: int, state: str, attempts: int, status: int | None, error: str | None
    ) -> None:
        now = db.now_ms()
        with self.engine.begin() as conn:
            conn.execute(
                db.webhook_deliveries.update()
                .where(db.webhook_deliveries.c.id == delivery_id)
                .values(
                    state=state,
                    attempts=attempts,
                    last_attempt_ms=now,
                    last_status=status,
                    last_error=error,
                    delivered_ms=now if state == "delivered" else None,
                )
            )


# -- webhook registry (used by the routes) -------------------------------------------------


def create_webhook(
    engine: Engine,
    url: str,
    *,
    description: str | None = None,
    created_by: str | None = None,
    allow_private: bool = False,
) -> dict[str, Any]:
    """Register a hook; the answer carries the secret, the only time it is shown."""
    clean = check_url(url, allow_private=allow_private)
    secret = new_secret()
    now = db.now_ms()
    w = db.webhooks
    with engine.begin() as conn:
        hook_id = conn.execute(
            w.insert()
            .values(
                url=clean,
                secret=secret,
                description=description,
                created_ms=now,
                created_by=created_by,
            )
            .returning(w.c.id)
        ).scalar_one()
    return {
        "id": int(hook_id),
        "url": clean,
        "description": description,
        "created_at": ms_to_rfc3339(now),
        "secret": secret,
    }
