"""`tecfleet demo` end to end: embedded broker, SQLite, simulated fleet, API, clean stop."""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
from pathlib import Path

import httpx

from tests.ingest.mqtt_helpers import wait_for
from tests.services import free_port


def test_demo_prints_url_and_key_fills_the_fleet_and_stops_cleanly(tmp_path: Path) -> None:
    port = free_port()
    log = tmp_path / "demo.log"
    with log.open("wb") as err:
        process = subprocess.Popen(
            [sys.executable, "-m", "tecfleet.api.cli", "demo", "--port", str(port),
             "--data-dir", str(tmp_path / "data"), "--days", "1", "--analyze-every", "5"],
            stdout=subprocess.PIPE,
            stderr=err,
            text=True,
            env=dict(os.environ),
        )  # fmt: skip
    try:
        assert process.stdout is not None
        lines = [process.stdout.readline() for _ in range(2)]
        assert lines[0].strip() == f"tecfleet demo: http://127.0.0.1:{port}/"
        match = re.fullmatch(r"API key: (\S+)\n", lines[1])
        assert match, lines
        headers = {"Authorization": f"Bearer {match.group(1)}"}
        base = f"http://127.0.0.1:{port}"

        def fleet_filled() -> bool:
            page = httpx.get(f"{base}/v1/devices", headers=headers, timeout=5).json()
            counts = [d["readings"] for d in page["items"]]
            # A day of one-minute readings for most units (one of the scenario's units is
            # offline by design, so not every unit has all of it).
            return len(counts) >= 20 and sorted(counts)[len(counts) // 2] >= 1300

        assert wait_for(fleet_filled, 240, every_s=2), log.read_text()[-3000:]
        assert httpx.get(f"{base}/readyz", timeout=5).status_code == 200
        assert "tecfleet" in httpx.get(f"{base}/", timeout=5).text

        def analysed() -> bool:
            devices = httpx.get(f"{base}/v1/devices", headers=headers, timeout=5).json()["items"]
            health = httpx.get(
                f"{base}/v1/devices/{devices[0]['device_id']}/health", headers=headers, timeout=30
            ).json()
            return "module.resistance_25c_ohm" in health

        assert wait_for(analysed, 240, every_s=3), log.read_text()[-3000:]
    finally:
        process.send_signal(signal.SIGINT)
        try:
            code = process.wait(60)
        except subprocess.TimeoutExpired:
            process.kill()
            raise
        finally:
            if process.stdout is not None:
                process.stdout.close()
    assert code == 0, log.read_text()[-3000:]
    assert "Traceback" not in log.read_text()
