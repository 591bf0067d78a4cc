"""The routes behind the page: the fleet overview, one unit's view, and buckets. Inputs are
stored rows written here (test data only); expected values are worked out from those rows,
spreads with numpy as the reference."""

from __future__ import annotations

import time
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db

MIN = 60_000
DAY = 86_400_000
#: (device, cabinet now [°C], R25 change [%], UA change [%], hot-side change [%], COP, COP max)
UNITS = (
    ("u-a", 5.0, 7.5, 1.0, 0.5, 0.30, 0.35),
    ("u-b", 9.5, 0.2, 74.0, 2.0, 0.25, 0.40),
    ("u-c", 4.0, 1.1, -3.0, 203.0, 0.50, 0.55),
)


@pytest.fixture
def client(db_url: str) -> tuple[TestClient, dict[str, str], int]:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    now = int(time.time() * 1000) // MIN * MIN
    rows = []
    for dev, t_now, *_ in UNITS:
        rows += [
            db.Reading(dev, now - k * MIN, 5.0, -3.0, 30.0, 21.0, 2.0, 6.0)
            for k in range(1, 3 * 1440)
        ]
        rows.append(db.Reading(dev, now, t_now, -3.0, 30.0, 21.0, 2.0, 6.0))
    db.store_batch(engine, rows)
    est: list[dict[str, Any]] = []
    for dev, _t, wear, leak, sink, cop, best in UNITS:
        values = {
            "module.resistance_25c.change_pct": wear, "cabinet.ua.change_pct": leak,
            "hot_side.resistance.change_pct": sink, "performance.cop": cop,
            "performance.cop_max": best, "module.days_to_wear_limit": 5170.1,
            "module.resistance_25c_ohm": 3.94, "module.resistance_25c.baseline": 3.65,
        }  # fmt: skip
        est += [
            {"device_id": dev, "key": k, "at_ms": now - DAY, "value": v, "stderr": None, "n": 9,
             "reliable": dev != "u-c", "note": None, "basis": None}
            for k, v in values.items()
        ]  # fmt: skip
    with engine.begin() as conn:
        conn.execute(db.estimates.insert(), est)
        conn.execute(
            db.alerts.insert().values(
                device_id="u-b", kind="excursion", severity="critical", state="open",
                opened_ms=now - 600_000, updated_ms=now - 600_000, summary="test alert",
                evidence={"peak_c": 9.5, "active_s": 2520.0},
            )
        )  # fmt: skip
        conn.execute(db.devices.update().values(status="online", site="Quillmarsh Depot"))
    key = create_key(engine, "t", "read")
    return TestClient(create_app(engine)), {"Authorization": f"Bearer {key}"}, now


def test_fleet_counts_worst_units_and_cop_spread(
    client: tuple[TestClient, dict[str, str], int],
) -> None:
    c, h, _now = client
    fleet = c.get("/v1/fleet", headers=h).json()
    # medicine band 2-8 °C (the default profile): u-b's 9.5 °C is out of range
    assert fleet["counts"] == {
        "total": 3, "online": 3, "offline": 0, "in_range": 2, "out_of_range": 1,
        "critical": 1, "warning": 0, "clear": 2,
    }  # fmt: skip
    assert [w["device_id"] for w in fleet["worst"]["wear"]] == ["u-a", "u-c", "u-b"]
    assert [w["device_id"] for w in fleet["worst"]["leak"]] == ["u-b", "u-a", "u-c"]
    assert fleet["worst"]["sink"][0] == {
        "device_id": "u-c", "label": None, "value": 203.0, "text": "+203 %", "reliable": False,
    }  # fmt: skip
    ratios = [cop / best for *_x, cop, best in UNITS]
    expected = [min(ratios), float(np.median(ratios)), max(ratios)]
    assert fleet["cop_spread"]["cop_of_best"] == pytest.approx(expected, rel=1e-12)
    a = next(u for u in fleet["units"] if u["device_id"] == "u-a")
    assert a["figures"]["module.days_to_wear_limit"]["text"] == "over a year"
    assert a["figures"]["module.resistance_25c.change_pct"]["text"] == "+7.5 %"
    assert a["days_in_service"] == pytest.approx((3 * 1440 - 1) / 1440)
    assert a["open_alerts"] == {}
    # The summary without units goes its own lighter way and must say the same.
    summary = c.get("/v1/fleet/summary", headers=h).json()
    for part in ("counts", "worst", "cop_spread"):
        assert summary[part] == fleet[part], part
    assert "units" not in summary


