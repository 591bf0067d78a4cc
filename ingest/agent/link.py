"""The agent's MQTT connection: QoS 1 batches, TLS, credentials, retained status, last will.

paho's network thread keeps the connection (reconnecting with back-off) and resends a QoS 1
message that was not acknowledged when the connection dropped. The main thread hands messages
over with :meth:`Link.send`; :meth:`Link.acknowledged` gives back the buffer ids of every message
the broker has acknowledged since the last call, which the main thread then removes from the
buffer. MQTT 5 is spoken so that a refused publish (not authorised) comes back as a refusal and
its readings stay in the buffer.
"""

from __future__ import annotations

import json
import logging
import ssl
import threading
from typing import Any
from urllib.parse import urlsplit

import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion
from paho.mqtt.reasoncodes import ReasonCode

from tecfleet.ingest.agent.buffer import Row
from tecfleet.ingest.agent.options import AgentConfig
from tecfleet.ingest.errors import BrokerError

log = logging.getLogger(__name__)

ONLINE, OFFLINE = b"online", b"offline"


class Link:
    """One persistent connection to the broker under the device's own id."""

    def __init__(self, config: AgentConfig) -> None:
        self.config = config
        self.connected = threading.Event()
        self._lock = threading.Lock()
        self._in_flight: list[tuple[mqtt.MQTTMessageInfo, list[int]]] = []
        self._refused: dict[int, str] = {}
        self._client = _client(config)
        self._client.on_connect = self._on_connect
        self._client.on_disconnect = self._on_disconnect
        self._client.on_publish = self._on_publish

    def start(self) -> None:
        url = urlsplit(self.config.mqtt_url)
        port = url.port or (8883 if url.scheme == "mqtts" else 1883)
        self._client.connect_async(
            url.hostname or "", port, keepalive=self.config.options.keepalive_s, clean_start=True
        )
        self._client.loop_start()

    def stop(self, timeout_s: float = 5.0) -> None:
        """Say ``offline`` (retained), wait for it and for messages in flight, disconnect."""
        if self.connected.is_set():
            info = self._client.publish(self.config.status_topic, OFFLINE, qos=1, retain=True)
            info.wait_for_publish(timeout_s)
        self._client.disconnect()
        self._client.loop_stop()

    def in_flight(self) -> int:
        return len(self._in_flight)

    def send(self, rows: list[Row]) -> None:
        """Publish rows as one batch message at QoS 1."""
        payload = json.dumps([row.item() for row in rows], separators=(",", ":")).encode()
        info = self._client.publish(self.config.telemetry_topic, payload, qos=1)
        if info.rc not in (mqtt.MQTT_ERR_SUCCESS, mqtt.MQTT_ERR_NO_CONN):
            raise BrokerError(f"publish refused: {mqtt.error_string(info.rc)}")
        self._in_flight.append((info, [row.id for row in rows]))

    def acknowledged(self) -> list[int]:
        """Buffer ids of every reading acknowledged since the last call.

        Polls each message's own completion flag rather than matching packet ids in a callback:
        paho calls back while holding its own lock, and packet ids are reused.
        """
        done: list[int] = []
        waiting = []
        for info, ids in self._in_flight:
            if not info.is_published():
                waiting.append((info, ids))
                continue
            with self._lock:
                refused = self._refused.pop(info.mid, None)
            if refused is None:
                done.extend(ids)
            else:
                # Refused (e.g. not authorised): the readings stay buffered for the next start.
                log.error("broker refused a batch of %d readings: %s", len(ids), refused)
        self._in_flight = waiting
        return done

    def _on_connect(
        self, client: mqtt.Client, _u: Any, _f: Any, reason: ReasonCode, _p: Any
    ) -> None:
        if reason.is_failure:
            log.warning("broker refused the connection: %s", reason)
            return
        client.publish(self.config.status_topic, ONLINE, qos=1, retain=True)
        self.connected.set()
        log.info("connected to %s", self.config.mqtt_url.split("@")[-1])

    def _on_disconnect(self, _c: Any, _u: Any, _f: Any, reason: ReasonCode, _p: Any) -> None:
        if self.connected.is_set():
            log.warning("disconnected from the broker (%s); readings wait in the buffer", reason)
        self.connected.clear()

    def _on_publish(self, _c: Any, _u: Any, mid: int, reason: ReasonCode, _p: Any) -> None:
        # Runs before paho marks the message published, so acknowledged() sees the refusal.
        if reason.is_failure:
            with self._lock:
                self._refused[mid] = str(reason)


def _client(config: AgentConfig) -> mqtt.Client:
    """A paho client with the device's id, credentials, TLS and last will."""
    client = mqtt.Client(
        callback_api_version=CallbackAPIVersion.VERSION2,
        client_id=f"{config.device_id}-agent",
        # MQTT 5: a refused publish comes back with a reason code instead of vanishing.
        protocol=mqtt.MQTTv5,
    )
    options = config.options
    client.max_inflight_messages_set(options.max_inflight_messages)
    client.reconnect_delay_set(options.reconnect_min_s, options.reconnect_max_s)
    if config.username:
        client.username_pw_set(config.username, config.password)
    if urlsplit(config.mqtt_url).scheme == "mqtts":
        try:
            client.tls_set(
                ca_certs=str(config.ca_file) if config.ca_file else None,
                certfile=str(config.cert_file) if config.cert_file else None,
                keyfile=str(config.key_file) if config.key_file else None,
                cert_reqs=ssl.CERT_REQUIRED,
            )
        except (OSError, ssl.SSLError, ValueError) as exc:
            raise BrokerError(f"TLS set-up failed: {exc}") from exc
    client.will_set(config.status_topic, OFFLINE, qos=1, retain=True)
    return client
