"""MQTT ingester: the network callback validates and enqueues, one writer commits in batches.

The pattern is that of a logging queue listener: paho's network thread only parses a message and
puts it on a queue; a single writer thread takes messages off the queue, stores a batch in one
transaction (bounded by size and by time, whichever comes first) and only then acknowledges every
message of the batch to the broker, in the order received. A crash before the commit loses
nothing (the broker redelivers what was not acknowledged) and a redelivery stores nothing twice
(the insert is idempotent on device and timestamp).

Memory stays bounded while the database is down: the broker sends at most Receive Maximum
(MQTT 5) or its in-flight window (3.1.1) unacknowledged messages, and nothing is acknowledged
until it is committed.
"""

from __future__ import annotations

import logging
import queue
import ssl
import threading
import time
import uuid
from dataclasses import dataclass
from typing import Any

import paho.mqtt.client as mqtt
from paho.mqtt.enums import CallbackAPIVersion, MQTTProtocolVersion
from paho.mqtt.packettypes import PacketTypes
from paho.mqtt.properties import Properties
from paho.mqtt.reasoncodes import ReasonCode
from sqlalchemy.engine import Engine

from tecfleet.ingest import metrics
from tecfleet.ingest.db import store_batch
from tecfleet.ingest.errors import StoreError
from tecfleet.ingest.payload import Parsed, parse_message
from tecfleet.ingest.settings import Settings

log = logging.getLogger(__name__)

_STOP = object()
# Label lookups cost more than the increment; resolve them once.
_TELEMETRY_MESSAGES = metrics.MESSAGES.labels("telemetry")
_STATUS_MESSAGES = metrics.MESSAGES.labels("status")


@dataclass(slots=True)
class _Received:
    generation: int
    mid: int
    qos: int
    parsed: Parsed


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

    probe = _new_client(settings, f"tecfleet-probe-{uuid.uuid4().hex[:8]}", mqtt.MQTTv5)
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


def _new_client(settings: Settings, client_id: str, protocol: MQTTProtocolVersion) -> mqtt.Client:
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


