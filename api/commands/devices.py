"""``tecfleet devices provision|revoke DEVICE_ID``: a device's broker account and agent config.

``provision`` makes a password, puts the device's hashed password line and ACL block into the
broker's files (or prints them when the files are not named), registers the device, and writes
a ready agent configuration (readable by its owner only: it holds the password). ``revoke``
takes the password line and the ACL block out again; the registration and the stored readings
stay. mosquitto reads its files again on SIGHUP (``systemctl reload mosquitto``).
"""

from __future__ import annotations

import argparse
import json
import os
import socket
import sys
from pathlib import Path
from typing import Any

from tecfleet.api import broker_accounts as accounts

_RELOAD = "reload the broker to apply: systemctl reload mosquitto (or kill -HUP its pid)"


def add_parser(sub: Any, add_setting_flags: Any) -> None:
    devices = sub.add_parser("devices", help="enrol and revoke devices on the broker")
    commands = devices.add_subparsers(dest="devices", required=True)
    provision = commands.add_parser("provision", help="broker account, ACL and agent config")
    revoke = commands.add_parser("revoke", help="remove a device's broker account and ACL")
    for parser in (provision, revoke):
        parser.add_argument("device_id", metavar="DEVICE_ID")
        parser.add_argument("--password-file", type=Path, help="mosquitto password_file")
        parser.add_argument("--acl-file", type=Path, help="mosquitto acl_file")
    provision.add_argument("--service-user", default="tecfleet", help="the service's account")
    provision.add_argument(
        "--broker-url", help="URL the device reaches the broker at (mqtts://HOST:8883)"
    )
    provision.add_argument(
        "--ca-file",
        default="/etc/tecfleet-agent/ca.crt",
        help="where the broker's CA certificate will be on the device",
    )
    provision.add_argument("--agent-config", type=Path, help="file to write (DEVICE_ID.toml)")
    provision.add_argument("--no-register", action="store_true", help="leave the database alone")
    add_setting_flags(provision, only=("--db", "--config", "--topic-prefix"))
    add_setting_flags(revoke, only=("--topic-prefix",))
    provision.set_defaults(func=run_provision)
    revoke.set_defaults(func=run_revoke)


def run_provision(args: argparse.Namespace) -> int:
    from tecfleet.ingest.payload import DEVICE_ID_RE

    device_id: str = args.device_id
    if not DEVICE_ID_RE.match(device_id) or device_id == args.service_user:
        raise ValueError(f"device id {device_id!r} must match [A-Za-z0-9_.-]{{1,64}}")
    prefix = args.topic_prefix or "tecfleet"
    password = accounts.new_password()
    line = accounts.hashed_line(device_id, password)
    if args.password_file is not None:
        accounts.set_password_line(args.password_file, line)
    else:
        print(f"# password_file line\n{line}")
    if args.acl_file is not None:
        accounts.set_acl_block(args.acl_file, device_id, prefix, args.service_user)
    else:
        print("# acl_file block\n" + "\n".join(accounts.device_block(device_id, prefix)))
    if not args.no_register:
        _register(args, device_id)
    target = args.agent_config or Path(f"{device_id}.toml")
    broker_url = args.broker_url or f"mqtts://{socket.getfqdn()}:8883"
    _write_agent_config(target, device_id, password, broker_url, args.ca_file, prefix)
    done = f"provisioned {device_id}: agent config in {target} (holds the password)"
    print(done, file=sys.stderr)
    if args.password_file is not None or args.acl_file is not None:
        print(_RELOAD, file=sys.stderr)
    return 0


def run_revoke(args: argparse.Namespace) -> int:
    found = []
    if args.password_file is not None and accounts.drop_password(
        args.password_file, args.device_id
    ):
        found.append("password")
    if args.acl_file is not None and accounts.drop_acl_block(args.acl_file, args.device_id):
        found.append("ACL block")
    if args.password_file is None and args.acl_file is None:
        raise ValueError("name --password-file and/or --acl-file to revoke from")
    what = " and ".join(found) or "nothing (no entries found)"
    print(f"revoked {args.device_id}: removed {what}; {_RELOAD}", file=sys.stderr)
    return 0 if found else 1


def _register(args: argparse.Namespace, device_id: str) -> None:
    from tecfleet.api.schemas import DeviceIn
    from tecfleet.api.services.devices import register_device
    from tecfleet.ingest.db import make_engine, migrate
    from tecfleet.ingest.settings import load_settings

    flags = ("database_url", "config", "topic_prefix")
    settings = load_settings({name: getattr(args, name) for name in flags})
    engine = make_engine(settings.database_url)
    migrate(engine)
    register_device(engine, device_id, DeviceIn.model_validate({}))


def _write_agent_config(
    path: Path, device_id: str, password: str, broker_url: str, ca_file: str, prefix: str
) -> None:
    # JSON strings are valid TOML basic strings (the same escapes).
    text = (
        "# tecfleet agent configuration: tecfleet agent --config THIS_FILE\n"
        f"device_id = {json.dumps(device_id)}\n"
        f"mqtt_url = {json.dumps(broker_url)}\n"
        f"topic_prefix = {json.dumps(prefix)}\n"
        f"username = {json.dumps(device_id)}\n"
        f"password = {json.dumps(password)}\n"
        f"ca_file = {json.dumps(ca_file)}\n"
        'buffer = "/var/lib/tecfleet-agent/buffer.sqlite"\n\n'
        "# Where readings come from; see ingest/PAYLOAD.md for every kind of source.\n"
        '[[sources]]\nkind = "csv"\npath = "/var/log/cooler/readings.csv"\n'
    )
    path.parent.mkdir(parents=True, exist_ok=True)
    handle = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(handle, "w") as out:
        out.write(text)
