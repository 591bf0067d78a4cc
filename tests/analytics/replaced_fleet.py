"""A simulated fleet whose parts are replaced during maintenance, for the runner's and the
alert rules' tests: readings from the project's own simulator (test data only), stored through
the ingester's write path; the maintenance windows recorded as an engineer would.

Units, each at one-minute readings over ``DAYS`` from ``START_S``; at ``SWAP_S`` the part is
swapped inside a half-hour either side maintenance window:

* ``rp-mod`` and ``rp-mod-x`` (both face probes): the module is swapped for one whose R25 is
  8 % higher (the simulator's R25 stepped ×1.08); recorded on ``rp-mod`` only.
* ``rp-cab`` and ``rp-cab-x`` (no cold-face probe, the module floats when off): the cabinet
  probe is swapped for one reading 2 K higher (the simulator's cabinet probe stepped +2 K);
  recorded on ``rp-cab`` only.
* ``rp-fix`` (as ``rp-cab``): the cabinet probe reads 2 K high from ``FAULT_S`` (after the
  two commissioning days) and is replaced by one reading true at ``SWAP_S``; recorded.
"""

from __future__ import annotations

from pathlib import Path

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts
from tecfleet.analytics import simulation as sim
from tecfleet.ingest import db
from tests.fleet_fixture import register, stored_readings

DAY_S = 86_400.0
START_S = 1_735_689_600.0
DAYS = 8.0
FAULT_S = START_S + 2.5 * DAY_S
SWAP_S = START_S + 3.5 * DAY_S
#: The maintenance windows' end [ms]: the new part's history starts here.
END_MS = round(SWAP_S * 1000) + 1_800_000
RECORDED = {"rp-mod": ["module"], "rp-cab": ["cabinet_probe"], "rp-fix": ["cabinet_probe"]}
FLOATING = {"sensor_set": "no_cold", "off_voltage": "open_circuit", "cuts_per_30d": 0.0}


def _spec() -> sim.FleetSpec:
    def probe(device: str, at: float, end: float | None = None) -> sim.Fault:
        return sim.Fault(
            "sensor", device, at, magnitude=2.0, end_s=end, channel="t_cabinet", mode="drift"
        )

    return sim.FleetSpec(
        devices=(
            sim.DeviceSpec("rp-mod", cuts_per_30d=0.0),
            sim.DeviceSpec("rp-mod-x", cuts_per_30d=0.0),
            sim.DeviceSpec("rp-cab", **FLOATING),
            sim.DeviceSpec("rp-cab-x", **FLOATING),
            sim.DeviceSpec("rp-fix", **FLOATING),
        ),
        start_s=START_S, interval_s=60.0, seed=208,
        faults=(
            sim.Fault("wear", "rp-mod", SWAP_S, magnitude=1.08),
            sim.Fault("wear", "rp-mod-x", SWAP_S, magnitude=1.08),
            probe("rp-cab", SWAP_S), probe("rp-cab-x", SWAP_S), probe("rp-fix", FAULT_S, SWAP_S),
        ),
    )  # fmt: skip


def replaced_fleet(tmp_path: Path, split_ms: int | None = None) -> Engine:
    """The fleet stored in a fresh SQLite database under ``tmp_path`` with its maintenance
    windows recorded; not yet analysed. With ``split_ms``, the alerts are evaluated on the
    readings before it before the rest are stored (as a live run would)."""
    spec = _spec()
    engine = db.make_engine(f"sqlite:///{tmp_path / 'replaced.db'}")
    db.migrate(engine)
    register(engine, spec, int(START_S * 1000))
    for device, parts in RECORDED.items():
        alerts.add_maintenance(
            engine, END_MS - 3_600_000, END_MS, device_id=device, replaced=parts,
            reason="part swapped",
        )  # fmt: skip
    readings = stored_readings(spec, DAYS)
    if split_ms is not None:
        db.store_batch(engine, [r for r in readings if r.ts_ms < split_ms])
        alerts.evaluate(engine)
        readings = [r for r in readings if r.ts_ms >= split_ms]
    db.store_batch(engine, readings)
    return engine
