"""The REST API over a real database: keys and scopes, devices, readings, rejects."""

from __future__ import annotations

import pytest
import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tecfleet.ingest.db import Reading, Reject


@pytest.fixture
def client(engine: sa.Engine) -> TestClient:
    return TestClient(create_app(engine))


def auth(engine: sa.Engine, scope: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {create_key(engine, scope + '-key', scope)}"}


def _readings(device: str, n: int, start_ms: int = 1_790_000_000_000) -> list[Reading]:
    return [
        Reading(device, start_ms + 60_000 * i, 4.0, -3.0, 31.0, 22.0, 3.0, 8.0, seq=i)
        for i in range(n)
    ]


def test_health_and_readiness_need_no_key(client: TestClient) -> None:
    assert client.get("/healthz").json() == {"status": "ok"}
    assert client.get("/readyz").status_code == 200


def test_readiness_follows_the_ingester(engine: sa.Engine) -> None:
    state = {"ok": False}
    app = create_app(engine, ready=lambda: (state["ok"], "MQTT subscription not yet in place"))
    client = TestClient(app)
    assert client.get("/readyz").status_code == 503
    state["ok"] = True
    assert client.get("/readyz").status_code == 200


def test_missing_key_401_unknown_key_401_small_scope_403(
    client: TestClient, engine: sa.Engine
) -> None:
    assert client.get("/v1/devices").status_code == 401
    assert client.get("/v1/devices", headers={"Authorization": "Bearer nope"}).status_code == 401
    read = auth(engine, "read")
    assert client.get("/v1/devices", headers=read).status_code == 200
    assert client.put("/v1/devices/cab-1", json={"label": "x"}, headers=read).status_code == 403
    write = auth(engine, "write")
    assert client.put("/v1/devices/cab-1", json={"label": "x"}, headers=write).status_code == 200


def test_keys_are_stored_only_as_hashes(engine: sa.Engine) -> None:
    key = create_key(engine, "ops", "admin")
    with engine.connect() as c:
        stored = c.execute(sa.select(db.api_keys)).one()
    assert key not in str(tuple(stored))
    assert len(stored.key_hash) == 64


def test_devices_list_and_cursor_pagination(client: TestClient, engine: sa.Engine) -> None:
    for d in range(7):
        db.store_batch(engine, _readings(f"cab-{d}", 3))
    headers = auth(engine, "read")
    seen, cursor = [], None
    while True:
        params = {"limit": 3} | ({"cursor": cursor} if cursor else {})
        page = client.get("/v1/devices", params=params, headers=headers).json()
        seen += [item["device_id"] for item in page["items"]]
        cursor = page["next_cursor"]
        if cursor is None:
            break
    assert seen == [f"cab-{d}" for d in range(7)]
    item = client.get("/v1/devices", headers=headers).json()["items"][0]
    assert item["readings"] == 3
    # 1_790_000_000 s + 2 min, converted by hand with the standard library.
    assert item["last_reading_at"] == "2026-09-21T14:15:20.000Z"
    assert item["open_alerts"] == 0 and item["online"] is False


def test_readings_oldest_first_with_time_window_and_cursor(
    client: TestClient, engine: sa.Engine
) -> None:
    db.store_batch(engine, _readings("cab-r", 25))
    headers = auth(engine, "read")
    got, cursor = [], None
    while True:
        params = {"limit": 10} | ({"cursor": cursor} if cursor else {})
        page = client.get("/v1/devices/cab-r/readings", params=params, headers=headers).json()
        got += page["items"]
        cursor = page["next_cursor"]
        if not cursor:
            break
    assert [r["seq"] for r in got] == list(range(25))
    window = client.get(
        "/v1/devices/cab-r/readings",
        params={"start": got[5]["ts"], "end": got[8]["ts"]},
        headers=headers,
    ).json()
    assert [r["seq"] for r in window["items"]] == [5, 6, 7]
    bad = client.get("/v1/devices/cab-r/readings", params={"start": "soon"}, headers=headers)
    assert bad.status_code == 422 and "start" in bad.text
    bad_cursor = client.get("/v1/devices/cab-r/readings", params={"cursor": "!!"}, headers=headers)
    assert bad_cursor.status_code == 422 and "cursor" in bad_cursor.text


def test_unknown_device_404(client: TestClient, engine: sa.Engine) -> None:
    headers = auth(engine, "read")
    assert client.get("/v1/devices/ghost", headers=headers).status_code == 404
    assert client.get("/v1/devices/ghost/readings", headers=headers).status_code == 404


def test_register_device_validates_and_merges(client: TestClient, engine: sa.Engine) -> None:
    headers = auth(engine, "write")
    body = {
        "label": "Ward 3 fridge",
        "site": "North clinic",
        "module": {"couples": 127, "i_max_a": 6.0, "v_max_v": 15.4, "dt_max_k": 68},
        "cabinet": {"volume_l": 40, "setpoint_c": 5, "low_limit_c": 2, "high_limit_c": 8},
    }
    first = client.put("/v1/devices/ward3", json=body, headers=headers)
    assert first.status_code == 200
    second = client.put(
        "/v1/devices/ward3", json={"module": {"q_max_w": 51.4}}, headers=headers
    ).json()
    assert second["module"] == {**body["module"], "q_max_w": 51.4}
    assert second["label"] == "Ward 3 fridge"
    bad = client.put(
        "/v1/devices/ward3",
        json={"cabinet": {"low_limit_c": 8, "high_limit_c": 2}},
        headers=headers,
    )
    assert bad.status_code == 422 and "cabinet" in bad.text
    bad = client.put("/v1/devices/ward3", json={"module": {"i_max_a": -1}}, headers=headers)
    assert bad.status_code == 422 and "i_max_a" in bad.text
    assert client.put("/v1/devices/bad id", json={}, headers=headers).status_code in (404, 422)
    detail = client.get("/v1/devices/ward3", headers=headers).json()
    assert detail["latest_reading"] is None and detail["readings"] == 0


def test_rejects_newest_first(client: TestClient, engine: sa.Engine) -> None:
    db.store_batch(
        engine,
        [],
        [
            Reject("tecfleet/a/telemetry", b"\xff", "not_utf8", "not UTF-8", "a"),
            Reject("tecfleet/a/telemetry", b"{", "invalid_json", "not JSON", "a"),
        ],
    )
    page = client.get("/v1/rejects", headers=auth(engine, "read")).json()
    assert [r["code"] for r in page["items"]] == ["invalid_json", "not_utf8"]
    assert page["items"][1]["payload_encoding"] == "base64"


def test_metrics_in_prometheus_text(client: TestClient, engine: sa.Engine) -> None:
    response = client.get("/metrics", headers=auth(engine, "read"))
    assert response.status_code == 200
    assert "tecfleet_readings_stored_total" in response.text
