"""A module's wear, a failed fan and a heat leak followed without any face probe, from the
switch-off steps and the voltage of a floating driver whose sinks hold heat.

Readings from the fleet simulator (test data only), the truth its parameters: R25 of one
unit rising 10 % over four days, its twin steady. The reference is the switch-off step
(T. C. Harman, J. Appl. Phys. 29, 1373, 1958): where the faces hold their temperature
across the switch, V_on - V_off = I·R; the open-circuit voltage relaxing over the minutes
after it shows they did. Sinks of 500/1500 J/K (cold/hot), aluminium of about half a
kilogram and a kilogram and a half (from memory).
"""

from __future__ import annotations

from pathlib import Path

from sqlalchemy.engine import Engine

from tecfleet.analytics import alerts, runner
from tecfleet.analytics import simulation as sim
from tecfleet.analytics.runner.hot_side import VOLTAGE_BASIS, VOLTAGE_NOTE
from tecfleet.analytics.runner.tracks import FLAGS_HELD_UA_RATED_S
from tecfleet.analytics.runner.window import PLACED_FACES
from tests.fleet_fixture import analysed_fleet, history, raised_flags_ms

START_S = 1_735_689_600.0
DAYS = 9.0
WEAR_AT_S = START_S + 3.0 * 86_400.0
SINKS = {"c_cold_sink": 500.0, "c_hot_sink": 1500.0}


def _twins(
    tmp_path: Path, fault: sim.Fault, twin: str, seed: int, days: float
) -> tuple[Engine, sim.FleetTruth]:
    # A floating unit with no face probe carrying ``fault`` beside a steady ``twin``, both
    # with sinks that hold heat, stored and analysed over ``days``.
    unit = {"sensor_set": "no_faces", "off_voltage": "open_circuit", "cuts_per_30d": 0.0}
    spec = sim.FleetSpec(
        devices=(
            sim.DeviceSpec(fault.device_id, **unit, **SINKS), sim.DeviceSpec(twin, **unit, **SINKS),
        ),
        start_s=START_S, interval_s=60.0, seed=seed, faults=(fault,),
    )  # fmt: skip
    engine = analysed_fleet(f"{tmp_path}/{fault.device_id}.db", spec, days)
    return engine, sim.Simulator(spec).truth


def test_wear_is_flagged_without_face_probes_where_the_sinks_hold_heat(tmp_path: Path) -> None:
    wear = sim.Fault("wear", "nf-1", WEAR_AT_S, magnitude=1.1, ramp_s=4 * 86_400.0)
    engine, truth = _twins(tmp_path, wear, "nf-2", 208, DAYS)
    end_s = START_S + DAYS * 86_400.0
    # The steady unit: R25 served as reliable and within 3 % of the truth (the target without
    # face probes), and no wear flag.
    steady = runner.latest_health(engine, "nf-2")["module.resistance_25c_ohm"]
    assert steady["reliable"], steady.get("reason")
    assert abs(steady["value"] / truth.params_at("nf-2", end_s)["r25"] - 1.0) <= 0.03
    flags = list(runner.estimate_history(engine, "nf-2", "module.resistance_25c.flag", start_ms=0))
    assert flags and max(r["value"] for r in flags) == 0.0
    # The wearing unit: flagged once R25 has risen past the flag's 4 %, and not before the
    # wear began.
    worn = list(runner.estimate_history(engine, "nf-1", "module.resistance_25c.flag", start_ms=0))
    raised = [r["at_ms"] / 1000.0 for r in worn if r["value"] == 1.0]
    assert raised, "no wear flag without face probes"
    assert raised[0] > WEAR_AT_S


def test_failed_fan_is_flagged_without_face_probes_where_the_sinks_hold_heat(
    tmp_path: Path,
) -> None:
    # A failed fan (the simulator's ``fan`` fault, r_hot 3x at day 5) on a floating unit with
    # no face probe, beside a steady twin. The hot sink's balance r_hot = ∫(Th - Ta)dt /
    # ∫Qh dt (Incropera et al. 2007, ch. 5) reads both faces from the voltage, placed by an
    # assumed ratio of the sinks (``diagnostics.unanchored_faces``): its level is off by a
    # steady factor, so the hours are served as not reliable, but a tripled r_hot about
    # doubles it and is flagged within the full set's 2 hours; the twin never is.
    fan_s = START_S + 5.0 * 86_400.0
    engine, _ = _twins(
        tmp_path, sim.Fault("fan", "nf-fan", fan_s, magnitude=3.0), "nf-ok", 209, 7.0
    )
    served = history(engine, "nf-ok", "hot_side.resistance_k_per_w")
    assert len(served) > 24
    assert all(r["reliable"] is False and r["note"] == VOLTAGE_NOTE for r in served)
    assert all(VOLTAGE_BASIS in r["basis"] for r in served)
    assert not raised_flags_ms(engine, "nf-ok", "hot_side.resistance")
    flags = raised_flags_ms(engine, "nf-fan", "hot_side.resistance")
    assert flags and fan_s * 1000 < flags[0] <= (fan_s + 2 * 3600.0) * 1000


def test_heat_leak_is_followed_without_face_probes_where_the_driver_floats(
    tmp_path: Path,
) -> None:
    # A heat leak (the simulator's ``leak`` fault, UA 1.5x at day 4) on a floating unit with
    # no face probe, beside a steady twin. The cabinet's balance, UA·(Ta - Tcab) + Qint =
    # Qc with Qc = S·I·Tc - ½·I²·R - K·ΔT (Goldsmid 2010, ch. 2; Incropera et al. 2007,
    # ch. 5), takes ΔT from the voltage, S and K from the ratings and the faces placed by an
    # assumed share of the sinks (``runner.data.placed_faces``): UA is served, never as
    # reliable, and its changes are followed: the leak's change passes the flag's 35 %
    # within the 48 h asked at one-minute readings, while the flag stays held with its
    # reason (the rated S) on both units.
    leak_s = START_S + 4.0 * 86_400.0
    leak = sim.Fault("leak", "nf-leak", leak_s, magnitude=1.5)
    engine, _ = _twins(tmp_path, leak, "nf-tight", 210, 7.0)
    for dev in ("nf-leak", "nf-tight"):
        served = history(engine, dev, "cabinet.ua_w_per_k")
        assert len(served) > 12
        assert all(r["reliable"] is False and PLACED_FACES in r["note"] for r in served)
        for key in ("module.conductance_w_per_k", "cold_side.resistance_k_per_w"):
            assert all(r["note"] == PLACED_FACES for r in history(engine, dev, key))
        flags = history(engine, dev, "cabinet.ua.flag")
        assert flags and all(r["value"] == 0.0 for r in flags)
        assert all(r["note"] == FLAGS_HELD_UA_RATED_S for r in flags)
    after = [
        r["value"]
        for r in history(engine, "nf-leak", "cabinet.ua.change_pct")
        if leak_s * 1000 < r["at_ms"] <= (leak_s + 48 * 3600.0) * 1000
    ]
    assert after and max(after) >= 35.0
    tight = [r["value"] for r in history(engine, "nf-tight", "cabinet.ua.change_pct")]
    assert tight and max(abs(v) for v in tight) < 35.0
    # A held change is served as not reliable, and the alert rules judge reliable changes
    # only: no heat-leak alert on either unit.
    assert not [c for c in alerts.evaluate(engine) if c.kind == "heat_leak"]
