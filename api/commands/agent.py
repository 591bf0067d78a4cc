"""``tecfleet agent``: the device agent (see :mod:`tecfleet.ingest.agent`)."""

from __future__ import annotations

from typing import Any

from tecfleet.ingest.agent.command import add_agent_arguments, run_agent


def add_parser(sub: Any) -> None:
    parser = sub.add_parser("agent", help="run the device agent on a cooler's controller")
    add_agent_arguments(parser)
    parser.set_defaults(func=run_agent)
