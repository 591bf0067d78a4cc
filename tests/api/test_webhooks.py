"""Webhook and MQTT delivery of alert notices to real receivers: a local HTTP server, a
mosquitto broker. Signatures are checked independently with the standard library's hmac
following the Standard Webhooks specification."""

from __future__ import annotations

import base64
import hashlib
import hmac
import json
import threading
import time
from collections.abc import Iterator
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from typing import Any

import pytest
import sqlalchemy as sa
from fastapi.testclient import TestClient
from paho.mqtt import client as mqtt
from paho.mqtt.enums import CallbackAPIVersion

from tecfleet.analytics import alerts
from tecfleet.api import delivery
from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.api.errors import WebhookError
from tecfleet.api.services.webhooks import create_webhook
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading
from tecfleet.ingest.settings import Settings
from tests.services import Mosquitto, free_port, migrated

T0 = 1_790_000_000_000
MIN = 60_000


class Receiver:
    """An HTTP receiver on 127.0.0.1 that records what it gets; ``down`` answers 503."""

    def __init__(self, port: int) -> None:
        self.port = port
        self.got: list[tuple[dict[str, str], bytes]] = []
        self.down = False
        outer = self

        class Handler(BaseHTTPRequestHandler):
            def do_POST(self) -> None:
                body = self.rfile.read(int(self.headers["content-length"]))
                if outer.down:
                    self.send_response(503)
                    self.end_headers()
                    return
                outer.got.append(({k.lower(): v for k, v in self.headers.items()}, body))
                self.send_response(204)
                self.end_headers()

            def log_message(self, *_args: Any) -> None:
                pass

        self.server = ThreadingHTTPServer(("127.0.0.1", port), Handler)
        self.thread = threading.Thread(target=self.server.serve_forever, daemon=True)
        self.thread.start()

    def close(self) -> None:
        self.server.shutdown()
        self.server.server_close()

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}/hook"


@pytest.fixture
def engine(sqlite_url: str) -> Iterator[sa.Engine]:
    yield from migrated(sqlite_url)


@pytest.fixture
def receiver() -> Iterator[Receiver]:
    r = Receiver(free_port())
    yield r
    r.close()


def excursion(engine: sa.Engine, device: str, site: str | None = None) -> None:
    """Store 20 min of a cabinet in its 2-8 °C band (past its commissioning pull-down), then
    two hours at 10 °C (out of the band)."""
    if site is not None:
        with engine.begin() as conn:
            conn.execute(db.devices.insert().values(device_id=device, site=site, readings=0))
    rows = [
        Reading(
            device,
            T0 + i * MIN,
            (5.0 if i < 20 else 10.0) + 0.1 * (i % 2),
            2.0 + 0.1 * (i % 3),
            30.0 + 0.1 * (i % 4),
            22.0 + 0.1 * (i % 5),
            3.0,
            8.0,
        )
        for i in range(140)
    ]
    db.store_batch(engine, rows)


def verify(secret: str, headers: dict[str, str], body: bytes) -> bool:
    """The receiver's side of Standard Webhooks, written from the specification."""
    key = base64.b64decode(secret.removeprefix("whsec_"))
    signed = f"{headers['webhook-id']}.{headers['webhook-timestamp']}.".encode() + body
    expected = base64.b64encode(hmac.new(key, signed, hashlib.sha256).digest()).decode()
    return any(
        hmac.compare_digest(part.split(",", 1)[1], expected)
        for part in headers["webhook-signature"].split()
        if part.startswith("v1,")
    )


def test_signed_delivery_retried_while_down_then_delivered_once(
    engine: sa.Engine, receiver: Receiver
) -> None:
    app = create_app(engine)
    app.state.webhook_allow_private = True  # the receiver is on loopback
    client = TestClient(app)
    admin = {"Authorization": f"Bearer {create_key(engine, 'ops', 'admin')}"}
    made = client.post("/v1/webhooks", json={"url": receiver.url}, headers=admin)
    assert made.status_code == 201, made.text
    hook = made.json()
    assert hook["secret"].startswith("whsec_")
    assert "secret" not in client.get("/v1/webhooks", headers=admin).json()["items"][0]

    excursion(engine, "fr-1")
    assert [c.change for c in alerts.evaluate(engine)] == ["opened"]
    receiver.down = True
    notifier = delivery.Notifier(engine, None, backoff_s=0.2, allow_private=True, group_hold_s=0)
    for _ in range(3):
        notifier.drain_once()
        time.sleep(0.5)
    log = client.get(f"/v1/webhooks/{hook['id']}/deliveries", headers=admin).json()["items"]
    assert log[0]["state"] == "pending" and log[0]["attempts"] >= 2
    assert log[0]["last_status"] == 503
    receiver.down = False
    for _ in range(4):
        notifier.drain_once()
        time.sleep(0.5)
    assert len(receiver.got) == 1
    headers, body = receiver.got[0]
    assert verify(hook["secret"], headers, body)
    assert not verify(hook["secret"], headers, body + b" ")
    assert abs(int(headers["webhook-timestamp"]) - time.time()) < 60
    payload = json.loads(body)
    assert payload["type"] == "alert.opened"
    assert payload["data"]["alert"]["kind"] == "excursion"
    assert payload["data"]["alert"]["opened_at"].endswith("Z")
    log = client.get(f"/v1/webhooks/{hook['id']}/deliveries", headers=admin).json()["items"]
    assert log[0]["state"] == "delivered" and log[0]["msg_id"] == headers["webhook-id"]
    # a fresh notifier (a restart) sends nothing again
    delivery.Notifier(engine, None, allow_private=True, group_hold_s=0).drain_once()
    assert len(receiver.got) == 1


