"""An in-process MQTT broker on loopback for the one-command demo (the amqtt package).

It speaks MQTT 3.1.1 only and keeps sessions only for authenticated clients, so it is for the
demo and tests of the demo; production runs against an external broker (see ``deploy/``).
"""

from __future__ import annotations

import asyncio
import logging
import socket
import threading
from typing import Any

from tecfleet.ingest.errors import BrokerError

log = logging.getLogger(__name__)


def free_port(host: str = "127.0.0.1") -> int:
    """A TCP port that was free a moment ago."""
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind((host, 0))
        return int(sock.getsockname()[1])


class EmbeddedBroker:
    """amqtt broker running on its own event loop in a background thread."""

    def __init__(self, host: str = "127.0.0.1", port: int | None = None) -> None:
        self.host = host
        self.port = port or free_port(host)
        self._loop = asyncio.new_event_loop()
        self._thread = threading.Thread(
            target=self._loop.run_forever, name="tecfleet-broker", daemon=True
        )
        self._broker: Any = None

    @property
    def url(self) -> str:
        return f"mqtt://{self.host}:{self.port}"

    def start(self, timeout_s: float = 15.0) -> None:
        from amqtt.broker import Broker

        config = {
            "listeners": {"default": {"type": "tcp", "bind": f"{self.host}:{self.port}"}},
            "plugins": {
                "amqtt.plugins.authentication.AnonymousAuthPlugin": {"allow_anonymous": True},
            },
        }
        # amqtt logs every packet at INFO and each refused MQTT 5 probe at WARNING.
        logging.getLogger("amqtt").setLevel(logging.ERROR)
        logging.getLogger("transitions").setLevel(logging.WARNING)
        self._thread.start()

        async def _start() -> None:
            self._broker = Broker(config)
            await self._broker.start()

        future = asyncio.run_coroutine_threadsafe(_start(), self._loop)
        try:
            future.result(timeout_s)
        except Exception as exc:
            raise BrokerError(f"embedded MQTT broker could not start on {self.url}: {exc}") from exc
        log.info("embedded MQTT broker listening on %s", self.url)

    def stop(self, timeout_s: float = 10.0) -> None:
        if self._broker is not None:
            future = asyncio.run_coroutine_threadsafe(self._broker.shutdown(), self._loop)
            try:
                future.result(timeout_s)
            except Exception as exc:  # shutting down anyway
                log.debug("embedded broker shutdown: %s", exc)
        self._loop.call_soon_threadsafe(self._loop.stop)
        self._thread.join(timeout_s)
