"""A demo-like fleet in a database for the page's browser test and its benchmark: simulated
units (the project's own simulator, test data only) stored through the ingester's write path,
registered at invented sites, analysed and judged by the engine."""

from __future__ import annotations

import time
from typing import Any

import numpy as np
from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts, runner
from tecfleet.analytics import simulation as sim
from tecfleet.ingest import db

#: Invented site names for test fleets.
SITES = ("Quillmarsh Depot", "Vantry Hollow Clinic", "Orrindale Store")
#: Readings stored per simulator step (as in the benches).
CHUNK = 360


def fill(
    engine: Engine,
    n_devices: int,
    days: float,
    *,
    seed: int,
    faults: str | None = None,
    analyse: bool = True,
) -> list[str]:
    """Simulate ``n_devices`` units for ``days`` up to now, store, register and (optionally)
    analyse them; the device ids."""
    start_s = time.time() - days * 86_400.0
    spec = sim.random_fleet(n_devices, seed=seed, start_s=start_s, days=days, faults=faults)
    simulator = sim.Simulator(spec)
    ids = list(spec.device_ids)
    with engine.begin() as conn:
        conn.execute(
            db.devices.insert(),
            [
                {"device_id": d.device_id, "label": f"Test cooler {k + 1}",
                 "site": SITES[k % len(SITES)], "module": d.registration()["module"],
                 "cabinet": d.registration()["cabinet"], "readings": 0}
                for k, d in enumerate(spec.devices)
            ],
        )  # fmt: skip
    total = round(days * 86_400.0 / spec.interval_s)
    for _ in range(0, total, CHUNK):
        db.store_batch(engine, _readings(spec, simulator.run(CHUNK)))
    if analyse:
        runner.analyze(engine)
        alerts.evaluate(engine)
    return ids


def register(engine: Engine, spec: sim.FleetSpec, first_seen_ms: int | None) -> None:
    """Register ``spec``'s units with their modules' and cabinets' ratings, as in the field
    (no site, no readings yet), first seen at ``first_seen_ms`` (epoch ms UTC)."""
    with engine.begin() as conn:
        conn.execute(
            db.devices.insert(),
            [
                {"device_id": d.device_id, "module": d.registration()["module"],
                 "cabinet": d.registration()["cabinet"], "readings": 0,
                 "first_seen_ms": first_seen_ms}
                for d in spec.devices
            ],
        )  # fmt: skip


def stored_readings(spec: sim.FleetSpec, days: float) -> list[db.Reading]:
    """``days`` of ``spec`` simulated, as the readings the ingester stores."""
    simulator = sim.Simulator(spec)
    total = round(days * 86_400.0 / spec.interval_s)
    out: list[db.Reading] = []
    for done in range(0, total, CHUNK):
        out += _readings(spec, simulator.run(min(CHUNK, total - done)))
    return out


def analysed_fleet(path: str, spec: sim.FleetSpec, days: float) -> Engine:
    """A fresh SQLite database at ``path`` holding ``days`` of ``spec`` registered from its
    start, stored and analysed."""
    engine = db.make_engine(f"sqlite:///{path}")
    db.migrate(engine)
    register(engine, spec, int(spec.start_s * 1000))
    db.store_batch(engine, stored_readings(spec, days))
    runner.analyze(engine)
    return engine


def _readings(spec: Any, chunk: Any) -> list[db.Reading]:
    m = chunk.measured
    j, i = np.nonzero(chunk.present)
    ids = np.array(spec.device_ids)[i].tolist()
    ts = np.round(chunk.ts[j, i] * 1000.0).astype(np.int64).tolist()
    names = ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh")
    cols = [[None if v != v else v for v in m[n][j, i].tolist()] for n in names]
    door = (chunk.truth["door_s"] > 0)[j, i].tolist()
    return [
        db.Reading(d, t, *vals, rh=rh, door_open=dr)
        for d, t, *vals, rh, dr in zip(ids, ts, *cols, door, strict=True)
    ]


def history(engine: Engine, device_id: str, key: str) -> list[dict[str, Any]]:
    """Every stored estimate of ``key`` for ``device_id``, oldest first."""
    return list(runner.estimate_history(engine, device_id, key, start_ms=0))


def raised_flags_ms(engine: Engine, device_id: str, prefix: str) -> list[int]:
    """When the ``{prefix}.flag`` estimate of ``device_id`` stood raised [epoch ms UTC]."""
    return [r["at_ms"] for r in history(engine, device_id, f"{prefix}.flag") if r["value"] == 1.0]
