"""The delivery role on its own: two `tecfleet serve --roles delivery` processes drain one
outbox on PostgreSQL to Debian's broker and to two webhook receivers, and no notice goes out
twice (at most once per receiver while the deliverers live; Standard Webhooks keeps the
``webhook-id`` of a notice the same, so a receiver can tell)."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
from collections import Counter
from pathlib import Path

import paho.mqtt.client as mqtt
import pytest
import sqlalchemy as sa
from paho.mqtt.enums import CallbackAPIVersion

from tecfleet.analytics import alerts
from tecfleet.api.delivery import check_url, new_secret
from tecfleet.api.service import delivers
from tecfleet.ingest import db
from tecfleet.ingest.db import delivery as delivery_db
from tests.api.test_webhooks import Receiver, excursion
from tests.ingest.mqtt_helpers import wait_for
from tests.services import Mosquitto, Postgres, free_port

pytestmark = [pytest.mark.postgres, pytest.mark.broker, pytest.mark.slow]

UNITS = 40


def _deliverer(url: str, broker: Mosquitto, name: str, log: Path) -> subprocess.Popen[bytes]:
    env = dict(
        os.environ,
        TECFLEET_DATABASE_URL=url,
        TECFLEET_MQTT_URL=broker.url,
        TECFLEET_MQTT_CLIENT_ID=name,
        TECFLEET_ROLES="delivery",
        TECFLEET_WEBHOOK_ALLOW_PRIVATE="1",  # the receivers are on loopback
    )
    with log.open("wb") as out:
        return subprocess.Popen(
            [sys.executable, "-m", "tecfleet.api.cli", "serve"], env=env, stdout=out, stderr=out
        )


def test_two_deliverers_never_send_a_notice_twice(
    postgres: Postgres, mosquitto: Mosquitto, tmp_path: Path
) -> None:
    url = postgres.create_database(f"t_deliver_{os.getpid()}")
    engine = db.make_engine(url)
    db.migrate(engine)
    receivers = [Receiver(free_port()), Receiver(free_port())]
    for receiver in receivers:
        target = check_url(receiver.url, allow_private=True)
        delivery_db.insert_webhook(engine, target, new_secret(), None, db.now_ms(), None)
    seen: list[bytes] = []
    subscribed = threading.Event()
    watcher = mqtt.Client(callback_api_version=CallbackAPIVersion.VERSION2, client_id="watcher")
    watcher.on_message = lambda _c, _u, m: seen.append(m.payload)
    watcher.on_subscribe = lambda *_a: subscribed.set()
    watcher.connect("127.0.0.1", mosquitto.port)
    watcher.subscribe("tecfleet/+/alerts", qos=1)
    watcher.loop_start()
    assert subscribed.wait(10)
    workers = [
        _deliverer(url, mosquitto, f"deliver-{k}", tmp_path / f"deliver-{k}.log") for k in (1, 2)
    ]
    try:
        # Both deliverers are polling before the notices appear, so they compete for them.
        for k in range(UNITS):
            excursion(engine, f"fr-{k}")
        opened = [c for c in alerts.evaluate(engine) if c.change == "opened"]
        assert len(opened) == UNITS

        def drained() -> bool:
            with engine.connect() as c:
                left = c.execute(
                    sa.text(
                        "SELECT (SELECT count(*) FROM notifications WHERE state = 'pending'"
                        " OR mqtt_state = 'pending') + (SELECT count(*) FROM"
                        " webhook_deliveries WHERE state = 'pending')"
                    )
                ).scalar_one()
            return int(left) == 0 and len(seen) >= UNITS

        assert wait_for(drained, 120, every_s=0.5)
        wait_for(lambda: False, 2)  # anything sent twice would arrive meanwhile
    finally:
        for worker in workers:
            worker.send_signal(signal.SIGTERM)
        codes = [worker.wait(60) for worker in workers]
        watcher.loop_stop()
        watcher.disconnect()
        for receiver in receivers:
            receiver.close()
    assert codes == [0, 0]
    for receiver in receivers:
        ids = Counter(headers["webhook-id"] for headers, _body in receiver.got)
        assert len(ids) == UNITS and max(ids.values()) == 1
    alerts_seen = Counter((a["id"], a["state"]) for a in map(json.loads, seen))
    assert len(alerts_seen) == UNITS and max(alerts_seen.values()) == 1
    for k in (1, 2):
        assert "Traceback" not in (tmp_path / f"deliver-{k}.log").read_text()


def test_the_all_in_one_roles_still_deliver() -> None:
    # The contract's set ingest,analytics,api ran delivery before the role had a name.
    assert delivers(("ingest", "analytics", "api"))
    assert delivers(("delivery",))
    assert not delivers(("analytics",))
    assert not delivers(("ingest", "api"))
