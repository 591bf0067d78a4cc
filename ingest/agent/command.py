"""The agent's command line, shared by ``tecfleet agent`` and ``python -m tecfleet.ingest.agent``.

The second form loads nothing but the agent, paho and the standard library: the lightest start
on a small controller.
"""

from __future__ import annotations

import argparse
import signal
import threading
from pathlib import Path
from types import FrameType

from tecfleet.ingest.agent.config import config_from_flags, load_config, with_report_flags
from tecfleet.ingest.agent.runner import Agent
from tecfleet.ingest.errors import SettingsError


def add_agent_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``tecfleet agent``."""
    parser.add_argument("--config", type=Path, help="TOML file with everything (see PAYLOAD.md)")
    parser.add_argument("--device-id", help="this cooler's id, [A-Za-z0-9_.-]{1,64}")
    parser.add_argument("--mqtt-url", help="mqtt://[user:password@]host[:port] or mqtts://...")
    parser.add_argument("--buffer", help="SQLite file where readings wait until acknowledged")
    parser.add_argument(
        "--source",
        action="append",
        default=[],
        help="csv:PATH or jsonl:PATH, a file that grows (repeatable)",
    )
    parser.add_argument("--topic-prefix", default="tecfleet")
    parser.add_argument(
        "--report-every",
        type=float,
        metavar="SECONDS",
        help="send one reading per interval of SECONDS with its summaries "
        "(the [report] table's every_s; overrides it)",
    )
    parser.add_argument(
        "--instants-only",
        action="store_true",
        help="with --report-every: send the instant values at each interval's end, no summaries",
    )


def run_agent(args: argparse.Namespace) -> int:
    """Run until SIGTERM or Ctrl-C, then stop cleanly."""
    if args.config is not None:
        config = load_config(args.config)
    else:
        missing = [
            flag
            for flag, value in (
                ("--device-id", args.device_id),
                ("--mqtt-url", args.mqtt_url),
                ("--buffer", args.buffer),
                ("--source", args.source),
            )
            if not value
        ]
        if missing:
            raise SettingsError(f"give --config FILE, or {' '.join(missing)}")
        config = config_from_flags(
            args.device_id, args.mqtt_url, args.buffer, args.source, args.topic_prefix
        )
    config = with_report_flags(config, args.report_every, args.instants_only)
    stop = threading.Event()

    def on_signal(_number: int, _frame: FrameType | None) -> None:
        stop.set()

    signal.signal(signal.SIGTERM, on_signal)
    signal.signal(signal.SIGINT, on_signal)
    Agent(config).run(stop)
    return 0
