"""Where a simulated fleet's readings go: an MQTT broker as devices publish, or CSV /
JSON-lines files; and the paced publication of a fleet into one of them.

Timing: each output step ``t`` of the simulation may be published at wall time
``max(t, wall0 + (t - sim0) / speed)`` (``speed`` 0: no pacing), so a reading never leaves
before its own timestamp: the ingester refuses readings more than 5 minutes ahead of its
clock.

While behind the wall clock, readings go out in batches (JSON arrays of ``batch`` readings
per device); once caught up, every reading goes out at once (batch of one, a single JSON
object). MQTT: QoS 1 on ``<prefix>/<device_id>/telemetry``; retained ``online`` /
``offline`` on ``<prefix>/<device_id>/status`` as devices come and go (one publisher
connection cannot carry a last will per device, so none is set).
"""

from __future__ import annotations

import csv
import math
import threading
import time
import uuid
from collections import deque
from collections.abc import Callable
from typing import IO, Any, cast
from urllib.parse import SplitResult, unquote, urlsplit

import orjson

from .chunk import Chunk
from .model import Simulator
from .specs import CHANNELS, FleetSpec

__all__ = ["FileSink", "MqttSink", "Sink", "encode", "publish_fleet"]


def encode(readings: list[dict[str, Any]]) -> bytes:
    """A payload: one JSON object for a single reading, a JSON array for a batch."""
    if len(readings) == 1:
        return orjson.dumps(readings[0])
    return orjson.dumps(readings)


class Sink:
    """Where readings go."""

    def send(self, device_id: str, readings: list[dict[str, Any]]) -> None:
        raise NotImplementedError

    def status(self, device_id: str, online: bool) -> None:
        pass

    def close(self) -> None:
        pass


class MqttSink(Sink):
    """One paho-mqtt 2.x connection publishing for every simulated device (QoS 1).

    At most ``max_pending`` messages wait for their PUBACK; past that, ``send`` blocks, so a
    slow broker slows the simulator instead of filling memory. ``before_send``, when given, is
    called before every message and may block: a consumer in the same process uses it to hold
    the publisher back end to end (a broker without flow control drops what its subscriber
    does not acknowledge in time).
    """

    def __init__(
        self,
        url: str,
        prefix: str,
        *,
        client_id: str | None = None,
        max_pending: int = 200,
        connect_timeout_s: float = 15.0,
        before_send: Callable[[], None] | None = None,
    ) -> None:
        parts = urlsplit(url)
        if parts.scheme not in ("mqtt", "mqtts", "tcp", "ssl"):
            raise ValueError(f"MQTT URL must start with mqtt:// or mqtts://, got {url!r}")
        self.prefix = prefix
        self.max_pending = max_pending
        self.before_send = before_send
        self.sent = 0
        self.bytes = 0
        cid = client_id or f"tecfleet-sim-{uuid.uuid4().hex[:8]}"
        self.client = _client(parts, cid, max_pending)
        self._connect(url, parts, connect_timeout_s)
        self._pending: deque[Any] = deque()

    def _connect(self, url: str, parts: SplitResult, timeout_s: float) -> None:
        tls = parts.scheme in ("mqtts", "ssl")
        connected = threading.Event()
        self._error: str | None = None

        def on_connect(_c: Any, _u: Any, _f: Any, reason: Any, _p: Any) -> None:
            if reason.is_failure:
                self._error = str(reason)
            connected.set()

        self.client.on_connect = on_connect
        self.client.connect(parts.hostname or "127.0.0.1", parts.port or (8883 if tls else 1883))
        self.client.loop_start()
        if not connected.wait(timeout_s) or self._error:
            self.client.loop_stop()
            raise ConnectionError(f"MQTT broker {url} refused or did not answer: {self._error}")

    def _throttle(self, limit: int) -> None:
        while self._pending and (len(self._pending) > limit or self._pending[0].is_published()):
            info = self._pending.popleft()
            if not info.is_published():
                info.wait_for_publish(timeout=60.0)
                if not info.is_published():
                    raise TimeoutError("MQTT broker did not acknowledge a QoS 1 message in 60 s")

    def send(self, device_id: str, readings: list[dict[str, Any]]) -> None:
        if self.before_send is not None:
            self.before_send()
        payload = encode(readings)
        info = self.client.publish(f"{self.prefix}/{device_id}/telemetry", payload, qos=1)
        self._pending.append(info)
        self.sent += 1
        self.bytes += len(payload)
        self._throttle(self.max_pending)

    def status(self, device_id: str, online: bool) -> None:
        payload = b"online" if online else b"offline"
        info = self.client.publish(f"{self.prefix}/{device_id}/status", payload, qos=1, retain=True)
        self._pending.append(info)

    def flush(self) -> None:
        self._throttle(0)

    def close(self) -> None:
        try:
            self.flush()
        finally:
            self.client.disconnect()
            self.client.loop_stop()


