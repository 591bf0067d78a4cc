"""Output of the fleet simulator: MQTT as devices publish, or CSV / JSON-lines files.

Timing: each output step ``t`` of the simulation may be published at wall time
``max(t, wall0 + (t - sim0) / speed)`` (``speed`` 0: no pacing), so a reading never leaves
before its own timestamp: the ingester refuses readings more than 5 minutes ahead of its
clock. Modes of ``tecfleet simulate``:

* ``--speed 0`` (backfill): the ``--days`` before now, as fast as the broker takes them;
  ``--follow`` then goes on live.
* ``--speed 1`` (live): from now on, one reading per device per interval at the wall clock.
* ``--speed k`` (accelerated): replays ``--days`` k times faster than real time, starting in
  the past so that it catches up with the wall clock exactly at the end (timestamps never run
  ahead of the wall clock); ``--follow`` then goes on live.

While behind the wall clock, readings go out in batches (JSON arrays of ``--batch``
readings per device); once caught up, every reading goes out at once (batch of one, a single
JSON object). MQTT: QoS 1 on ``<prefix>/<device_id>/telemetry``; retained ``online`` /
``offline`` on ``<prefix>/<device_id>/status`` as devices come and go (one publisher
connection cannot carry a last will per device, so none is set).
"""

from __future__ import annotations

import argparse
import csv
import logging
import math
import os
import sys
import threading
import time
import uuid
from collections import deque
from collections.abc import Callable
from typing import IO, Any, cast
from urllib.parse import unquote, urlsplit

import orjson

from .simulator import CHANNELS, FleetSpec, FleetTruth, Simulator, random_fleet

log = logging.getLogger(__name__)

__all__ = [
    "FileSink",
    "MqttSink",
    "Sink",
    "add_arguments",
    "encode",
    "publish_fleet",
    "run",
]


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
        import paho.mqtt.client as mqtt
        from paho.mqtt.enums import CallbackAPIVersion

        parts = urlsplit(url)
        if parts.scheme not in ("mqtt", "mqtts", "tcp", "ssl"):
            raise ValueError(f"MQTT URL must start with mqtt:// or mqtts://, got {url!r}")
        tls = parts.scheme in ("mqtts", "ssl")
        self.prefix = prefix
        self.max_pending = max_pending
        self.before_send = before_send
        self.sent = 0
        self.bytes = 0
        cid = client_id or f"tecfleet-sim-{uuid.uuid4().hex[:8]}"
        # MQTT 3.1.1: understood by every broker, the demo's embedded one included.
        self.client = mqtt.Client(
            callback_api_version=CallbackAPIVersion.VERSION2,
            client_id=cid,
            protocol=mqtt.MQTTv311,
            clean_session=True,
        )
        if parts.username is not None:
            password = unquote(parts.password) if parts.password is not None else None
            self.client.username_pw_set(unquote(parts.username), password)
        if tls:
            self.client.tls_set()
        self.client.max_inflight_messages_set(max(20, min(max_pending, 100)))
        self.client.max_queued_messages_set(0)
        connected = threading.Event()
        self._error: str | None = None

        def on_connect(_c: Any, _u: Any, _f: Any, reason: Any, _p: Any) -> None:
            if reason.is_failure:
                self._error = str(reason)
            connected.set()

        self.client.on_connect = on_connect
        self.client.connect(parts.hostname or "127.0.0.1", parts.port or (8883 if tls else 1883))
        self.client.loop_start()
        if not connected.wait(connect_timeout_s) or self._error:
            self.client.loop_stop()
            raise ConnectionError(f"MQTT broker {url} refused or did not answer: {self._error}")
        self._pending: deque[Any] = deque()

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


_CSV_FIELDS = ["device_id", "ts", "seq", *CHANNELS, "door_open"]


class FileSink(Sink):
    """CSV (``.csv``) or JSON lines (anything else): one reading per row, with its device."""

    def __init__(self, path: str) -> None:
        self.path = path
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
            self.writer.writerow(_CSV_FIELDS)

    def send(self, device_id: str, readings: list[dict[str, Any]]) -> None:
        self.sent += len(readings)
        if self.csv:
            self.writer.writerows([device_id, *(r[k] for k in _CSV_FIELDS[1:])] for r in readings)
        else:
            head = b'{"device_id":' + orjson.dumps(device_id) + b","
            data = b"".join(head + orjson.dumps(r)[1:] + b"\n" for r in readings)
            self.bytes += len(data)
            self.fh.write(data)

    def close(self) -> None:
        self.fh.close()


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
    n = sim.n
    buffers: list[list[dict[str, Any]]] = [[] for _ in range(n)]
    online = [False] * n
    caught_up = False
    batch = max(1, int(batch))

    def due(t: float) -> float:
        return max(t, wall0 + (t - sim0) / speed) if speed > 0 else t

    def flush_all() -> None:
        for i in range(n):
            if buffers[i]:
                sink.send(sim.ids[i], buffers[i])
                buffers[i] = []

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
            flush_all()
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
        present = chunk.present
        t_end = chunk.t[-1:]
        for i in range(n):
            dark = any(f.factor(t_end)[0] > 0 for j, f in sim.faults.get("offline", []) if j == i)
            if not online[i] and not dark and present[:, i].any():
                online[i] = True
                sink.status(sim.ids[i], True)
            buf = buffers[i]
            for j in range(k):
                reading = rows[j][i]
                if reading is not None:
                    buf.append(reading)
                    if len(buf) >= batch:
                        sink.send(sim.ids[i], buf)
                        buf = buffers[i] = []
            if online[i] and dark:
                online[i] = False
                if buf:
                    sink.send(sim.ids[i], buf)
                    buffers[i] = []
                sink.status(sim.ids[i], False)
        if live:
            flush_all()
    flush_all()
    mark_caught_up()
    return sim


