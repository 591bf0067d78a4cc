"""Crashes, restarts, database outages and shared subscriptions lose nothing and double nothing."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest
import sqlalchemy as sa

from tecfleet.ingest import db
from tests.ingest.mqtt_helpers import Publisher, count_readings, reading, start_ingester, wait_for
from tests.services import Mosquitto, Postgres, free_port


def _spawn_service(db_url: str, mqtt_url: str, port: int, log: Path) -> subprocess.Popen[bytes]:
    env = dict(os.environ, TECFLEET_DATABASE_URL=db_url, TECFLEET_MQTT_URL=mqtt_url)
    env.update(TECFLEET_MQTT_CLIENT_ID="tecfleet-kill-test", TECFLEET_ROLES="ingest,api")
    env.update(TECFLEET_HTTP_PORT=str(port))
    with log.open("ab") as out:
        process = subprocess.Popen(
            [sys.executable, "-m", "tecfleet.api.cli", "serve"],
            env=env,
            stdout=out,
            stderr=subprocess.STDOUT,
        )

    def ready() -> bool:
        try:
            return httpx.get(f"http://127.0.0.1:{port}/readyz", timeout=1).status_code == 200
        except httpx.HTTPError:
            return False

    assert wait_for(ready, 30), log.read_text()[-2000:]
    return process


def _seqs(engine: sa.Engine, device_id: str) -> list[int]:
    stmt = sa.select(db.readings.c.seq).where(db.readings.c.device_id == device_id)
    with engine.connect() as c:
        return sorted(int(s) for s in c.execute(stmt).scalars())


def test_sigkill_mid_stream_then_restart_loses_and_doubles_nothing(
    mosquitto: Mosquitto, db_url: str, tmp_path: Path
) -> None:
    port = free_port()
    log = tmp_path / "service.log"
    engine = db.make_engine(db_url)
    db.migrate(engine)
    service = _spawn_service(db_url, mosquitto.url, port, log)
    pub = Publisher(mosquitto.url)
    n = 3000
    try:
        for i in range(n):
            pub.publish("tecfleet/cab-k/telemetry", reading(i))
            if i == 1200:
                pub.flush()
                assert wait_for(lambda: count_readings(engine) > 300, 30)
                service.send_signal(signal.SIGKILL)
                service.wait(10)
                killed_at = count_readings(engine)
            if i % 200 == 0:
                time.sleep(0.02)
        pub.flush()
        assert killed_at < n
        service = _spawn_service(db_url, mosquitto.url, port, log)
        assert wait_for(lambda: count_readings(engine) >= n, 60), count_readings(engine)
        time.sleep(0.5)
        assert _seqs(engine, "cab-k") == list(range(n))
    finally:
        pub.close()
        service.terminate()
        service.wait(30)


@pytest.mark.parametrize("protocol", ["5", "3.1.1"])
def test_service_stopped_cleanly_resumes_its_session(
    mosquitto: Mosquitto, sqlite_url: str, protocol: str
) -> None:
    db_url = sqlite_url
    ingester, engine, _ = start_ingester(
        db_url, mosquitto.url, client_id="tecfleet-resume", mqtt_protocol=protocol
    )
    pub = Publisher(mosquitto.url)
    try:
        for i in range(100):
            pub.publish("tecfleet/cab-q/telemetry", reading(i))
        pub.flush()
        assert wait_for(lambda: count_readings(engine) == 100, 30)
        ingester.stop()
        # Published while no ingester runs: the broker keeps them for the persistent session.
        for i in range(100, 400):
            pub.publish("tecfleet/cab-q/telemetry", reading(i))
        pub.flush()
        ingester, engine, _ = start_ingester(
            db_url, mosquitto.url, client_id="tecfleet-resume", mqtt_protocol=protocol
        )
        assert wait_for(lambda: count_readings(engine) == 400, 30)
        assert _seqs(engine, "cab-q") == list(range(400))
    finally:
        pub.close()
        ingester.stop()


def test_postgres_outage_loses_nothing_and_memory_stays_bounded(
    mosquitto: Mosquitto, postgres: Postgres
) -> None:
    db_url = postgres.create_database("t_outage_" + str(os.getpid()))
    ingester, engine, settings = start_ingester(db_url, mosquitto.url, client_id="tecfleet-pg")
    pub = Publisher(mosquitto.url)
    n = 4000
    try:
        for i in range(500):
            pub.publish("tecfleet/cab-p/telemetry", reading(i))
        pub.flush()
        assert wait_for(lambda: count_readings(engine) == 500, 30)
        postgres.stop()
        try:
            for i in range(500, n):
                pub.publish("tecfleet/cab-p/telemetry", reading(i))
            pub.flush()
            time.sleep(5)
            # Nothing is acknowledged while the database is down, so the broker stops
            # sending at the in-flight window.
            assert ingester.max_queue_depth <= settings.mqtt_receive_maximum + 1
            assert ingester.messages_received < n
        finally:
            postgres.start()
        assert wait_for(lambda: count_readings(engine) == n, 90), count_readings(engine)
        assert _seqs(engine, "cab-p") == list(range(n))
    finally:
        pub.close()
        ingester.stop()


def test_shared_subscription_splits_the_stream_without_loss(
    mosquitto: Mosquitto, db_url: str
) -> None:
    first, engine, _ = start_ingester(db_url, mosquitto.url, client_id="ing-1", share_group="fleet")
    second, _, _ = start_ingester(db_url, mosquitto.url, client_id="ing-2", share_group="fleet")
    pub = Publisher(mosquitto.url)
    try:
        for i in range(1000):
            pub.publish(f"tecfleet/cab-{i % 10}/telemetry", reading(i))
        pub.flush()
        assert wait_for(lambda: count_readings(engine) == 1000, 60)
        assert first.messages_received > 100 and second.messages_received > 100
        assert first.messages_received + second.messages_received == 1000
    finally:
        pub.close()
        first.stop()
        second.stop()


def test_broker_restart_mid_stream_loses_nothing(mosquitto: Mosquitto, db_url: str) -> None:
    ingester, engine, _ = start_ingester(db_url, mosquitto.url, client_id="tecfleet-restart")
    try:
        pub = Publisher(mosquitto.url)
        for i in range(500):
            pub.publish("tecfleet/cab-b/telemetry", reading(i))
        pub.close()
        mosquitto.stop()
        time.sleep(2)
        mosquitto.start()
        pub = Publisher(mosquitto.url)
        for i in range(500, 1000):
            pub.publish("tecfleet/cab-b/telemetry", reading(i))
        pub.close()
        assert wait_for(lambda: count_readings(engine) == 1000, 60), count_readings(engine)
        assert _seqs(engine, "cab-b") == list(range(1000))
    finally:
        ingester.stop()