def _client(parts: SplitResult, client_id: str, max_pending: int) -> Any:
    """A paho client for the broker at ``parts`` (credentials and TLS from the URL)."""
    import paho.mqtt.client as mqtt
    from paho.mqtt.enums import CallbackAPIVersion

    # MQTT 3.1.1: understood by every broker, the demo's embedded one included.
    client = mqtt.Client(
        callback_api_version=CallbackAPIVersion.VERSION2,
        client_id=client_id,
        protocol=mqtt.MQTTv311,
        clean_session=True,
    )
    if parts.username is not None:
        password = unquote(parts.password) if parts.password is not None else None
        client.username_pw_set(unquote(parts.username), password)
    if parts.scheme in ("mqtts", "ssl"):
        client.tls_set()
    client.max_inflight_messages_set(max(20, min(max_pending, 100)))
    client.max_queued_messages_set(0)
    return client


_CSV_FIELDS = ["device_id", "ts", "seq", *CHANNELS, "door_open"]
#: Columns a fleet that reports interval summaries adds (the payload's names), written out:
#: the agent imports this module and must not load the database tables.
_SUMMARY_FIELDS = [
    "interval_s",
    "t_cabinet_mean",
    "t_cold_mean",
    "t_hot_mean",
    "t_ambient_mean",
    "current_mean",
    "current_sq_mean",
    "power_mean",
    "on_share",
    "t_cabinet_min",
    "t_cabinet_max",
]


class FileSink(Sink):
    """CSV (``.csv``) or JSON lines (anything else): one reading per row, with its device;
    ``summaries`` adds the interval summaries' columns to the CSV."""

    def __init__(self, path: str, summaries: bool = False) -> None:
        self.path = path
        self.fields = _CSV_FIELDS + (_SUMMARY_FIELDS if summaries else [])
        self.csv = path.lower().endswith(".csv")
        self.fh: IO[Any]
        if self.csv:
            self.fh = open(path, "w", newline="", encoding="utf-8")  # noqa: SIM115 - closed in close()
        else:
            self.fh = open(path, "wb")  # noqa: SIM115 - closed in close()
        self.sent = 0
        self.bytes = 0
        if self.csv:
            self.writer = csv.writer(cast(IO[str], self.fh))
            self.writer.writerow(self.fields)

    def send(self, device_id: str, readings: list[dict[str, Any]]) -> None:
        self.sent += len(readings)
        if self.csv:
            # A channel the unit lacks (a face probe) is an empty cell.
            self.writer.writerows(
                [device_id, *(r.get(k, "") for k in self.fields[1:])] for r in readings
            )
        else:
            head = b'{"device_id":' + orjson.dumps(device_id) + b","
            data = b"".join(head + orjson.dumps(r)[1:] + b"\n" for r in readings)
            self.bytes += len(data)
            self.fh.write(data)

    def close(self) -> None:
        self.fh.close()


