"""``tecfleet report (--device ID | --site NAME) --start DATE --end DATE --out FILE.pdf``."""

from __future__ import annotations

import argparse
import logging
import sys
from pathlib import Path
from typing import Any


def add_parser(sub: Any) -> None:
    """The ``report`` subcommand on the parser's subcommands ``sub``."""
    parser: argparse.ArgumentParser = sub.add_parser(
        "report", help="write the printable cold-chain report (PDF)"
    )
    which = parser.add_mutually_exclusive_group(required=True)
    which.add_argument("--device", help="one unit's id")
    which.add_argument("--site", help="every unit registered at this site")
    parser.add_argument("--start", required=True, help="first day, YYYY-MM-DD (UTC) or RFC 3339")
    parser.add_argument("--end", required=True, help="last day, included, or RFC 3339")
    parser.add_argument("--out", required=True, help="the PDF file to write")
    parser.add_argument("--db", dest="database_url", default=None, help="(TECFLEET_DATABASE_URL)")
    parser.add_argument("--config", dest="config", default=None, help="(TECFLEET_CONFIG)")
    parser.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    from tecfleet.api.report import write_report
    from tecfleet.ingest.db import make_engine, migrate
    from tecfleet.ingest.settings import load_settings

    # the PDF backend's font subsetting logs every glyph table at INFO
    logging.getLogger("fontTools").setLevel(logging.WARNING)
    settings = load_settings({"database_url": args.database_url, "config": args.config})
    engine = make_engine(settings.database_url)
    migrate(engine)
    out = Path(args.out)
    units = write_report(engine, out, args.start, args.end, device_id=args.device, site=args.site)
    print(f"wrote {out} ({units} unit{'s' if units != 1 else ''})", file=sys.stderr)
    return 0
