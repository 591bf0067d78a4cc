"""The ingester's MQTT side: protocol detection, client set-up and the persistent session.

The session is persistent (clean start off, a session expiry on MQTT 5) and subscribes at QoS 1
with manual acknowledgement, so the broker keeps what was not acknowledged across reconnects.
``generation`` counts connections: an acknowledgement is only sent on the connection the message
came in on, because packet ids are reused per connection.
"""

from __future__ import annotations

import logging
import ssl
import threading
import uuid
from collections.abc import Callable
from typing import Any

import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion, MQTTProtocolVersion
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties
from paho.mqtt.reasoncodes import ReasonCode

from tecfleet.ingest import metrics
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)


def detect_protocol(settings: Settings, timeout_s: float = 5.0) -> MQTTProtocolVersion:
    """MQTT 5 if the broker speaks it, else 3.1.1 (``mqtt_protocol=auto``).

    A throwaway clean connection asks; it never touches the ingester's own session.
    Raises ``ConnectionError`` when the broker cannot be reached.
    """
    if settings.mqtt_protocol == "5":
        return mqtt.MQTTv5
    if settings.mqtt_protocol == "3.1.1":
        return mqtt.MQTTv311
    answer: dict[str, Any] = {}
    done = threading.Event()

    def on_connect(_c: Any, _u: Any, _f: Any, reason: ReasonCode, _p: Any) -> None:
        answer["reason"] = reason
        done.set()

    def on_disconnect(_c: Any, _u: Any, _f: Any, reason: ReasonCode, _p: Any) -> None:
        answer.setdefault("reason", reason)
        done.set()

    probe = new_client(settings, f"tecfleet-probe-{uuid.uuid4().hex[:8]}", mqtt.MQTTv5)
    probe.on_connect = on_connect
    probe.on_disconnect = on_disconnect
    try:
        probe.connect(settings.mqtt_host, settings.mqtt_port, keepalive=10, clean_start=True)
    except OSError as exc:
        raise ConnectionError(
            f"MQTT broker {settings.mqtt_host}:{settings.mqtt_port}: {exc}"
        ) from exc
    probe.loop_start()
    try:
        done.wait(timeout_s)
    finally:
        probe.disconnect()
        probe.loop_stop()
    reason = answer.get("reason")
    if reason is not None and not reason.is_failure:
        return mqtt.MQTTv5
    if (
        reason is None
        or getattr(reason, "value", None) in (1, 132)
        or "protocol" in str(reason).lower()
    ):
        # Closed without CONNACK or refused the version: a 3.1.1-only broker.
        return mqtt.MQTTv311
    raise ConnectionError(f"MQTT broker refused the connection: {reason}")


def new_client(settings: Settings, client_id: str, protocol: MQTTProtocolVersion) -> mqtt.Client:
    """A paho client with manual acknowledgement, credentials and TLS from the settings."""
    client = mqtt.Client(
        callback_api_version=CallbackAPIVersion.VERSION2,
        client_id=client_id,
        protocol=protocol,
        clean_session=False if protocol == mqtt.MQTTv311 else None,
        manual_ack=True,
    )
    credentials = settings.mqtt_credentials
    if credentials:
        client.username_pw_set(*credentials)
    if settings.mqtt_tls:
        client.tls_set(cert_reqs=ssl.CERT_REQUIRED)
    return client


def _await_protocol(settings: Settings, stopping: threading.Event) -> MQTTProtocolVersion | None:
    """The broker's protocol once it answers (backing off), or None if stopped first."""
    delay = 0.5
    while not stopping.is_set():
        try:
            return detect_protocol(settings)
        except ConnectionError as exc:
            log.warning("MQTT broker not reachable (%s); retrying in %.1f s", exc, delay)
            stopping.wait(delay)
            delay = min(delay * 2, 30.0)
    return None


def _request_session(
    client: mqtt.Client, settings: Settings, protocol: MQTTProtocolVersion
) -> None:
    """Ask for the persistent session: no clean start, expiry and Receive Maximum on MQTT 5."""
    if protocol == mqtt.MQTTv5:
        properties = Properties(PacketTypes.CONNECT)  # type: ignore[no-untyped-call]
        properties.SessionExpiryInterval = settings.mqtt_session_expiry_s
        properties.ReceiveMaximum = settings.mqtt_receive_maximum
        client.connect_async(
            settings.mqtt_host,
            settings.mqtt_port,
            keepalive=30,
            clean_start=False,
            properties=properties,
        )
    else:
        client.connect_async(settings.mqtt_host, settings.mqtt_port, keepalive=30)


