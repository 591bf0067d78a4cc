"""Alert objects published to MQTT: QoS 1 on ``<prefix>/<device_id>/alerts``.

A notice is marked sent only after the broker acknowledged it (at-least-once). Each device's
alert object goes to its own topic, since that is per-device state, not a page.
"""

from __future__ import annotations

import time

import orjson
from paho.mqtt import client as mqtt
from paho.mqtt.enums import CallbackAPIVersion
from sqlalchemy.engine import Engine

from tecfleet.api.schemas.alerts import alert_object
from tecfleet.ingest.db import delivery as delivery_db
from tecfleet.ingest.settings import Settings


class AlertPublisher:
    """Publishes pending notices' alert objects; connects on first use and reconnects."""

    def __init__(self, engine: Engine, settings: Settings, timeout_s: float) -> None:
        self.engine = engine
        self.settings = settings
        self.timeout_s = timeout_s
        self._mqtt: mqtt.Client | None = None

    def _client(self) -> mqtt.Client:
        if self._mqtt is not None and self._mqtt.is_connected():
            return self._mqtt
        settings = self.settings
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

    def publish_pending(self) -> None:
        """Publish pending notices oldest first; stop at the first the broker does not take.

        One delivery process at a time publishes (see ``delivery_db.take_turn``), so each
        device's notices go out in order and none twice; what was acknowledged is marked sent
        in the same transaction.
        """
        with self.engine.begin() as conn:
            if not delivery_db.take_turn(conn, delivery_db.MQTT_TURN):
                return
            rows = delivery_db.mqtt_pending(conn)
            if not rows:
                return
            client = self._client()
            prefix = self.settings.topic_prefix
            sent: list[int] = []
            for row in rows:
                body = orjson.dumps(alert_object(row.payload["alert"]))
                info = client.publish(f"{prefix}/{row.device_id}/alerts", body, qos=1)
                info.wait_for_publish(self.timeout_s)
                if not info.is_published():
                    break  # broker gone; the rest stays pending for the next round
                sent.append(int(row.id))
            delivery_db.mark_mqtt_sent(conn, sent)

    def close(self) -> None:
        if self._mqtt is not None:
            self._mqtt.loop_stop()
            self._mqtt.disconnect()
