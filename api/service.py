"""Runs the roles of one tecfleet process: ingester, analytics loop, HTTP API and delivery.

Every role keeps its state in the database, so each may run in any number of processes beside
the others: ingesters split the stream through a shared subscription, analysis processes on
PostgreSQL share the fleet through device leases (:mod:`tecfleet.analytics.runner.leases`),
API processes are stateless, and deliverers claim the notices they send.

Ctrl-C / SIGTERM stops the HTTP server first, then the analytics loop (giving its leases back),
then delivery, then drains the ingester (commit and acknowledge what was received) before the
process exits.
"""

from __future__ import annotations

import gc
import logging
import signal
import threading
from collections.abc import Callable
from typing import TYPE_CHECKING, Any

import uvicorn
from fastapi import FastAPI
from sqlalchemy.engine import Engine
from sqlalchemy.exc import SQLAlchemyError

from tecfleet.api.app import create_app
from tecfleet.api.delivery import Notifier
from tecfleet.api.storage_upkeep import start_upkeep
from tecfleet.ingest.db import now_ms
from tecfleet.ingest.ingester import Ingester
from tecfleet.ingest.settings import Settings

if TYPE_CHECKING:
    from tecfleet.analytics.runner.leases import ShardedAnalysis

log = logging.getLogger(__name__)


def delivers(roles: tuple[str, ...]) -> bool:
    """Whether a process of these roles sends notices: the ``delivery`` role, or a process
    that both analyses and serves (``ingest,analytics,api``, the all-in-one set of the
    contract, delivered before the role had a name of its own)."""
    return "delivery" in roles or {"analytics", "api"} <= set(roles)


class Service:
    def __init__(
        self, settings: Settings, engine: Engine, analytics_gate: threading.Event | None = None
    ) -> None:
        """``analytics_gate``, when given, holds the analytics loop until it is set."""
        self.settings = settings
        self.analytics_gate = analytics_gate
        self.engine = engine
        self.stopping = threading.Event()
        self.ingester = Ingester(settings, engine) if "ingest" in settings.roles else None
        self.server: uvicorn.Server | None = None
        self._analytics: threading.Thread | None = None
        self._shards: ShardedAnalysis | None = None
        self._upkeep: threading.Thread | None = None
        self.notifier: Notifier | None = None

    def ready(self) -> tuple[bool, str]:
        if self.ingester is not None and not self.ingester.ready.is_set():
            return False, "MQTT subscription not yet in place"
        return True, "ready"

    def run(self, on_started: Callable[[], None] | None = None) -> None:
        """Run until a signal (or ``stop``), then shut down in order."""
        if self.ingester is not None:
            self.ingester.start()
        if delivers(self.settings.roles):
            self.notifier = Notifier(self.engine, self.settings)
            self.notifier.start()
        if "analytics" in self.settings.roles:
            if self.engine.dialect.name == "postgresql":
                self._shards = sharded_analysis(self.settings, self.engine)
                analyze = sharded_round(self._shards)
            else:
                analyze = analysis_round(self.settings, self.engine)
            self._analytics = threading.Thread(
                target=analytics_loop,
                args=(analyze, self.stopping, self.analytics_gate, self.settings.analyze_every_s),
                name="tecfleet-analytics",
                daemon=True,
            )
            self._analytics.start()
        if "ingest" in self.settings.roles or "analytics" in self.settings.roles:
            self._upkeep = start_upkeep(self.engine, self.settings, self.stopping)
        try:
            if "api" in self.settings.roles:
                app = create_app(self.engine, ready=self.ready, settings=self.settings)
                self.server = http_server(app, self.settings)
                # uvicorn re-raises the signal that stopped it once it is done; with our own
                # handlers in place that lands here instead of killing the process before
                # the ingester has drained.
                self._install_signal_handlers()
                if on_started is not None:
                    threading.Thread(target=self._announce, args=(on_started,), daemon=True).start()
                freeze_startup_heap()
                self.server.run()
            else:
                freeze_startup_heap()
                self._wait_for_signal(on_started)
        finally:
            self.shutdown()

    def _announce(self, on_started: Callable[[], None]) -> None:
        while self.server is not None and not self.server.started:
            if self.stopping.wait(0.05):
                return
        on_started()

    def _install_signal_handlers(self) -> None:
        if threading.current_thread() is not threading.main_thread():
            return

        def handler(_signum: int, _frame: Any) -> None:
            self.stop()

        signal.signal(signal.SIGINT, handler)
        signal.signal(signal.SIGTERM, handler)

    def _wait_for_signal(self, on_started: Callable[[], None] | None) -> None:
        self._install_signal_handlers()
        if on_started is not None:
            on_started()
        while not self.stopping.wait(0.5):
            pass

    def stop(self) -> None:
        self.stopping.set()
        if self.server is not None:
            self.server.should_exit = True

    def shutdown(self) -> None:
        self.stopping.set()
        if self._analytics is not None:
            self._analytics.join(30)
        if self._shards is not None:
            try:
                self._shards.retire()
            except SQLAlchemyError:  # the leases lapse by themselves
                log.warning("could not give the analysis leases back", exc_info=True)
        if self._upkeep is not None:
            self._upkeep.join(30)
        if self.notifier is not None:
            self.notifier.stop()
        if self.ingester is not None:
            self.ingester.stop()
        self.engine.dispose()
        log.info("tecfleet stopped")


def analytics_loop(
    analyze: Callable[[], Any],
    stopping: threading.Event,
    gate: threading.Event | None,
    every_s: float,
) -> None:
    """Run ``analyze`` every ``every_s`` seconds until ``stopping``; wait for ``gate`` first."""
    while gate is not None and not gate.wait(0.5):
        if stopping.is_set():
            return
    while not stopping.is_set():
        try:
            analyze()
        except Exception:  # keep the loop alive; the next round retries
            log.exception("analysis round failed")
        stopping.wait(every_s)


def freeze_startup_heap() -> None:
    """Move what start-up built (modules, the app, schemas, table metadata: some 300,000
    objects) out of the garbage collector's sight. Each full collection scanned all of them
    again: at 10,000 devices every third fleet answer paused about 150 ms for it."""
    gc.collect()
    gc.freeze()


def http_server(app: FastAPI, settings: Settings) -> uvicorn.Server:
    config = uvicorn.Config(
        app,
        host=settings.http_host,
        port=settings.http_port,
        log_level="warning",
        lifespan="on",
    )
    return uvicorn.Server(config)


def analysis_round(settings: Settings, engine: Engine) -> Callable[[], Any]:
    """The function the analytics loop calls every ``analyze_every_s`` seconds.

    Estimates first, then alerts; the live service judges "offline" on the wall clock.
    """
    from tecfleet.analytics import alerts, runner

    def round_() -> Any:
        report = runner.analyze(engine)
        alerts.evaluate(engine, now_ms=now_ms())
        return report

    return round_


def sharded_analysis(settings: Settings, engine: Engine) -> ShardedAnalysis:
    """This process's worker of the sharded analysis (PostgreSQL)."""
    from tecfleet.analytics.runner.leases import ShardedAnalysis

    return ShardedAnalysis(
        engine,
        lease_s=settings.analysis_lease_s,
        devices_per_commit=settings.analysis_devices_per_commit,
    )


def sharded_round(shards: ShardedAnalysis) -> Callable[[], Any]:
    """The analytics loop's round on PostgreSQL: estimates and alerts of this worker's devices.
    The live service judges "offline" on the wall clock."""

    def round_() -> Any:
        return shards.round(now_ms=now_ms())

    return round_
