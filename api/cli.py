"""The ``tecfleet`` command: demo, serve, keys, db, analyze, simulate."""

from __future__ import annotations

import argparse
import logging
import sys
import threading
from pathlib import Path
from typing import Any

from tecfleet.api.commands import agent, db_retention, devices, import_, report
from tecfleet.api.commands import keys as keys_command
from tecfleet.ingest.errors import TecfleetError
from tecfleet.ingest.settings import Settings, load_settings

log = logging.getLogger("tecfleet")

# Messages (of up to 480 readings) the demo feed lets the ingester fall behind by.
DEMO_MAX_BACKLOG = 8

# flag -> settings field; the same names as the TECFLEET_* variables.
SETTING_FLAGS = {
    "--db": "database_url",
    "--mqtt": "mqtt_url",
    "--topic-prefix": "topic_prefix",
    "--host": "http_host",
    "--port": "http_port",
    "--analyze-every": "analyze_every_s",
    "--client-id": "mqtt_client_id",
    "--roles": "roles",
    "--share-group": "share_group",
    "--config": "config",
}


def _add_setting_flags(
    parser: argparse.ArgumentParser, only: tuple[str, ...] | None = None
) -> None:
    for flag, field in SETTING_FLAGS.items():
        if only is not None and flag not in only:
            continue
        parser.add_argument(flag, dest=field, default=None, help=f"(TECFLEET_{field.upper()})")


def _settings(args: argparse.Namespace) -> Settings:
    overrides = {field: getattr(args, field, None) for field in SETTING_FLAGS.values()}
    return load_settings(overrides)


def _engine(settings: Settings) -> Any:
    from tecfleet.ingest.db import make_engine, migrate

    engine = make_engine(settings.database_url)
    migrate(engine)
    return engine


def cmd_serve(args: argparse.Namespace) -> int:
    from tecfleet.api.service import Service

    settings = _settings(args)
    engine = _engine(settings)
    service = Service(settings, engine)

    def started() -> None:
        if "api" in settings.roles:
            print(
                f"tecfleet serving on http://{settings.http_host}:{settings.http_port}/", flush=True
            )
        else:
            print(f"tecfleet running roles {','.join(settings.roles)}", flush=True)

    service.run(on_started=started)
    return 0


def cmd_demo(args: argparse.Namespace) -> int:
    from tecfleet.analytics.simulation.scenario import demo_fleet, run_demo_feed
    from tecfleet.api.auth import create_key
    from tecfleet.api.schemas import DeviceIn
    from tecfleet.api.service import Service
    from tecfleet.api.services.devices import register_device
    from tecfleet.ingest.embedded_broker import EmbeddedBroker

    data_dir = Path(args.data_dir).expanduser().resolve()
    data_dir.mkdir(parents=True, exist_ok=True)
    broker = EmbeddedBroker()
    broker.start()
    settings = load_settings(
        {
            "database_url": f"sqlite:///{data_dir / 'tecfleet.db'}",
            "mqtt_url": broker.url,
            "mqtt_client_id": "tecfleet-demo-ingester",
            "http_port": args.port,
            "analyze_every_s": args.analyze_every,
            "roles": "ingest,analytics,api,delivery",
            "secret_key_file": str(data_dir / "secret.key"),
        },
        env={},
    )
    engine = _engine(settings)
    _spec, registrations = demo_fleet(args.seed)
    for device_id, body in registrations.items():
        register_device(engine, device_id, DeviceIn.model_validate(body))
    key = create_key(engine, "demo", "admin")
    stop_feed = threading.Event()
    # Analysis waits for the history: half a backfill looks like a fleet gone offline.
    backfilled = threading.Event()
    service = Service(settings, engine, analytics_gate=backfilled)

    def pace() -> None:
        # The embedded broker has no flow control and drops a message its subscriber has not
        # acknowledged within 5 s, so the feed waits for the ingester to keep up.
        ingester = service.ingester
        while ingester is not None and ingester.backlog() > DEMO_MAX_BACKLOG:
            if stop_feed.wait(0.02):
                return

    def started() -> None:
        print(f"tecfleet demo: http://{settings.http_host}:{settings.http_port}/", flush=True)
        print(f"API key: {key}", flush=True)
        print(f"data: {data_dir} (MQTT broker on {broker.url}); Ctrl-C stops", flush=True)
        if service.ingester is not None:
            service.ingester.ready.wait(30)
        feed = threading.Thread(
            target=run_demo_feed,
            args=(broker.url, settings.topic_prefix, stop_feed),
            kwargs={
                "days_backfill": args.days,
                "seed": args.seed,
                "before_send": pace,
                "on_backfilled": backfilled.set,
            },
            name="tecfleet-demo-feed",
            daemon=True,
        )
        feed.start()

    try:
        service.run(on_started=started)
    finally:
        stop_feed.set()
        broker.stop()
    return 0


