"""GET /v1/devices/{id}/health serves the newest estimates in the contract's shape."""

from __future__ import annotations

import math

import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.analytics import runner
from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest import db
from tests.analytics.runner.test_runner import CONTRACT_KEYS
from tests.analytics.synthetic import Truth, simulate


def test_health_has_every_contract_key_after_analysis(sqlite_url: str) -> None:
    engine = db.make_engine(sqlite_url)
    db.migrate(engine)
    frame = simulate(Truth(), 2.0, seed=3, door_every_h=8.0)
    db.store_batch(
        engine,
        [
            db.Reading("unit-h", int(r.ts_ms), float(r.t_cabinet), float(r.t_cold),
                          float(r.t_hot), float(r.t_ambient), float(r.current), float(r.voltage))
            for r in frame.itertuples()
        ],
    )  # fmt: skip
    client = TestClient(create_app(engine))
    headers = {"Authorization": f"Bearer {create_key(engine, 'r', 'read')}"}
    assert client.get("/v1/devices/unit-h/health", headers=headers).json() == {}
    runner.analyze(engine)
    health = client.get("/v1/devices/unit-h/health", headers=headers).json()
    for key in CONTRACT_KEYS:
        estimate = health[key]
        assert isinstance(estimate["value"], float) and math.isfinite(estimate["value"]), key
        assert estimate["stderr"] is None or estimate["stderr"] >= 0
        assert isinstance(estimate["n"], int) and estimate["n"] > 0
    history = client.get(
        "/v1/devices/unit-h/estimates/module.resistance_25c_ohm", headers=headers
    ).json()["items"]
    with engine.connect() as c:
        stored = c.execute(
            sa.select(sa.func.count())
            .select_from(db.estimates)
            .where(db.estimates.c.key == "module.resistance_25c_ohm")
        ).scalar_one()
    assert len(history) == stored > 1
    assert client.get("/v1/devices/ghost/health", headers=headers).status_code == 404
    assert client.get("/v1/devices/unit-h/health").status_code == 401