class MqttSession:
    """The ingester's one connection: connects, subscribes, reconnects and acknowledges.

    ``connect()`` runs on its own thread: it waits for the broker, then hands the connection to
    paho's network thread, which calls ``on_message`` for every message received. ``ready`` is
    set once the telemetry subscription is in place.
    """

    def __init__(
        self,
        settings: Settings,
        on_message: Callable[[mqtt.Client, Any, mqtt.MQTTMessage], None],
        stopping: threading.Event,
    ) -> None:
        self.settings = settings
        self.ready = threading.Event()
        self.protocol: MQTTProtocolVersion | None = None
        self.generation = 0
        self._on_message = on_message
        self._stopping = stopping
        self._client: mqtt.Client | None = None
        self._pending_subscribe: dict[int, str] = {}

    def connect(self) -> None:
        """Wait for the broker (backing off), then start the persistent session."""
        protocol = _await_protocol(self.settings, self._stopping)
        if protocol is None:
            return
        self.protocol = protocol
        if self._stopping.is_set():
            return
        # Callbacks and the connection request are in place before the network loop starts.
        client = new_client(self.settings, self.settings.mqtt_client_id, protocol)
        client.on_connect = self._on_connect
        client.on_disconnect = self._on_disconnect
        client.on_message = self._on_message
        client.on_subscribe = self._on_subscribe
        client.reconnect_delay_set(min_delay=1, max_delay=30)
        _request_session(client, self.settings, protocol)
        self._client = client
        client.loop_start()
        log.info(
            "ingester connecting to %s:%d as %r (MQTT %s)",
            self.settings.mqtt_host,
            self.settings.mqtt_port,
            self.settings.mqtt_client_id,
            "5" if protocol == mqtt.MQTTv5 else "3.1.1",
        )

    def acknowledge(self, mid: int, qos: int, generation: int) -> None:
        """Acknowledge one message to the broker, if it came in on the current connection."""
        client = self._client
        # A message from an earlier connection is redelivered by the broker anyway;
        # acknowledging it under a reused packet id could acknowledge the wrong one.
        if client is not None and qos > 0 and generation == self.generation:
            client.ack(mid, qos)

    def close(self) -> None:
        """Disconnect and stop paho's network thread."""
        client = self._client
        if client is not None:
            client.disconnect()
            client.loop_stop()
        self.ready.clear()

    def _on_connect(
        self, client: mqtt.Client, _userdata: Any, flags: Any, reason: ReasonCode, _props: Any
    ) -> None:
        if reason.is_failure:
            log.error("MQTT broker refused the connection: %s", reason)
            return
        self.generation += 1
        metrics.CONNECTED.set(1)
        session_present = bool(getattr(flags, "session_present", False))
        log.info("connected to MQTT broker (session present: %s)", session_present)
        # Subscribing again on a resumed session is harmless and covers a lost session.
        for topic in (self.settings.telemetry_filter, self.settings.status_filter):
            result, mid = client.subscribe(topic, qos=1)
            if result == mqtt.MQTT_ERR_SUCCESS and mid is not None:
                self._pending_subscribe[mid] = topic

    def _on_subscribe(
        self, _client: mqtt.Client, _userdata: Any, mid: int, reasons: list[ReasonCode], _p: Any
    ) -> None:
        topic = self._pending_subscribe.pop(mid, None)
        if any(code.is_failure for code in reasons):
            log.error("broker refused subscription %s: %s", topic, reasons)
            return
        if topic == self.settings.telemetry_filter:
            self.ready.set()

    def _on_disconnect(
        self, _client: mqtt.Client, _userdata: Any, _flags: Any, reason: ReasonCode, _p: Any
    ) -> None:
        metrics.CONNECTED.set(0)
        self.ready.clear()
        if not self._stopping.is_set():
            log.warning("MQTT connection lost (%s); reconnecting", reason)
