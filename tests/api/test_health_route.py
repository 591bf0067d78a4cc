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


def test_health_serves_basis_and_reason_without_face_probes(db_url: str) -> None:
    # A unit without face probes and with a zero-volt driver: V = I·R + S·ΔT (Goldsmid 2010,
    # ch. 2) cannot separate R from S without ΔT, so they are served as unknown with reason.
    engine = db.make_engine(db_url)
    db.migrate(engine)
    frame = simulate(Truth(floating=False), 1.5, seed=5, door_every_h=8.0)
    db.store_batch(
        engine,
        [
            db.Reading("unit-z", int(r.ts_ms), float(r.t_cabinet), None, None,
                       float(r.t_ambient), float(r.current), float(r.voltage))
            for r in frame.itertuples()
        ],
    )  # fmt: skip
    runner.analyze(engine)
    client = TestClient(create_app(engine))
    headers = {"Authorization": f"Bearer {create_key(engine, 'r', 'read')}"}
    health = client.get("/v1/devices/unit-z/health", headers=headers).json()
    r25 = health["module.resistance_25c_ohm"]
    assert r25["value"] is None and r25["reliable"] is False
    assert r25["reason"] == "R25 and S: zero-volt driver and no face probes, not separable"
    assert "no face probed" in r25["basis"]
    samples = health["quality.samples"]
    assert samples["value"] > 0 and samples["reason"] is None and "basis" in samples
    readings = client.get("/v1/devices/unit-z/readings", headers=headers).json()["items"]
    assert readings and readings[0]["t_cold"] is None and readings[0]["t_hot"] is None
