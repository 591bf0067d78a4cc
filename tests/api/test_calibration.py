"""Calibration offsets: stored readings stay as received; an offset applies, within its
validity dates, wherever readings are read (the API, its export, the one loader of every
analysis); adding or withdrawing one makes the analysis of its period run again.

Expected values are the stored values plus the offset, worked by hand beside each check.
"""

from __future__ import annotations

import csv
import io

import pytest
import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.analytics.runner import analyze
from tecfleet.api.app import create_app
from tecfleet.ingest import db
from tecfleet.ingest.db import analysis as analysis_db
from tests.api.fleet import MIN, T0, populate

#: The populated offset: t_cabinet -0.2 K on cab-n1 from 2026-09-21T14:00:00Z (T0 - 800 s).
FIXTURE_OFFSET = -0.2


def test_offsets_apply_as_read_and_stored_readings_stay(engine: sa.Engine) -> None:
    fleet = populate(engine)
    client = TestClient(create_app(engine))
    writer = {"Authorization": f"Bearer {fleet.keys['write']}"}
    # The ambient probe reads 0.5 K high between minutes 30 and 60 (T0 = 14:13:20Z).
    made = client.post(
        "/v1/devices/cab-n1/calibration",
        json={"sensor": "t_ambient", "offset": -0.5, "valid_from": "2026-09-21T14:43:20Z",
              "valid_to": "2026-09-21T15:13:20Z", "note": "checked against a reference"},
        headers=writer,
    )  # fmt: skip
    assert made.status_code == 201
    page = client.get("/v1/devices/cab-n1/readings", params={"limit": 140}, headers=writer).json()
    raw = client.get(
        "/v1/devices/cab-n1/readings", params={"limit": 140, "raw": "true"}, headers=writer
    ).json()
    for k in (0, 29, 30, 59, 60):
        served, stored = page["items"][k], raw["items"][k]
        # Stored t_ambient is 22.0 + 0.1 * (k % 5); minutes 30-59 lose 0.5.
        expected = 22.0 + 0.1 * (k % 5) - (0.5 if 30 <= k < 60 else 0.0)
        assert served["t_ambient"] == pytest.approx(expected), k
        assert stored["t_ambient"] == pytest.approx(22.0 + 0.1 * (k % 5)), k
        # Every reading is after the fixture's open-ended cabinet offset began.
        assert served["t_cabinet"] == pytest.approx(stored["t_cabinet"] + FIXTURE_OFFSET), k
    with engine.connect() as conn:
        stored_rows = conn.execute(
            sa.select(db.readings.c.t_ambient).where(db.readings.c.device_id == "cab-n1")
        ).scalars()
        assert {round(v, 6) for v in stored_rows} == {22.0, 22.1, 22.2, 22.3, 22.4}
        arr = db.read_arrays(conn, "cab-n1", ("ts_ms", "t_ambient"), T0, T0 + 140 * MIN)
    assert arr[30, 1] == pytest.approx(22.0 - 0.5) and arr[60, 1] == pytest.approx(22.0)
    export = client.get(
        "/v1/devices/cab-n1/export/readings.csv",
        params={"start": "2026-09-21T14:00:00Z", "end": "2026-09-21T17:00:00Z"},
        headers=writer,
    )
    rows = list(csv.DictReader(io.StringIO(export.text)))
    assert len(rows) == 140 and float(rows[30]["t_ambient"]) == pytest.approx(21.5)
    listed = client.get("/v1/devices/cab-n1/calibration", headers=writer).json()["items"]
    assert [(o["sensor"], o["offset"]) for o in listed] == [
        ("t_cabinet", FIXTURE_OFFSET), ("t_ambient", -0.5)
    ]  # fmt: skip


def test_a_change_reruns_the_analysis_of_its_period(engine: sa.Engine) -> None:
    fleet = populate(engine)
    client = TestClient(create_app(engine))
    writer = {"Authorization": f"Bearer {fleet.keys['write']}"}
    first = analyze(engine, device_id="cab-s1")
    assert first.steps > 0 and analyze(engine, device_id="cab-s1").steps == 0  # up to date
    # Estimates on both sides of the new offset's start (written by the runner's own writer).
    split = T0 + 60 * MIN
    with engine.begin() as conn:
        done = analysis_db.done_ms_by_device(conn)["cab-s1"]
        state = analysis_db.read_states(conn, ["cab-s1"])["cab-s1"]
        rows = [("cab-s1", "cabinet.ua_w_per_k", at, 1.0, 0.1, 10, True, None, None)
                for at in (split - MIN, split, split + MIN)]  # fmt: skip
        analysis_db.write_results(conn, "cab-s1", rows, done, state)
    made = client.post(
        "/v1/devices/cab-s1/calibration",
        json={"sensor": "t_cabinet", "offset": 0.3, "valid_from": "2026-09-21T15:13:20Z"},
        headers=writer,
    )
    assert made.status_code == 201
    with engine.connect() as conn:
        assert "cab-s1" not in analysis_db.done_ms_by_device(conn)
        kept = (
            conn.execute(
                sa.select(db.estimates.c.at_ms).where(db.estimates.c.device_id == "cab-s1")
            )
            .scalars()
            .all()
        )
    assert kept == [split - MIN]  # from the offset's start on, estimates go to be redone
    again = analyze(engine, device_id="cab-s1")
    assert again.steps == first.steps  # the whole history analysed again
    withdrawn = client.delete(f"/v1/devices/cab-s1/calibration/{made.json()['id']}", headers=writer)
    assert withdrawn.status_code == 204
    assert analyze(engine, device_id="cab-s1").steps == first.steps
    listed = client.get(
        "/v1/devices/cab-s1/calibration", params={"withdrawn": "true"}, headers=writer
    ).json()["items"]
    assert listed[0]["withdrawn_at"] is not None  # kept on record
