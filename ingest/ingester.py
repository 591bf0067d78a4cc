"""MQTT ingester: the network callback validates and hands over, one writer commits in batches.

Paho's network thread only parses a message and puts it in the writer's inbox; a single writer
thread takes a batch at a time (bounded by size and by time, whichever comes first), stores it in
one transaction and only then acknowledges every message of the batch to the broker, in the
order received. A crash before the commit loses nothing (the broker redelivers what was not
acknowledged) and a redelivery stores nothing twice (the insert is idempotent on device and
timestamp).

Memory stays bounded while the database is down: the broker sends at most Receive Maximum
(MQTT 5) or its in-flight window (3.1.1) unacknowledged messages, and nothing is acknowledged
until it is committed.

The parts: :class:`.mqtt_session.MqttSession` (connection, subscriptions, acknowledgements),
:class:`.batch_writer.BatchWriter` (the writer thread), and here the callback between them and
the life cycle of the whole.
"""

from __future__ import annotations

import threading
import time
from typing import Any

import paho.mqtt.client as mqtt
from paho.mqtt.enums import MQTTProtocolVersion
from sqlalchemy.engine import Engine

from tecfleet.ingest import metrics
from tecfleet.ingest.batch_writer import BatchWriter, Inbox, Received
from tecfleet.ingest.mqtt_session import MqttSession
from tecfleet.ingest.payload import parse_message
from tecfleet.ingest.settings import Settings


class Ingester:
    """Subscribes to the telemetry of every device and stores it exactly once.

    ``start()`` returns at once; ``ready`` is set once the subscription is in place, so a reading
    published after that is not lost. ``stop()`` drains: what was received is committed and
    acknowledged before the connection closes.
    """

    def __init__(self, settings: Settings, engine: Engine) -> None:
        self.settings = settings
        self.engine = engine
        self._inbox = Inbox(
            settings.batch_max_readings, settings.batch_max_wait_s, settings.mqtt_receive_maximum
        )
        self._stopping = threading.Event()
        self._session = MqttSession(settings, self._on_message, self._stopping)
        self._batches = BatchWriter(settings, engine, self._inbox, self._stopping, self._ack)
        self._writer = threading.Thread(
            target=self._batches.run, name="tecfleet-writer", daemon=True
        )
        self._connector = threading.Thread(
            target=self._session.connect, name="tecfleet-mqtt", daemon=True
        )
        self.messages_received = 0

    @property
    def ready(self) -> threading.Event:
        """Set while the telemetry subscription is in place."""
        return self._session.ready

    @property
    def protocol(self) -> MQTTProtocolVersion | None:
        """MQTT version spoken with the broker, once known."""
        return self._session.protocol

    def start(self) -> None:
        self._writer.start()
        self._connector.start()

    def stop(self, timeout_s: float = 30.0) -> None:
        """Stop taking messages, commit and acknowledge what was received, disconnect."""
        self._stopping.set()
        self._batches.finish()
        self._writer.join(timeout_s)
        self._connector.join(timeout_s)
        self._session.close()
        metrics.CONNECTED.set(0)

    @property
    def max_queue_depth(self) -> int:
        """Most messages ever waiting for the writer at once."""
        return self._inbox.max_depth

    def backlog(self) -> int:
        """Messages received and waiting for the writer."""
        return len(self._inbox)

    def _on_message(self, _client: mqtt.Client, _userdata: Any, message: mqtt.MQTTMessage) -> None:
        # Network thread: validate and enqueue only. Once stopping, leave messages
        # unacknowledged so the broker hands them over again next session.
        if self._stopping.is_set():
            return
        settings = self.settings
        parsed = parse_message(
            message.topic,
            bytes(message.payload),
            prefix=settings.topic_prefix,
            now_s=time.time(),
            future_tolerance_s=settings.future_tolerance_s,
            max_payload_bytes=settings.max_payload_bytes,
        )
        self._inbox.put(Received(self._session.generation, message.mid, message.qos, parsed))
        self.messages_received += 1

    def _ack(self, item: Received) -> None:
        # Called by the writer once the item's batch is committed.
        self._session.acknowledge(item.mid, item.qos, item.generation)
