"""``python -m tecfleet.ingest.agent``: the agent alone, without the service's libraries."""

from __future__ import annotations

import argparse
import logging
import sys

from tecfleet.ingest.agent.command import add_agent_arguments, run_agent
from tecfleet.ingest.errors import TecfleetError


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="tecfleet-agent", description="tecfleet device agent")
    add_agent_arguments(parser)
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(message)s")
    try:
        return run_agent(args)
    except TecfleetError as exc:
        print(f"tecfleet agent: {exc}", file=sys.stderr)
        return 2


if __name__ == "__main__":
    sys.exit(main())