def test_dead_letter_after_the_last_attempt(engine: sa.Engine, receiver: Receiver) -> None:
    create_webhook(engine, receiver.url, allow_private=True)
    excursion(engine, "fr-1")
    alerts.evaluate(engine)
    receiver.down = True
    notifier = delivery.Notifier(
        engine, None, backoff_s=0.05, max_attempts=3, allow_private=True, group_hold_s=0
    )
    for _ in range(6):
        notifier.drain_once()
        time.sleep(0.2)
    with engine.connect() as conn:
        row = conn.execute(sa.select(db.webhook_deliveries)).one()
    assert (row.state, row.attempts, row.last_status) == ("dead", 3, 503)


def test_private_and_loopback_targets_refused_by_default(engine: sa.Engine) -> None:
    for url in (
        "http://127.0.0.1:9/x",
        "http://10.1.2.3/x",
        "http://169.254.169.254/x",
        "http://[::1]/x",
        "ftp://example.com/x",
    ):
        with pytest.raises(WebhookError):
            delivery.check_url(url, allow_private=False)
    assert delivery.check_url("http://127.0.0.1:9/x", allow_private=True)
    client = TestClient(create_app(engine))
    admin = {"Authorization": f"Bearer {create_key(engine, 'ops', 'admin')}"}
    refused = client.post("/v1/webhooks", json={"url": "http://127.0.0.1:9/x"}, headers=admin)
    assert refused.status_code == 422
    assert (refused.json()["field"], refused.json()["location"]) == ("url", "body")
    write = {"Authorization": f"Bearer {create_key(engine, 'w', 'write')}"}
    assert client.get("/v1/webhooks", headers=write).status_code == 403


def test_site_wide_event_gives_one_grouped_notice(engine: sa.Engine, receiver: Receiver) -> None:
    create_webhook(engine, receiver.url, allow_private=True)
    for i in range(4):
        excursion(engine, f"st-{i}", site="north")
    assert len(alerts.evaluate(engine)) == 4
    notifier = delivery.Notifier(engine, None, allow_private=True, group_hold_s=0)
    notifier.drain_once()
    assert len(receiver.got) == 1
    payload = json.loads(receiver.got[0][1])
    assert payload["type"] == "site.alerts_opened"
    assert payload["data"]["devices"] == ["st-0", "st-1", "st-2", "st-3"]


def test_alerts_published_qos1_on_the_device_alert_topic(
    engine: sa.Engine, mosquitto: Mosquitto
) -> None:
    got: list[mqtt.MQTTMessage] = []
    subscribed = threading.Event()
    sub = mqtt.Client(callback_api_version=CallbackAPIVersion.VERSION2, client_id="watcher")
    sub.on_message = lambda _c, _u, m: got.append(m)
    sub.on_subscribe = lambda *_a: subscribed.set()
    sub.connect("127.0.0.1", mosquitto.port)
    sub.subscribe("tecfleet/+/alerts", qos=1)
    sub.loop_start()
    assert subscribed.wait(10)
    excursion(engine, "fr-9")
    alerts.evaluate(engine)
    settings = Settings(mqtt_url=mosquitto.url, mqtt_client_id="alerts-test")
    notifier = delivery.Notifier(engine, settings, group_hold_s=0)
    notifier.drain_once()
    deadline = time.monotonic() + 10
    while not got and time.monotonic() < deadline:
        time.sleep(0.05)
    sub.loop_stop()
    sub.disconnect()
    assert got and got[0].topic == "tecfleet/fr-9/alerts" and got[0].qos == 1
    alert = json.loads(got[0].payload)
    assert set(alert) >= {
        "id",
        "device_id",
        "kind",
        "severity",
        "state",
        "opened_at",
        "updated_at",
        "resolved_at",
        "summary",
        "evidence",
    }
    assert (alert["device_id"], alert["kind"], alert["state"]) == ("fr-9", "excursion", "open")
    with engine.connect() as conn:
        states = conn.execute(sa.select(db.notifications.c.mqtt_state)).scalars().all()
    assert states == ["sent"]