class Ingester:
    """Subscribes to the telemetry of every device and stores it exactly once.

    ``start()`` returns at once; ``ready`` is set once the subscription is in place, so a reading
    published after that is not lost. ``stop()`` drains: what was received is committed and
    acknowledged before the connection closes.
    """

    def __init__(self, settings: Settings, engine: Engine) -> None:
        self.settings = settings
        self.engine = engine
        self.ready = threading.Event()
        self.protocol: MQTTProtocolVersion | None = None
        self._queue: queue.Queue[Any] = queue.Queue()
        self._generation = 0
        self._stopping = threading.Event()
        self._client: mqtt.Client | None = None
        self._writer = threading.Thread(
            target=self._write_loop, name="tecfleet-writer", daemon=True
        )
        self._connector = threading.Thread(
            target=self._connect_loop, name="tecfleet-mqtt", daemon=True
        )
        self._pending_subscribe: dict[int, str] = {}
        self.messages_received = 0
        self.max_queue_depth = 0

    # Life cycle ----------------------------------------------------------

    def start(self) -> None:
        self._writer.start()
        self._connector.start()

    def stop(self, timeout_s: float = 30.0) -> None:
        """Stop taking messages, commit and acknowledge what was received, disconnect."""
        self._stopping.set()
        self._queue.put(_STOP)
        self._writer.join(timeout_s)
        self._connector.join(timeout_s)
        client = self._client
        if client is not None:
            client.disconnect()
            client.loop_stop()
        self.ready.clear()
        metrics.CONNECTED.set(0)

    def backlog(self) -> int:
        """Messages received and not yet committed."""
        return self._queue.qsize()

    # Connection ----------------------------------------------------------

    def _connect_loop(self) -> None:
        delay = 0.5
        while not self._stopping.is_set():
            try:
                self.protocol = detect_protocol(self.settings)
                break
            except ConnectionError as exc:
                log.warning("MQTT broker not reachable (%s); retrying in %.1f s", exc, delay)
                self._stopping.wait(delay)
                delay = min(delay * 2, 30.0)
        if self._stopping.is_set() or self.protocol is None:
            return
        client = _new_client(self.settings, self.settings.mqtt_client_id, self.protocol)
        client.on_connect = self._on_connect
        client.on_disconnect = self._on_disconnect
        client.on_message = self._on_message
        client.on_subscribe = self._on_subscribe
        client.reconnect_delay_set(min_delay=1, max_delay=30)
        properties = None
        if self.protocol == mqtt.MQTTv5:
            properties = Properties(PacketTypes.CONNECT)  # type: ignore[no-untyped-call]
            properties.SessionExpiryInterval = self.settings.mqtt_session_expiry_s
            properties.ReceiveMaximum = self.settings.mqtt_receive_maximum
            client.connect_async(
                self.settings.mqtt_host,
                self.settings.mqtt_port,
                keepalive=30,
                clean_start=False,
                properties=properties,
            )
        else:
            client.connect_async(self.settings.mqtt_host, self.settings.mqtt_port, keepalive=30)
        self._client = client
        client.loop_start()
        log.info(
            "ingester connecting to %s:%d as %r (MQTT %s)",
            self.settings.mqtt_host,
            self.settings.mqtt_port,
            self.settings.mqtt_client_id,
            "5" if self.protocol == mqtt.MQTTv5 else "3.1.1",
        )

    def _on_connect(
        self, client: mqtt.Client, _userdata: Any, flags: Any, reason: ReasonCode, _props: Any
    ) -> None:
        if reason.is_failure:
            log.error("MQTT broker refused the connection: %s", reason)
            return
        self._generation += 1
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

    def _on_message(self, _client: mqtt.Client, _userdata: Any, message: mqtt.MQTTMessage) -> None:
        # Network thread: validate and enqueue only. Once stopping, leave messages
        # unacknowledged so the broker hands them over again next session.
        if self._stopping.is_set():
            return
        parsed = parse_message(
            message.topic,
            bytes(message.payload),
            prefix=self.settings.topic_prefix,
            now_s=time.time(),
            future_tolerance_s=self.settings.future_tolerance_s,
            max_payload_bytes=self.settings.max_payload_bytes,
        )
        (_STATUS_MESSAGES if parsed.status is not None else _TELEMETRY_MESSAGES).inc()
        self._queue.put(_Received(self._generation, message.mid, message.qos, parsed))
        metrics.QUEUE_DEPTH.inc()
        self.messages_received += 1
        self.max_queue_depth = max(self.max_queue_depth, self._queue.qsize())

    # Writer --------------------------------------------------------------

    def _write_loop(self) -> None:
        max_readings = self.settings.batch_max_readings
        max_wait = self.settings.batch_max_wait_s
        done = False
        while not done:
            first = self._queue.get()
            if first is _STOP:
                break
            batch: list[_Received] = [first]
            count = len(first.parsed.readings)
            deadline = time.monotonic() + max_wait
            while count < max_readings:
                remaining = deadline - time.monotonic()
                try:
                    item = (
                        self._queue.get(timeout=remaining)
                        if remaining > 0
                        else self._queue.get_nowait()
                    )
                except queue.Empty:
                    break
                if item is _STOP:
                    done = True
                    break
                batch.append(item)
                count += len(item.parsed.readings)
            self._commit(batch)
        # Drain whatever arrived before the stop marker was read.
        leftovers = []
        while True:
            try:
                item = self._queue.get_nowait()
            except queue.Empty:
                break
            if item is not _STOP:
                leftovers.append(item)
        if leftovers:
            self._commit(leftovers, give_up_after_s=10.0)

    def _commit(self, batch: list[_Received], give_up_after_s: float | None = None) -> None:
        readings = [r for item in batch for r in item.parsed.readings]
        rejects = [r for item in batch for r in item.parsed.rejects]
        statuses = [item.parsed.status for item in batch if item.parsed.status is not None]
        delay = 0.2
        started = time.monotonic()
        while True:
            try:
                with metrics.BATCH_SECONDS.time():
                    stored = store_batch(
                        self.engine,
                        readings,
                        rejects,
                        statuses,
                        payload_cap=self.settings.reject_payload_cap_bytes,
                    )
                break
            except StoreError as exc:
                metrics.STORE_FAILURES.inc()
                waited = time.monotonic() - started
                if self._stopping.is_set() and give_up_after_s is None:
                    give_up_after_s = 10.0
                if give_up_after_s is not None and waited > give_up_after_s:
                    # Not acknowledged: the broker hands these over again next session.
                    log.error("giving up on %d messages at shutdown: %s", len(batch), exc)
                    metrics.QUEUE_DEPTH.dec(len(batch))
                    return
                log.warning("database unavailable (%s); retrying in %.1f s", exc, delay)
                time.sleep(delay)
                delay = min(delay * 2, 10.0)
        metrics.READINGS_STORED.inc(stored)
        metrics.READINGS_DUPLICATE.inc(len(readings) - stored)
        for reject in rejects:
            metrics.REJECTS.labels(reject.code).inc()
        client = self._client
        for item in batch:
            # A message from an earlier connection is redelivered by the broker anyway;
            # acknowledging it under a reused packet id could acknowledge the wrong one.
            if client is not None and item.qos > 0 and item.generation == self._generation:
                client.ack(item.mid, item.qos)
        metrics.QUEUE_DEPTH.dec(len(batch))
