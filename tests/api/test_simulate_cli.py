"""`tecfleet simulate` end to end: the same seed written to a file and published through
Debian's broker into the ingester gives the same samples, each stored once."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

from tests.ingest.mqtt_helpers import count_readings, start_ingester, table_snapshot, wait_for
from tests.services import Mosquitto

ARGS = ["--devices", "3", "--days", "0.25", "--seed", "5", "--faults", "none", "--speed", "0"]


def _simulate(*extra: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "tecfleet.api.cli", "simulate", *ARGS, *extra],
        capture_output=True,
        text=True,
        timeout=300,
        check=True,
    )


def test_simulated_fleet_published_and_stored_matches_the_file(
    mosquitto: Mosquitto, sqlite_url: str, tmp_path: Path
) -> None:
    out = tmp_path / "fleet.jsonl"
    truth = tmp_path / "truth.json"
    _simulate("--out", str(out), "--truth", str(truth))
    lines = [json.loads(line) for line in out.read_text().splitlines() if line.strip()]
    assert len(lines) > 3 * 300  # a quarter day of one-minute samples, some missed by design
    assert set(json.loads(truth.read_text())) >= {"devices"}

    ingester, engine, _ = start_ingester(sqlite_url, mosquitto.url, client_id="sim-ingest")
    try:
        _simulate("--mqtt", mosquitto.url, "--batch", "30")
        assert wait_for(lambda: count_readings(engine) >= len(lines), 60)
        stored = table_snapshot(engine)
        assert len(stored) == len(lines)
        # The backfill ends at the wall clock, so the two runs differ in time and values, but
        # which samples exist (misses, jitter) comes from the seed alone.
        file_keys = sorted((line["device_id"], line["seq"]) for line in lines)
        assert sorted((row[0], row[2]) for row in stored) == file_keys
    finally:
        ingester.stop()
