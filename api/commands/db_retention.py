"""``tecfleet db retention``: make partitions ahead and apply the retention policy once."""

from __future__ import annotations

import argparse
from typing import Any


def run(args: argparse.Namespace) -> int:
    from tecfleet.api.storage_upkeep import describe, retention_policy
    from tecfleet.ingest.db import make_engine, migrate, now_ms
    from tecfleet.ingest.db.retention import apply_retention
    from tecfleet.ingest.settings import load_settings

    given = {
        "database_url": args.database_url,
        "config": args.config,
        "raw_retention_days": args.raw_retention_days,
    }
    settings = load_settings(given)
    engine = make_engine(settings.database_url)
    try:
        migrate(engine)
        report = apply_retention(engine, retention_policy(settings), now_ms())
    finally:
        engine.dispose()
    print(describe(report), flush=True)
    return 0


def add_parser(db_commands: Any) -> None:
    """Register ``retention`` under the ``db`` sub-commands."""
    parser = db_commands.add_parser(
        "retention",
        help="make partitions ahead, roll up and remove raw readings past the days kept",
    )
    parser.add_argument("--db", dest="database_url", default=None, help="(TECFLEET_DATABASE_URL)")
    parser.add_argument("--config", dest="config", default=None, help="(TECFLEET_CONFIG)")
    parser.add_argument(
        "--raw-retention-days",
        dest="raw_retention_days",
        default=None,
        help="days raw readings are kept (TECFLEET_RAW_RETENTION_DAYS; unset: for ever)",
    )
    parser.set_defaults(func=run)
