"""What one client may ask: requests per minute per key, body size, page size and the span of
raw readings, each from the settings object.

429 and ``Retry-After`` are RFC 6585, section 4 and RFC 9110, section 10.2.3 (a delay in whole
seconds); 413 is RFC 9110, section 15.5.14.
"""

from __future__ import annotations

from collections.abc import Iterator

import httpx
import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tecfleet.ingest.settings import Settings
from tests.api.fleet import populate, served


def bearer(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}


def limited(engine: sa.Engine, **values: object) -> TestClient:
    return TestClient(create_app(engine, settings=Settings.model_validate(values)))


def test_a_key_over_its_rate_gets_429_and_others_do_not(engine: sa.Engine) -> None:
    client = limited(engine, api_rate_per_minute=5)
    busy, quiet = create_key(engine, "loop", "read"), create_key(engine, "other", "read")
    answers = [client.get("/v1/devices", headers=bearer(busy)) for _ in range(7)]
    assert [a.status_code for a in answers] == [200] * 5 + [429] * 2
    refused = answers[5]
    assert refused.json()["code"] == "rate_limited"
    wait = int(refused.headers["retry-after"])  # delay-seconds: a whole number
    assert 1 <= wait <= 60
    assert client.get("/v1/devices", headers=bearer(quiet)).status_code == 200


def test_a_body_over_the_limit_gets_413_and_changes_nothing(engine: sa.Engine) -> None:
    settings = Settings.model_validate({"api_max_body_bytes": 2048})
    app = create_app(engine, settings=settings)
    key = bearer(create_key(engine, "w", "write"))
    big = {"label": "x" * 3000}
    client = TestClient(app)
    declared = client.put("/v1/devices/big-1", json=big, headers=key)
    assert declared.status_code == 413 and declared.json()["code"] == "body_too_large"
    with served(app) as base:
        # Sent in chunks without a Content-Length: counted as it arrives.
        payload = httpx.Response(200, json=big).content

        def pieces() -> Iterator[bytes]:
            for k in range(0, len(payload), 500):
                yield payload[k : k + 500]

        chunked = httpx.put(f"{base}/v1/devices/big-2", content=pieces(), headers=key)
    assert chunked.status_code == 413 and chunked.json()["code"] == "body_too_large"
    with engine.connect() as conn:
        assert conn.execute(sa.select(sa.func.count()).select_from(db.devices)).scalar() == 0
    small = client.put("/v1/devices/small", json={"label": "ok"}, headers=key)
    assert small.status_code == 200


def test_page_size_bounded_by_the_settings_and_stated_in_the_document(engine: sa.Engine) -> None:
    client = limited(engine, api_max_page_size=50)
    key = bearer(create_key(engine, "r", "read"))
    assert client.get("/v1/devices", params={"limit": 50}, headers=key).status_code == 200
    over = client.get("/v1/devices", params={"limit": 51}, headers=key)
    assert over.status_code == 422
    assert (over.json()["field"], over.json()["location"]) == ("limit", "query")
    document = client.get("/openapi.json").json()
    params = document["paths"]["/v1/devices"]["get"]["parameters"]
    assert next(p for p in params if p["name"] == "limit")["schema"]["maximum"] == 50


def test_raw_readings_span_bounded_by_the_settings(engine: sa.Engine) -> None:
    fleet = populate(engine)
    client = limited(engine, api_max_range_days=1)
    key = bearer(fleet.keys["read"])
    two_days = {"start": "2026-09-20T00:00:00Z", "end": "2026-09-22T00:00:00Z"}
    one_day = {"start": "2026-09-21T00:00:00Z", "end": "2026-09-22T00:00:00Z"}
    for path in ("/v1/devices/cab-n1/readings", "/v1/devices/cab-n1/export/readings.csv"):
        over = client.get(path, params=two_days, headers=key)
        assert over.status_code == 422 and over.json()["field"] == "end", path
        assert client.get(path, params=one_day, headers=key).status_code == 200, path