class _Outbox:
    """Per-device buffers and online state of one publication into ``sink``."""

    def __init__(self, sim: Simulator, sink: Sink, batch: int) -> None:
        self.sim = sim
        self.sink = sink
        self.batch = batch
        self.buffers: list[list[dict[str, Any]]] = [[] for _ in range(sim.n)]
        self.online = [False] * sim.n

    def flush_all(self) -> None:
        for i in range(self.sim.n):
            if self.buffers[i]:
                self.sink.send(self.sim.ids[i], self.buffers[i])
                self.buffers[i] = []

    def deliver(self, chunk: Chunk, rows: list[list[dict[str, Any] | None]]) -> None:
        """Queue the readings ``rows`` of ``chunk``, sending full batches and status changes."""
        sim, sink, k = self.sim, self.sink, chunk.n_steps
        present = chunk.present
        t_end = chunk.t[-1:]
        for i in range(sim.n):
            dark = any(f.factor(t_end)[0] > 0 for j, f in sim.faults.get("offline", []) if j == i)
            if not self.online[i] and not dark and present[:, i].any():
                self.online[i] = True
                sink.status(sim.ids[i], True)
            buf = self.buffers[i]
            for j in range(k):
                reading = rows[j][i]
                if reading is not None:
                    buf.append(reading)
                    if len(buf) >= self.batch:
                        sink.send(sim.ids[i], buf)
                        buf = self.buffers[i] = []
            if self.online[i] and dark:
                self.online[i] = False
                if buf:
                    sink.send(sim.ids[i], buf)
                    self.buffers[i] = []
                sink.status(sim.ids[i], False)


def publish_fleet(
    spec: FleetSpec,
    sink: Sink,
    *,
    end_s: float | None,
    speed: float = 0.0,
    batch: int = 1,
    stop: threading.Event | None = None,
    on_caught_up: Callable[[], None] | None = None,
    clock: Callable[[], float] = time.time,
    max_chunk: int = 1440,
    simulator: Simulator | None = None,
) -> Simulator:
    """Simulate ``spec`` from its start to ``end_s`` (None: until ``stop``) into ``sink``.

    Paced as described in the module docstring; batches of ``batch`` readings per device
    while behind the wall clock, single readings once caught up. ``on_caught_up`` is called
    once, the first time the simulation reaches the wall clock (or ``end_s``). Returns the
    simulator (its ``truth`` holds what happened).
    """
    sim = simulator or Simulator(spec)
    stop = stop or threading.Event()
    interval = spec.interval_s
    wall0, sim0 = clock(), spec.start_s
    outbox = _Outbox(sim, sink, max(1, int(batch)))
    caught_up = False

    def due(t: float) -> float:
        return max(t, wall0 + (t - sim0) / speed) if speed > 0 else t

    def mark_caught_up() -> None:
        nonlocal caught_up
        if not caught_up:
            caught_up = True
            if hasattr(sink, "flush"):
                sink.flush()
            if on_caught_up is not None:
                on_caught_up()

    while not stop.is_set():
        t_next = sim.t_next
        if end_s is not None and t_next >= end_s:
            break
        now = clock()
        wait = due(t_next) - now
        if wait > 0:
            outbox.flush_all()
            mark_caught_up()
            stop.wait(min(wait, 1.0))
            continue
        # every step already due goes in one chunk
        if speed > 0:
            behind = (now - wall0) * speed + sim0 - t_next
            k = int(min(now - t_next, behind) // interval) + 1
        else:
            k = int((now - t_next) // interval) + 1
        k = max(1, min(k, max_chunk))
        if end_s is not None:
            k = max(1, min(k, math.ceil((end_s - t_next) / interval)))
        chunk = sim.run(k)
        rows = chunk.payload_rows()
        live = k == 1 and due(sim.t_next) > clock()
        outbox.deliver(chunk, rows)
        if live:
            outbox.flush_all()
    outbox.flush_all()
    mark_caught_up()
    return sim
