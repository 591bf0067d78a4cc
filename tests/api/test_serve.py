"""`tecfleet serve` with every role against Debian's broker and PostgreSQL, and `tecfleet
analyze` on the same database: readings in, estimates and health out, a clean SIGTERM stop."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

import httpx

from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tests.analytics.synthetic import Truth, simulate
from tests.ingest.mqtt_helpers import Publisher, count_readings, wait_for
from tests.services import Mosquitto, Postgres, free_port


def test_serve_all_roles_on_postgres(
    mosquitto: Mosquitto, postgres: Postgres, tmp_path: Path
) -> None:
    db_url = postgres.create_database(f"t_serve_{os.getpid()}")
    engine = db.make_engine(db_url)
    db.migrate(engine)
    key = create_key(engine, "ops", "read")
    port = free_port()
    env = dict(
        os.environ,
        TECFLEET_DATABASE_URL=db_url,
        TECFLEET_MQTT_URL=mosquitto.url,
        TECFLEET_HTTP_PORT=str(port),
        TECFLEET_ANALYZE_EVERY_S="2",
        TECFLEET_MQTT_CLIENT_ID="tecfleet-serve-test",
    )
    log = tmp_path / "serve.log"
    with log.open("wb") as err:
        process = subprocess.Popen(
            [sys.executable, "-m", "tecfleet.api.cli", "serve"],
            env=env,
            stdout=subprocess.PIPE,
            stderr=err,
            text=True,
        )
    base = f"http://127.0.0.1:{port}"
    headers = {"Authorization": f"Bearer {key}"}
    try:
        assert process.stdout is not None
        assert process.stdout.readline().strip() == f"tecfleet serving on {base}/"

        def ready() -> bool:
            try:
                return httpx.get(f"{base}/readyz", timeout=2).status_code == 200
            except httpx.HTTPError:
                return False

        assert wait_for(ready, 30), log.read_text()[-2000:]
        frame = simulate(Truth(), 1.5, seed=21, door_every_h=9.0)
        pub = Publisher(mosquitto.url)
        items = [
            {"ts": r.ts_ms / 1000, "t_cabinet": r.t_cabinet, "t_cold": r.t_cold,
             "t_hot": r.t_hot, "t_ambient": r.t_ambient, "current": r.current,
             "voltage": r.voltage}
            for r in frame.itertuples()
        ]  # fmt: skip
        for i in range(0, len(items), 120):
            pub.publish("tecfleet/site-a.unit-1/telemetry", items[i : i + 120])
        pub.close()
        assert wait_for(lambda: count_readings(engine) == len(items), 60)

        def analysed() -> bool:
            health = httpx.get(
                f"{base}/v1/devices/site-a.unit-1/health", headers=headers, timeout=10
            ).json()
            return "module.resistance_25c_ohm" in health and "cabinet.ua_w_per_k" in health

        assert wait_for(analysed, 120, every_s=1), log.read_text()[-3000:]
        metrics = httpx.get(f"{base}/metrics", headers=headers, timeout=5).text
        assert f"tecfleet_readings_stored_total {float(len(items))}" in metrics
    finally:
        process.send_signal(signal.SIGTERM)
        code = process.wait(60)
        if process.stdout is not None:
            process.stdout.close()
    assert code == 0, log.read_text()[-3000:]
    assert "Traceback" not in log.read_text()
    # Everything is analysed already: a one-off run finds nothing new to do.
    result = subprocess.run(
        [sys.executable, "-m", "tecfleet.api.cli", "analyze", "--db", db_url],
        capture_output=True,
        text=True,
        timeout=120,
        check=True,
    )
    assert "0 step(s)" in result.stdout
