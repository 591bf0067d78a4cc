"""``tecfleet import --device-id ID FILE...``: load logged readings (see
:mod:`tecfleet.ingest.importer`), with a progress bar on standard error."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from tqdm import tqdm

#: Rejects listed line by line before the rest are only counted [lines].
_LISTED_REJECTS = 20


def add_parser(sub: Any, add_setting_flags: Any) -> None:
    parser = sub.add_parser(
        "import", help="load CSV or JSON-lines readings of one device, validated as over MQTT"
    )
    parser.add_argument("--device-id", required=True)
    parser.add_argument("files", nargs="+", type=Path, metavar="FILE")
    parser.add_argument("--quiet", action="store_true", help="no progress bar")
    add_setting_flags(parser, only=("--db", "--config", "--topic-prefix"))
    parser.set_defaults(func=run_import)


def run_import(args: argparse.Namespace) -> int:
    from tecfleet.ingest.db import make_engine, migrate
    from tecfleet.ingest.importer import import_file
    from tecfleet.ingest.payload import DEVICE_ID_RE
    from tecfleet.ingest.settings import load_settings

    if not DEVICE_ID_RE.match(args.device_id):
        raise ValueError(f"device id {args.device_id!r} must match [A-Za-z0-9_.-]{{1,64}}")
    flags = ("database_url", "config", "topic_prefix")
    settings = load_settings({name: getattr(args, name) for name in flags})
    engine = make_engine(settings.database_url)
    migrate(engine)
    refused = 0
    for path in args.files:
        size = path.stat().st_size if path.is_file() else 0
        with tqdm(total=size, unit="B", unit_scale=True, desc=path.name, disable=args.quiet) as bar:
            report = import_file(engine, settings, args.device_id, path, progress=bar.update)
        refused += len(report.rejects)
        print(
            f"{path}: {report.readings} readings valid, {report.stored} stored, "
            f"{report.duplicates} already stored, {len(report.rejects)} refused",
            flush=True,
        )
        for reject in report.rejects[:_LISTED_REJECTS]:
            print(f"  {reject.code}: {reject.reason}", file=sys.stderr)
        if len(report.rejects) > _LISTED_REJECTS:
            more = len(report.rejects) - _LISTED_REJECTS
            print(f"  ... and {more} more (GET /v1/rejects)", file=sys.stderr)
        if report.rejects_already_kept and report.rejects:
            print("  (these rejects were kept by an earlier import of this file)", file=sys.stderr)
    return 1 if refused else 0
