"""The cabinet probe judged without a cold-face probe, from a floating module's open-circuit
voltage: the runner serves its shift, and UA's flag is held where it moved.

Readings from the fleet simulator (test data only), the truth its fault: a cabinet probe
drifting +3 K over two days. The reference is the cold side's balance at I = 0: the cabinet
air gives the cold face Qc = −K·ΔT through r_cold (H. J. Goldsmid, *Introduction to
Thermoelectricity*, 2010, ch. 2), which no change of the cabinet's heat leak moves, while a
drifting probe adds its drift to T_cab − Tc.
"""

from __future__ import annotations

from pathlib import Path

from sqlalchemy.engine import Engine

from tecfleet.analytics import runner
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.runner import AnalysisSettings
from tecfleet.analytics.runner.state import DeviceState
from tecfleet.analytics.runner.tracks import (
    FLAGS_HELD_CABINET_PROBE_MOVED,
    cabinet_moved,
    faces_judged,
)
from tecfleet.ingest.db.analysis import read_states
from tests.fleet_fixture import analysed_fleet

START_S = 1_735_689_600.0
DAYS = 5.0
DRIFT_AT_S = START_S + 2.0 * 86_400.0


def _analysed(tmp_path: Path) -> Engine:
    unit = {"sensor_set": "no_cold", "off_voltage": "open_circuit", "cuts_per_30d": 0.0}
    spec = sim.FleetSpec(
        devices=(sim.DeviceSpec("cp-1", **unit), sim.DeviceSpec("cp-2", **unit)),
        start_s=START_S, interval_s=60.0, seed=207,
        faults=(sim.Fault("sensor", "cp-1", DRIFT_AT_S, magnitude=3.0, ramp_s=2 * 86_400.0,
                          channel="t_cabinet", mode="drift"),),
    )  # fmt: skip
    engine = analysed_fleet(f"{tmp_path}/cp.db", spec, DAYS)
    return engine


def test_the_cabinet_probe_shift_follows_a_drift_and_holds_uas_flag(tmp_path: Path) -> None:
    engine = _analysed(tmp_path)
    drifted = list(runner.estimate_history(engine, "cp-1", "probes.cabinet_shift_k", start_ms=0))
    steady = list(runner.estimate_history(engine, "cp-2", "probes.cabinet_shift_k", start_ms=0))
    assert drifted and steady, "no shift served for a floating unit without a cold probe"
    # Before the drift, and on the steady unit throughout, the shift stays within the
    # largest that lets UA flag (0.5 K); the last window (a day after the ramp ended) sees
    # the whole drift, within 0.3 K: probe noise, and the face read at the rated S.
    before = [r["value"] for r in drifted if r["at_ms"] <= DRIFT_AT_S * 1000]
    assert before and max(abs(v) for v in before) < 0.5
    assert max(abs(r["value"]) for r in steady) < 0.5
    assert abs(drifted[-1]["value"] - 3.0) < 0.3
    # The state the next window's UA judgement reads: moved on the drifting unit, so its
    # flag is held with the reason; in place on the steady one, so its flag may be raised.
    with engine.connect() as conn:
        states = read_states(conn, ["cp-1", "cp-2"])
    cfg = AnalysisSettings()
    moved, kept = (DeviceState.from_json(states[d]) for d in ("cp-1", "cp-2"))
    for state in (moved, kept):
        assert state.cabinet_shift_ms is not None
    assert cabinet_moved(moved, int(moved.cabinet_shift_ms or 0), cfg) is True
    assert cabinet_moved(kept, int(kept.cabinet_shift_ms or 0), cfg) is False
    assert faces_judged((False, True), True, "ua", True)[1] == FLAGS_HELD_CABINET_PROBE_MOVED
