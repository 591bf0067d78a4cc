"""The agent against Debian's mosquitto and the real ingester: nothing lost, nothing twice.

Each CSV row carries a distinct cabinet temperature, so every stored reading can be traced to
its row. Rows without ``ts`` are stamped by the agent when it reads them: a row read twice would
come back with a second timestamp and show up as an extra reading.
"""

from __future__ import annotations

import sqlite3
import threading
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import paho.mqtt.client as mqtt
import pytest
import sqlalchemy as sa
from paho.mqtt.enums import CallbackAPIVersion
from sqlalchemy.engine import Engine

from tecfleet.ingest import db
from tests.agent.agent_process import AgentProcess
from tests.ingest.mqtt_helpers import count_readings, start_ingester, wait_for
from tests.services import Mosquitto

HEADER = "ts,t_cabinet,t_cold,t_hot,t_ambient,current,voltage\n"
DEVICE = "cab-agent"


def row(i: int, ts: str = "") -> str:
    # t_cabinet 2.000, 2.005, ... identifies row i.
    return f"{ts},{2.0 + i * 0.005:.3f},-4.0,30.5,21.0,3.2,7.9\n"


def append(path: Path, text: str) -> None:
    with path.open("a") as handle:
        handle.write(text)


def cabinet_values(engine: Engine) -> list[float]:
    stmt = sa.select(db.readings.c.t_cabinet).where(db.readings.c.device_id == DEVICE)
    with engine.connect() as connection:
        return sorted(round(v, 3) for (v,) in connection.execute(stmt))


def expected_values(n: int) -> list[float]:
    return [round(2.0 + i * 0.005, 3) for i in range(n)]


class StatusWatcher:
    """Subscribes to the device's status topic and keeps every payload, retained ones too."""

    def __init__(self, url_port: int) -> None:
        self.seen: list[str] = []
        self._lock = threading.Lock()
        self.client = mqtt.Client(callback_api_version=CallbackAPIVersion.VERSION2)
        self.client.on_message = self._on_message
        self.client.connect("127.0.0.1", url_port)
        self.client.subscribe(f"tecfleet/{DEVICE}/status", qos=1)
        self.client.loop_start()

    def _on_message(self, _c: Any, _u: Any, message: mqtt.MQTTMessage) -> None:
        with self._lock:
            self.seen.append(message.payload.decode())

    def last(self) -> str | None:
        with self._lock:
            return self.seen[-1] if self.seen else None

    def close(self) -> None:
        self.client.disconnect()
        self.client.loop_stop()


@pytest.fixture
def agent_files(tmp_path: Path) -> Iterator[tuple[Path, Path]]:
    csv_path = tmp_path / "cooler.csv"
    csv_path.write_text(HEADER)
    yield csv_path, tmp_path / "agent" / "buffer.sqlite"


def test_readings_flow_and_survive_a_broker_outage_exactly_once(
    mosquitto: Mosquitto, sqlite_url: str, agent_files: tuple[Path, Path], tmp_path: Path
) -> None:
    csv_path, buffer_path = agent_files
    ingester, engine, _ = start_ingester(sqlite_url, mosquitto.url, client_id="agent-e2e")
    watcher = StatusWatcher(mosquitto.port)
    agent = AgentProcess(
        [
            "--device-id",
            DEVICE,
            "--mqtt-url",
            mosquitto.url,
            "--buffer",
            str(buffer_path),
            "--source",
            f"csv:{csv_path}",
        ],
        tmp_path / "agent.log",
    )
    agent.start()
    try:
        # Timestamps as the contract allows them: RFC 3339 with an offset, epoch seconds, none.
        append(csv_path, row(0, "2026-11-30T08:00:00+01:00") + row(1, "1795000000.5") + row(2))
        assert wait_for(lambda: count_readings(engine, DEVICE) == 3, 30), agent.log()
        assert wait_for(lambda: watcher.last() == "online", 10)

        mosquitto.stop()
        # 20 s without a broker, a reading a second, stamped by the agent as it reads them.
        for i in range(3, 23):
            append(csv_path, row(i))
            time.sleep(1.0)
        mosquitto.start()

        assert wait_for(lambda: count_readings(engine, DEVICE) >= 23, 60), agent.log()
        time.sleep(2.0)  # anything sent twice would have arrived by now
        assert cabinet_values(engine) == expected_values(23)
        assert agent.terminate() == 0
        assert "LOADED=\n" in agent.log()  # no database or web library in the agent
        assert wait_for(lambda: watcher.last() == "offline", 10)
        with sqlite3.connect(buffer_path) as buffer:
            assert buffer.execute("SELECT COUNT(*) FROM pending").fetchone() == (0,)
    finally:
        agent.close()
        watcher.close()
        ingester.stop()


def test_kill_minus_nine_mid_backlog_loses_and_repeats_nothing(
    mosquitto: Mosquitto, sqlite_url: str, agent_files: tuple[Path, Path], tmp_path: Path
) -> None:
    csv_path, buffer_path = agent_files
    n = 2000
    append(csv_path, "".join(row(i) for i in range(n)))
    config = tmp_path / "agent.toml"
    config.write_text(
        f'device_id = "{DEVICE}"\nmqtt_url = "{mosquitto.url}"\nbuffer = "{buffer_path}"\n'
        f'[[sources]]\nkind = "csv"\npath = "{csv_path}"\n'
        # A slow drain, so the kill lands in the middle of it: 10 readings 20 times a second.
        "[options]\nbatch_max_readings = 10\nbacklog_messages_per_s = 20\n"
    )
    ingester, engine, _ = start_ingester(sqlite_url, mosquitto.url, client_id="agent-kill")
    watcher = StatusWatcher(mosquitto.port)
    agent = AgentProcess(["--config", str(config)], tmp_path / "agent.log")
    agent.start()
    try:
        assert wait_for(lambda: count_readings(engine, DEVICE) >= 300, 60), agent.log()
        assert watcher.last() == "online"
        agent.kill()
        at_kill = count_readings(engine, DEVICE)
        assert 0 < at_kill < n
        # The broker publishes the last will once the connection is gone without a goodbye.
        assert wait_for(lambda: watcher.last() == "offline", 60)
        agent.start()
        assert wait_for(lambda: count_readings(engine, DEVICE) >= n, 120), agent.log()
        time.sleep(2.0)
        assert cabinet_values(engine) == expected_values(n)
        assert agent.terminate() == 0
    finally:
        agent.close()
        watcher.close()
        ingester.stop()
