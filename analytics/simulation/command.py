"""The ``tecfleet simulate`` command: publish a simulated fleet over MQTT or write it to a file.

Modes (``--speed``):

* ``--speed 0`` (backfill): the ``--days`` before now, as fast as the broker takes them;
  ``--follow`` then goes on live.
* ``--speed 1`` (live): from now on, one reading per device per interval at the wall clock.
* ``--speed k`` (accelerated): replays ``--days`` k times faster than real time, starting in
  the past so that it catches up with the wall clock exactly at the end (timestamps never run
  ahead of the wall clock); ``--follow`` then goes on live.

Readings go out in batches of ``--batch`` while behind the wall clock (see
:mod:`tecfleet.analytics.simulation.publisher`).
"""

from __future__ import annotations

import argparse
import os
import sys
import threading
import time
from dataclasses import replace

from .fleets import random_fleet, with_sensor_set
from .model import Simulator
from .publisher import FileSink, MqttSink, Sink, publish_fleet
from .scenario import demo_fleet
from .specs import SENSOR_SETS, FleetSpec
from .truth import FleetTruth

__all__ = ["add_simulate_arguments", "run_simulate"]


def add_simulate_arguments(parser: argparse.ArgumentParser) -> None:
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
    parser.add_argument(
        "--interval-s", type=float, default=60.0, help="reporting interval of every unit [s]"
    )
    parser.add_argument(
        "--summaries",
        action="store_true",
        help="every reading also carries its interval's summaries (means, on share, extremes)",
    )
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
    parser.add_argument(
        "--sensors",
        choices=SENSOR_SETS,
        default="full",
        help="face probes of every unit: both, none on the cold side, or none on either face",
    )
    parser.add_argument("--client-id", default=None, help="MQTT client id of the publisher")


def run_simulate(args: argparse.Namespace) -> int:
    """Run ``tecfleet simulate`` with parsed options; returns the exit code."""
    now = time.time()
    days = float(args.days)
    speed = float(args.speed)
    window = _window(now, days, speed)
    if window is None:
        print("--speed must be 0 (backfill), 1 (live) or > 1 (accelerated)", file=sys.stderr)
        return 2
    start, end = window
    if args.follow:
        end = None
    spec = _fleet(args, now, start, days)
    sink: Sink
    try:
        sink = (
            FileSink(args.out, summaries=args.summaries)
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


def _window(now: float, days: float, speed: float) -> tuple[float, float | None] | None:
    """Simulated start and end [s since the epoch] of a mode; None for an invalid speed."""
    duration = days * 86_400.0
    if speed == 0:
        return now - duration, now
    if speed == 1:
        return now, now + duration
    if speed > 1:
        start = now - duration * (1.0 - 1.0 / speed)
        return start, start + duration
    return None


def _fleet(args: argparse.Namespace, now: float, start: float, days: float) -> FleetSpec:
    """The fleet the options ask for, starting at ``start``."""
    if args.scenario == "demo":
        spec, _reg = demo_fleet(
            args.seed, now_s=now, days_backfill=days, interval_s=args.interval_s
        )
        spec = replace(spec, start_s=start, summaries=args.summaries)
        return with_sensor_set(spec, args.sensors)
    spec = random_fleet(
        args.devices,
        seed=args.seed,
        start_s=start,
        days=days,
        interval_s=args.interval_s,
        faults=args.faults,
    )
    return with_sensor_set(replace(spec, summaries=args.summaries), args.sensors)
