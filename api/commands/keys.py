"""``tecfleet keys create|list|revoke``: API keys from the command line.

``create`` prints the new key alone on the first line of standard output (anything else goes
to standard error); the change is recorded in the audit trail as made by the command line.
"""

from __future__ import annotations

import argparse
import getpass
import sys
from collections.abc import Callable
from typing import Any


def _actor() -> str:
    """The actor the audit trail names for changes made on the command line."""
    try:
        return f"cli:{getpass.getuser()}"
    except (KeyError, OSError):
        return "cli"


def add_parser(sub: Any, add_setting_flags: Callable[[argparse.ArgumentParser], None]) -> None:
    """Add ``keys`` to the subcommands ``sub``; ``add_setting_flags`` adds --db and --config."""
    keys = sub.add_parser("keys", help="manage API keys").add_subparsers(dest="keys", required=True)
    create = keys.add_parser("create", help="create a key; prints it once on the first line")
    create.add_argument("--name", required=True)
    create.add_argument("--scope", required=True, choices=("read", "write", "admin"))
    create.add_argument(
        "--site", action="append", dest="sites", default=None, help="limit to a site (repeat)"
    )
    create.add_argument("--expires", default=None, help="RFC 3339 time the key stops working")
    add_setting_flags(create)
    create.set_defaults(func=cmd_create)
    listing = keys.add_parser("list", help="list keys (never their secrets)")
    add_setting_flags(listing)
    listing.set_defaults(func=cmd_list)
    revoke = keys.add_parser("revoke", help="revoke a key by its id")
    revoke.add_argument("key_id", type=int)
    add_setting_flags(revoke)
    revoke.set_defaults(func=cmd_revoke)


def _engine(args: argparse.Namespace) -> Any:
    from tecfleet.ingest.db import make_engine, migrate
    from tecfleet.ingest.settings import load_settings

    given = {"database_url": getattr(args, "database_url", None)}
    given["config"] = getattr(args, "config", None)
    engine = make_engine(load_settings(given).database_url)
    migrate(engine)
    return engine


def cmd_create(args: argparse.Namespace) -> int:
    from tecfleet.api.services import keys
    from tecfleet.api.timefmt import rfc3339_to_ms

    try:
        expires_ms = rfc3339_to_ms(args.expires) if args.expires else None
        made = keys.create(
            _engine(args), _actor(), args.name, args.scope, sites=args.sites, expires_ms=expires_ms
        )
    except ValueError as exc:
        print(f"tecfleet: {exc}", file=sys.stderr)
        return 2
    print(made.key, flush=True)
    print(
        f"created {args.scope} key {args.name!r} (id {made.id}); it is shown only once",
        file=sys.stderr,
    )
    return 0


def cmd_list(args: argparse.Namespace) -> int:
    from tecfleet.api.services import keys

    engine = _engine(args)
    cursor = None
    while True:
        items, cursor = keys.list_keys(engine, 500, cursor)
        for k in items:
            sites = ",".join(k.sites) if k.sites is not None else "*"
            state = "active" if k.active else ("revoked" if k.revoked_at else "expired")
            print(f"{k.id}\t{k.name}\t{k.scope}\t{sites}\t{state}\t{k.last_used_at or '-'}")
        if cursor is None:
            return 0


def cmd_revoke(args: argparse.Namespace) -> int:
    from tecfleet.api.services import keys
    from tecfleet.ingest.errors import NotFoundError

    try:
        keys.revoke(_engine(args), _actor(), args.key_id)
    except NotFoundError as exc:
        print(f"tecfleet: {exc}", file=sys.stderr)
        return 1
    print(f"revoked key {args.key_id}", file=sys.stderr)
    return 0