def test_unit_view_wear_limit_and_alert_evidence(
    client: tuple[TestClient, dict[str, str], int],
) -> None:
    c, h, _now = client
    unit = c.get("/v1/fleet/units/u-a", headers=h).json()
    # wear limit +10 % on the R25 baseline (the runner's setting, common practice)
    assert unit["wear_limit_ohm"] == pytest.approx(3.65 * 1.10)
    assert unit["module"] is None and unit["band"]["low_c"] == 2.0
    assert "not enough data" in unit["capacity"]
    assert c.get("/v1/fleet/units/nope", headers=h).status_code == 404
    page = c.get("/v1/fleet/alerts?state=open", headers=h).json()
    assert page["next_cursor"] is None
    (alert,) = page["items"]
    assert {"name": "active", "text": "42 min"} in alert["evidence_text"]


def test_reading_buckets_snap_their_width_and_refuse_too_many(
    client: tuple[TestClient, dict[str, str], int],
) -> None:
    c, h, _now = client
    day = c.get("/v1/devices/u-a/readings/buckets", headers=h).json()
    # a day in about 400 buckets snaps to 300 s: 86400 / 300 = 288 buckets, 5 readings each
    assert day["every_s"] == 300
    assert len(day["items"]) == 288
    assert sum(b["n"] for b in day["items"]) == 1440
    cab = c.get("/v1/devices/u-a/readings/buckets?channels=t_cabinet,power", headers=h).json()
    assert set(cab["items"][0]["channels"]) == {"t_cabinet", "power"}
    # power is current x voltage of each reading: 2 A x 6 V
    assert cab["items"][0]["channels"]["power"] == {"lo": 12.0, "hi": 12.0, "mean": 12.0}
    bad = c.get("/v1/devices/u-a/readings/buckets?channels=t_cabinet,colour", headers=h)
    assert bad.status_code == 422 and (bad.json()["location"], bad.json()["field"]) == (
        "query",
        "channels",
    )
    too_many = c.get(
        "/v1/devices/u-a/readings/buckets?start=2020-01-01T00:00:00Z&every=60", headers=h
    )
    assert too_many.status_code == 422 and (
        too_many.json()["location"],
        too_many.json()["field"],
    ) == (
        "query",
        "every",
    )
    est = c.get(
        "/v1/devices/u-a/estimates?keys=performance.cop,nothing&every=86400&start=2020-01-01T00:00:00Z",
        headers=h,
    ).json()
    assert [p["mean"] for p in est["series"]["performance.cop"]] == [0.30]
    assert est["series"]["nothing"] == []


def test_bucket_width_as_a_duration(client: tuple[TestClient, dict[str, str], int]) -> None:
    c, h, _now = client
    hourly = c.get("/v1/devices/u-a/readings/buckets?every=1h", headers=h).json()
    # a day up to the newest reading in whole hours: 24 buckets of 60 one-minute readings
    assert hourly["every_s"] == 3600 and len(hourly["items"]) == 24
    assert c.get("/v1/devices/u-a/readings/buckets?every=3600", headers=h).json() == hourly
    daily = c.get(
        "/v1/devices/u-a/estimates?keys=performance.cop&every=1d&start=2020-01-01T00:00:00Z",
        headers=h,
    ).json()
    assert daily["every_s"] == 86_400
    for bad in ("30s", "8d", "1w", "1.5h", "h"):
        answer = c.get(f"/v1/devices/u-a/readings/buckets?every={bad}", headers=h)
        assert answer.status_code == 422, bad
        assert answer.json()["field"] == "every", bad