# ---------------------------------------------------------------------------
# CLI
# ---------------------------------------------------------------------------


def add_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``tecfleet simulate``."""
    parser.add_argument(
        "--mqtt",
        default=os.environ.get("TECFLEET_MQTT_URL", "mqtt://127.0.0.1:1883"),
        help="broker URL (default mqtt://127.0.0.1:1883)",
    )
    parser.add_argument(
        "--topic-prefix", default=os.environ.get("TECFLEET_TOPIC_PREFIX", "tecfleet")
    )
    parser.add_argument("--devices", type=int, default=10, help="number of coolers")
    parser.add_argument("--days", type=float, default=1.0, help="simulated days")
    parser.add_argument("--interval-s", type=float, default=60.0, help="sample interval [s]")
    parser.add_argument(
        "--speed",
        type=float,
        default=0.0,
        help="1 live, k accelerated (ends at now), 0 backfill as fast as possible",
    )
    parser.add_argument(
        "--follow",
        action="store_true",
        help="after reaching now, go on publishing live until interrupted",
    )
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument(
        "--faults",
        default="none",
        help='fault mix, e.g. "wear:2,leak:1,fan:1,sensor:1,offline:1" or "none"',
    )
    parser.add_argument("--batch", type=int, default=240, help="readings per message while behind")
    parser.add_argument("--out", default=None, help="write .csv or .jsonl instead of MQTT")
    parser.add_argument("--truth", default=None, help="write the ground truth JSON here")
    parser.add_argument("--scenario", choices=("random", "demo"), default="random")
    parser.add_argument("--client-id", default=None, help="MQTT client id of the publisher")


def run(args: argparse.Namespace) -> int:
    """``tecfleet simulate``: returns the exit code."""
    now = time.time()
    days = float(args.days)
    speed = float(args.speed)
    duration = days * 86_400.0
    end: float | None
    if speed == 0:
        start, end = now - duration, now
    elif speed == 1:
        start, end = now, now + duration
    elif speed > 1:
        start = now - duration * (1.0 - 1.0 / speed)
        end = start + duration
    else:
        print("--speed must be 0 (backfill), 1 (live) or > 1 (accelerated)", file=sys.stderr)
        return 2
    if args.follow:
        end = None
    if args.scenario == "demo":
        from .scenario import demo_fleet

        spec, _reg = demo_fleet(
            args.seed, now_s=now, days_backfill=days, interval_s=args.interval_s
        )
        spec = _restart(spec, start)
    else:
        spec = random_fleet(
            args.devices,
            seed=args.seed,
            start_s=start,
            days=days,
            interval_s=args.interval_s,
            faults=args.faults,
        )
    sink: Sink
    try:
        sink = (
            FileSink(args.out)
            if args.out
            else MqttSink(args.mqtt, args.topic_prefix, client_id=args.client_id)
        )
    except (OSError, ConnectionError, ValueError) as exc:
        print(f"simulate: {exc}", file=sys.stderr)
        return 1
    if args.out:
        speed, end = 0.0, (end if end is not None else now)
    stop = threading.Event()
    t0 = time.perf_counter()
    sim: Simulator | None = None
    try:
        sim = publish_fleet(spec, sink, end_s=end, speed=speed, batch=args.batch, stop=stop)
    except KeyboardInterrupt:
        stop.set()
    finally:
        sink.close()
    elapsed = time.perf_counter() - t0
    truth: FleetTruth | None = sim.truth if sim is not None else None
    if args.truth and truth is not None and sim is not None:
        truth.write_json(args.truth, end_s=sim.t_next)
    steps = sim.step_index if sim is not None else 0
    print(
        f"simulate: {len(spec.devices)} devices, {steps} steps, {getattr(sink, 'sent', 0)} "
        f"{'rows' if args.out else 'messages'} in {elapsed:.1f} s",
        file=sys.stderr,
    )
    return 0


def _restart(spec: FleetSpec, start_s: float) -> FleetSpec:
    from dataclasses import replace

    return replace(spec, start_s=start_s)