def cmd_db_upgrade(args: argparse.Namespace) -> int:
    settings = _settings(args)
    _engine(settings)
    print("database schema is up to date", file=sys.stderr)
    return 0


def cmd_analyze(args: argparse.Namespace) -> int:
    from tecfleet.analytics.alerts import evaluate
    from tecfleet.analytics.runner import analyze

    settings = _settings(args)
    engine = _engine(settings)
    done = analyze(engine, device_id=args.device)
    # Event time only: "offline" is judged against the newest stored reading.
    changes = evaluate(engine, device_id=args.device)
    print(
        f"analysed {done.devices} device(s): {done.steps} step(s), "
        f"{done.estimates} estimate(s) in {done.seconds:.1f} s; "
        f"{len(changes)} alert change(s)",
        flush=True,
    )
    return 0


def cmd_simulate(args: argparse.Namespace) -> int:
    from tecfleet.analytics.simulation.command import run_simulate

    return int(run_simulate(args))


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tecfleet", description="Telemetry and diagnostics for thermoelectric cooler fleets."
    )
    parser.add_argument("-v", "--verbose", action="store_true", help="log debug detail")
    sub = parser.add_subparsers(dest="command", required=True)

    demo = sub.add_parser("demo", help="embedded broker + SQLite + simulated fleet + API")
    demo.add_argument("--port", type=int, default=8000)
    demo.add_argument("--data-dir", default="./tecfleet-demo")
    demo.add_argument("--days", type=float, default=14.0, help="days of history to backfill")
    demo.add_argument("--seed", type=int, default=7)
    demo.add_argument("--analyze-every", type=float, default=15.0)
    demo.set_defaults(func=cmd_demo)

    serve = sub.add_parser("serve", help="the production service against an external broker")
    _add_setting_flags(serve)
    serve.set_defaults(func=cmd_serve)

    keys_command.add_parser(sub, lambda p: _add_setting_flags(p, only=("--db", "--config")))

    db = sub.add_parser("db", help="database schema").add_subparsers(dest="db", required=True)
    upgrade = db.add_parser("upgrade", help="apply pending migrations")
    _add_setting_flags(upgrade, only=("--db", "--config"))
    upgrade.set_defaults(func=cmd_db_upgrade)
    db_retention.add_parser(db)

    analyze = sub.add_parser("analyze", help="bring estimates and alerts up to the newest reading")
    analyze.add_argument("--device", default=None)
    _add_setting_flags(analyze, only=("--db", "--config"))
    analyze.set_defaults(func=cmd_analyze)

    report.add_parser(sub)

    simulate = sub.add_parser("simulate", help="publish a simulated fleet")
    try:
        from tecfleet.analytics.simulation.command import add_simulate_arguments
    except ImportError:
        simulate.set_defaults(func=lambda _args: _missing("simulator"))
    else:
        add_simulate_arguments(simulate)
        simulate.set_defaults(func=cmd_simulate)
    agent.add_parser(sub)
    import_.add_parser(sub, _add_setting_flags)
    devices.add_parser(sub, _add_setting_flags)
    return parser


def _missing(what: str) -> int:
    print(f"tecfleet: the {what} is not installed", file=sys.stderr)
    return 2


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(
        level=logging.DEBUG if args.verbose else logging.INFO,
        format="%(asctime)s %(levelname)s %(name)s: %(message)s",
        stream=sys.stderr,
    )
    if not args.verbose:
        logging.getLogger("alembic").setLevel(logging.WARNING)
    try:
        return int(args.func(args))
    except TecfleetError as exc:
        print(f"tecfleet: {exc}", file=sys.stderr)
        return 2
    except ValueError as exc:
        print(f"tecfleet: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
