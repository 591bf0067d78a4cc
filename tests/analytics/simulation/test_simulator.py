"""Checks of the fleet simulator against the physics core and against itself.

References:
- First law for a closed control volume (cabinet air + contents + module):
  Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., Wiley, 2007, ch. 1.3.
- Module energy balance Qh = Qc + P: Goldsmid, Introduction to Thermoelectricity, 2010, ch. 2.
- Steady state of the whole cooler: ``heat_paths.operating_point`` (tested against Holman,
  Incropera and scipy in test_heat_paths.py).
- Backward Euler is first-order accurate (common practice, no source): halving the sub-step
  roughly halves the error.
- Module parameters from maximum ratings: S. Lineykin, S. Ben-Yaakov, IEEE Trans. Ind. Appl.
  43(2), 505-512, 2007: S = Vmax/Th, R = Vmax(Th-ΔTmax)/(Imax·Th),
  K = Imax·Vmax(Th-ΔTmax)/(2·Th·ΔTmax).
- Hot- and cold-side rises through a thermal resistance, ΔT = Q·r: Incropera et al. 2007, ch. 3.
- Terminal voltage V = S·ΔT + I·R: Goldsmid 2010, ch. 2.
- 2-8 °C, the storage range of refrigerated medicines and vaccines (WHO cold-chain guidance,
  from memory).
"""

from __future__ import annotations

import json
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from tecfleet.analytics import heat_paths as hp
from tecfleet.analytics import physics as ph
from tecfleet.analytics import simulation as sm
from tecfleet.analytics.simulation import FileSink, demo_fleet, encode, publish_fleet
from tecfleet.ingest.payload import parse_message

START = 1_780_000_000.0  # a fixed instant in 2026
DAY = 86_400.0
T0 = 273.15


def quiet(device: sm.DeviceSpec, **kw: object) -> sm.DeviceSpec:
    """Constant ambient, no doors, no loads, no cuts."""
    base = {
        "t_amb_daily_k": 0.0,
        "t_amb_weather_k": 0.0,
        "door_per_day": 0.0,
        "loads_per_day": 0.0,
        "cuts_per_30d": 0.0,
    }
    base.update(kw)
    return replace(device, **base)  # type: ignore[arg-type]


def fridge(device_id: str = "unit-1", **kw: object) -> sm.DeviceSpec:
    """A 40 L single-module 12 V fridge from the standard ratings."""
    d = sm.device_from_ratings(
        device_id,
        ua=0.45,
        r_hot=0.22,
        r_cold=0.4,
        c_air=900.0,
        c_contents=12_000.0,
        t_amb_mean_c=22.0,
    )
    return replace(d, **kw) if kw else d  # type: ignore[arg-type]


def run(spec: sm.FleetSpec, days: float) -> tuple[sm.Chunk, sm.FleetTruth]:
    chunks, truth = sm.simulate(spec, days)
    return sm.concat(chunks), truth


# --- physics core ------------------------------------------------------------------------


def test_inlined_temperature_dependence_matches_physics_core() -> None:
    # The sub-step loop inlines the linear laws for speed; they must be the core's.
    tm = np.array([260.0, 298.15, 330.0])
    s = 0.049 * (1.0 + sm.BETA_S * (tm - sm.T25_K))
    r = 1.9 * (1.0 + sm.ALPHA_R * (tm - sm.T25_K))
    np.testing.assert_allclose(s, ph.seebeck_at_temperature(0.049, tm), rtol=1e-15)
    np.testing.assert_allclose(r, ph.resistance_at_temperature(1.9, tm), rtol=1e-15)


def test_standard_module_is_plausible() -> None:
    # Reference: the closed-form inversion of Imax, Vmax, ΔTmax (Lineykin & Ben-Yaakov 2007)
    # at Th = 27 °C gives S 0.0490 V/K, R 1.90 ohm, K 0.511 W/K. The bands are those values
    # within about 10 % (K: -12 %, +17 %): with Qmax as well the ratings are reconciled by a
    # fit that may move them by as much as the Qmax mismatch it accepts (10 %); the width is
    # common practice, no source.
    rt = sm.STANDARD_RATINGS
    th = rt["t_hot_rated_c"] + T0
    s_ref = rt["v_max_v"] / th
    r_ref = rt["v_max_v"] * (th - rt["dt_max_k"]) / (rt["i_max_a"] * th)
    k_ref = rt["i_max_a"] * rt["v_max_v"] * (th - rt["dt_max_k"]) / (2 * th * rt["dt_max_k"])
    assert 1.7 < r_ref < 2.1 and 0.045 < s_ref < 0.052 and 0.45 < k_ref < 0.6
    d = sm.device_from_ratings("x")
    assert 1.7 < d.r25 < 2.1 and 0.045 < d.s25 < 0.052 and 0.45 < d.k < 0.6
    two = sm.device_from_ratings("y", dict(sm.STANDARD_RATINGS, count=2))
    assert two.r25 == pytest.approx(2 * d.r25) and two.s25 == pytest.approx(2 * d.s25)


def test_first_law_closes_every_step() -> None:
    # Heat in (walls + door, internal, warm loads, electrical) = heat out (hot face) + heat
    # stored (air, contents and, on every other unit, sinks that store heat), per device and
    # per output step. The implicit scheme evaluates
    # every flux at the same end-of-sub-step state, so the balance is exact up to rounding:
    # stored heat is a difference of C·T terms of about 1e7 J, whose float64 rounding is
    # about 1e-9 J, hence 1e-6 J absolute against steps moving about 1e3-1e4 J.
    spec = sm.random_fleet(
        12, seed=3, start_s=START, days=3, faults="wear:1,leak:1,fan:1,inner_fan:1,sag:1"
    )
    devices = tuple(
        replace(d, c_cold_sink=150.0, c_hot_sink=400.0) if j % 2 else d
        for j, d in enumerate(spec.devices)
    )
    spec = replace(
        spec,
        devices=devices,
        events=(
            sm.ScheduledEvent("power_cut", "tec-0001", START + DAY, 7200.0),
            sm.ScheduledEvent("load", "tec-0002", START + DAY, 0, 0.5),
        ),
    )
    chunk, truth = run(spec, 3)
    e = chunk.energy
    residual = (
        e["wall"] + e["internal"] + e["loads"] + e["electrical"] - e["rejected"] - e["stored"]
    )
    assert np.abs(residual).max() < 1e-6
    assert np.abs(e["electrical"]).max() > 1e3  # the check is not vacuous
    assert truth.power_cuts.get("tec-0001") and truth.loads.get("tec-0002")
    # over the whole run as well
    assert abs(residual.sum()) < 1e-4


def test_integration_error_is_first_order_and_small() -> None:
    # The same cooler with 20 s, 10 s and 2 s sub-steps: air temperatures agree within 0.2 K
    # at 20 s (thermostat switching shifts by at most a sub-step), and the error shrinks with
    # the step. With sinks that store heat (150 J/K cold, 400 J/K hot: time constants of
    # about a minute, three 20-s steps) within 0.2 K at both steps; where the thermostat
    # switches there shifts by a step too, so the error need not shrink every time.
    _converges(quiet(fridge()), shrinks=True)
    _converges(quiet(fridge(c_cold_sink=150.0, c_hot_sink=400.0)), shrinks=False)


def _converges(dev: sm.DeviceSpec, *, shrinks: bool) -> None:
    traces = {}
    for h in (20.0, 10.0, 2.0):
        spec = sm.FleetSpec((dev,), START, seed=1, sensors=False, max_substep_s=h)
        chunk, _ = run(spec, 0.5)
        traces[h] = chunk.truth["t_contents"][:, 0]
    err20 = np.abs(traces[20.0] - traces[2.0]).max()
    err10 = np.abs(traces[10.0] - traces[2.0]).max()
    assert err20 < 0.2 and err10 < 0.2
    assert err10 < err20 or not shrinks


@pytest.mark.parametrize(("current", "t_amb_c"), [(2.0, 22.0), (3.5, 30.0), (5.0, 15.0)])
def test_steady_state_matches_operating_point(current: float, t_amb_c: float) -> None:
    # Constant ambient, constant current (proportional control with no gain), no doors: after
    # ten cabinet time constants the simulator sits at heat_paths.operating_point. The lagged
    # S, R and current vanish at steady state; what remains is the transient e^-10 and
    # rounding, hence 1e-3 K.
    dev = quiet(
        fridge(),
        control="proportional",
        kp_a_per_k=0.0,
        i_bias_a=current,
        v_supply=48.0,
        t_amb_mean_c=t_amb_c,
        q_internal=1.0,
    )
    spec = sm.FleetSpec((dev,), START, seed=2, sensors=False)
    chunk, _ = run(spec, 4)
    op = hp.operating_point(
        t_amb_c + T0,
        ph.ModuleParameters(dev.s25, dev.r25, dev.k),
        dev.r_hot,
        dev.r_cold,
        dev.ua,
        current=current,
        q_internal=dev.q_internal,
        alpha=ph.BI2TE3_RESISTANCE_TEMPCO,
        beta=ph.BI2TE3_SEEBECK_TEMPCO,
    )
    tr = chunk.truth
    assert tr["t_air"][-1, 0] + T0 == pytest.approx(op.t_cabinet, abs=1e-3)
    assert tr["t_cold"][-1, 0] + T0 == pytest.approx(op.tc, abs=1e-3)
    assert tr["t_hot"][-1, 0] + T0 == pytest.approx(op.th, abs=1e-3)
    assert tr["voltage"][-1, 0] == pytest.approx(op.voltage, abs=1e-4)


# --- behaviour ------------------------------------------------------------------------------


def test_healthy_unit_holds_its_setpoint() -> None:
    dev = fridge(setpoint_c=5.0, t_amb_mean_c=23.0)
    spec = sm.FleetSpec((dev,), START, seed=4, random_use=True)
    chunk, truth = run(spec, 3)
    t_air = chunk.truth["t_air"][1440:, 0]  # after the first day
    # The thermostat cycles within setpoint ± hysteresis (1 K, the DeviceSpec default); doors
    # and loads skew the cycle warm, so the median within 0.6 K of the setpoint (common
    # practice, no source).
    assert abs(np.median(t_air) - 5.0) < 0.6
    # 2-8 °C (WHO, from memory) for all but 1 % of the time: doors (8 a day, 25 s on
    # average, the DeviceSpec defaults) and loads are the only disturbances.
    assert np.mean((t_air > 2.0) & (t_air < 8.0)) > 0.99
    duty = chunk.truth["on"][1440:, 0].mean()
    # A unit sized for its cabinet runs between a fifth and nearly all of the time: below
    # that the module is oversized, above it the setpoint cannot be held through a door
    # opening (common practice, no source).
    assert 0.2 < duty < 0.95
    assert not truth.excursions.get("unit-1")


def _pair(fault: sm.Fault, days: float = 3, **dev_kw: object) -> tuple[sm.Chunk, sm.Chunk]:
    """The same unit and seed without and with ``fault``: identical noise, identical use."""
    dev = fridge(**dev_kw)
    base = sm.FleetSpec((dev,), START, seed=5)
    healthy, _ = run(base, days)
    faulty, _ = run(replace(base, faults=(fault,)), days)
    return healthy, faulty


#: Twin units side by side: same ambient (daily cycle, no weather), no random use, so every
#: difference between a column and its healthy twin comes from the fault.
_TWINS = {
    "ok": ("thermostat", None),
    "leak": ("thermostat", ("leak", 1.6)),
    "fan": ("thermostat", ("fan", 3.0)),
    "inner_fan": ("thermostat", ("inner_fan", 2.5)),
    "sag": ("thermostat", ("sag", 0.8)),
    "ok_p": ("proportional", None),
    "wear_p": ("proportional", ("wear", 1.15)),
}


@pytest.fixture(scope="module")
def twins() -> dict[str, dict[str, np.ndarray]]:
    devices, faults = [], []
    for name, (control, fault) in _TWINS.items():
        devices.append(quiet(fridge(name, control=control), t_amb_daily_k=2.0))
        if fault is not None:
            faults.append(sm.Fault(fault[0], name, START + DAY, magnitude=fault[1]))
    spec = sm.FleetSpec(tuple(devices), START, seed=5, faults=tuple(faults), random_use=False)
    chunk, _ = run(spec, 3)
    k = 2 * 1440  # the last day, a day after the faults began
    out = {}
    for i, name in enumerate(_TWINS):
        col = {key: v[k:, i] for key, v in chunk.measured.items()}
        col.update({"true_" + key: v[k:, i] for key, v in chunk.truth.items()})
        col["on_mask"] = col["current"] > 0.5
        out[name] = col
    return out


def _median_on(col: dict[str, np.ndarray], values: np.ndarray) -> float:
    return float(np.median(values[col["on_mask"]]))


def test_twins_share_their_ambient(twins: dict[str, dict[str, np.ndarray]]) -> None:
    for name in _TWINS:
        np.testing.assert_allclose(twins[name]["true_t_ambient"], twins["ok"]["true_t_ambient"])


def test_wear_raises_v_over_i_and_leaves_the_hot_side_alone(
    twins: dict[str, dict[str, np.ndarray]],
) -> None:
    # R25 +15 %: V/I = R + S·ΔT/I (Goldsmid 2010) grows by less, since S·ΔT/I stays; more
    # than 8 % because I·R is most of V at these currents (common practice, no source). The
    # hot-side rise Qh·r_hot (Incropera 2007) moves only by the extra Joule heat: within 15 %.
    ok, worn = twins["ok_p"], twins["wear_p"]
    ratio = [_median_on(c, c["voltage"] / np.maximum(c["current"], 1e-3)) for c in (ok, worn)]
    assert ratio[1] / ratio[0] > 1.08
    rise = [_median_on(c, c["true_t_hot"] - c["true_t_ambient"]) for c in (ok, worn)]
    assert rise[1] / rise[0] == pytest.approx(1.0, abs=0.15)


def test_hot_fan_failure_raises_hot_side_rise(twins: dict[str, dict[str, np.ndarray]]) -> None:
    # rise = Qh·r_hot (Incropera 2007) with r_hot x3; Qh falls a little as the voltage drive
    # pushes less current across the larger ΔT, so more than 1.8x rather than 3x (common
    # practice, no source for the margin).
    ok, bad = twins["ok"], twins["fan"]
    rise = [_median_on(c, c["t_hot"] - c["t_ambient"]) for c in (ok, bad)]
    assert rise[1] > 1.8 * rise[0]


def test_leak_raises_duty_cycle_not_resistance(twins: dict[str, dict[str, np.ndarray]]) -> None:
    # Duty ≈ heat load / capacity: UA x1.6 raises the wall load (the larger share of the load
    # at ΔT of about 17 K) by 60 %; more than 15 % leaves room for the internal load and the
    # capacity changing (common practice, no source). Resistance and hot-side rise do not
    # depend on UA: within the scatter of the thermostat's on-samples, 4 % and 10 %.
    ok, leaky = twins["ok"], twins["leak"]
    duty = [c["true_on"].mean() for c in (ok, leaky)]
    assert duty[1] > duty[0] * 1.15
    ratio = [_median_on(c, c["voltage"] / np.maximum(c["current"], 1e-3)) for c in (ok, leaky)]
    assert ratio[1] / ratio[0] == pytest.approx(1.0, abs=0.04)
    rise = [_median_on(c, c["true_t_hot"] - c["true_t_ambient"]) for c in (ok, leaky)]
    assert rise[1] / rise[0] == pytest.approx(1.0, abs=0.1)


def test_inner_fan_failure_widens_cabinet_to_cold_face_gap(
    twins: dict[str, dict[str, np.ndarray]],
) -> None:
    # gap = Qc·r_cold (Incropera 2007) with r_cold x2.5; Qc falls as the cold face gets
    # colder, so more than 1.8x (common practice, no source for the margin).
    gap = [
        _median_on(c, c["true_t_air"] - c["true_t_cold"]) for c in (twins["ok"], twins["inner_fan"])
    ]
    assert gap[1] > 1.8 * gap[0]


def test_supply_sag_lowers_the_drive_current(twins: dict[str, dict[str, np.ndarray]]) -> None:
    # I = (V - S·ΔT)/R (Goldsmid 2010): V x0.8 lowers I by at least 20 % at the same ΔT;
    # less than 0.9x leaves room for ΔT shrinking with the weaker drive (common practice,
    # no source for the margin).
    cur = [_median_on(c, c["current"]) for c in (twins["ok"], twins["sag"])]
    assert cur[1] < 0.9 * cur[0]


@pytest.mark.parametrize("mode", ["drift", "stuck", "dropout"])
def test_sensor_faults_touch_only_their_channel(mode: str) -> None:
    magnitude = {"drift": 3.0, "stuck": 1.0, "dropout": 0.1}[mode]
    fault = sm.Fault(
        "sensor",
        "unit-1",
        START + DAY,
        magnitude=magnitude,
        ramp_s=DAY if mode == "drift" else 0.0,
        channel="t_hot",
        mode=mode,
    )
    ok, bad = _pair(fault, days=3)
    for name in sm.CHANNELS:
        if name != "t_hot":
            np.testing.assert_array_equal(ok.measured[name], bad.measured[name])
    np.testing.assert_array_equal(ok.truth["t_hot"], bad.truth["t_hot"])
    diff = bad.measured["t_hot"][:, 0] - ok.measured["t_hot"][:, 0]
    assert np.all(diff[:1440] == 0)
    # drift: 3 K, each reading rounded to the 0.1 K quantum (sm.QUANTUM), so the
    # difference of two readings is off by at most 0.1 K (+ float rounding)
    # dropout: a binomial share, p = 0.1 over 2880 samples (sd 0.006); ±0.05 is far outside
    # chance.
    if mode == "drift":
        assert diff[-1] == pytest.approx(3.0, abs=0.11)
    elif mode == "stuck":
        assert np.unique(bad.measured["t_hot"][1440:, 0]).size == 1
    else:
        share = np.mean(bad.measured["t_hot"][1440:, 0] == sm.PROBE_ERROR_C)
        assert 0.05 < share < 0.15


def test_offline_device_sends_nothing_in_its_window() -> None:
    fault = sm.Fault("offline", "unit-1", START + DAY, end_s=START + 1.5 * DAY)
    ok, off = _pair(fault, days=2)
    assert not off.present[1440:2160, 0].any()
    # outside the window only missed samples are absent: p_missed 0.2 % (DeviceSpec default)
    assert off.present[2160:, 0].mean() > 0.95 and off.present[:1440, 0].mean() > 0.95
    np.testing.assert_array_equal(ok.truth["t_air"], off.truth["t_air"])


def test_off_voltage_is_open_circuit_or_zero() -> None:
    for mode in ("open_circuit", "zero"):
        spec = sm.FleetSpec((fridge(off_voltage=mode, sensor_noise=(0.0,) * 7),), START, seed=6)
        chunk, _ = run(spec, 1)
        off = chunk.truth["current"][:, 0] == 0
        v_off = chunk.measured["voltage"][off, 0]
        if mode == "zero":
            assert np.all(v_off == 0.0)
        else:
            # open circuit: V = S·ΔT (Goldsmid 2010), here with S at 25 °C; S(T) differs by
            # BETA_S·(Tm - 25 °C), about 2 % of readings below 1 V, plus the 0.01 V quantum:
            # 0.1 V is a generous margin (common practice, no source)
            dt = chunk.truth["t_hot"][off, 0] - chunk.truth["t_cold"][off, 0]
            assert np.median(v_off) > 0.1
            np.testing.assert_allclose(v_off, np.round(spec.devices[0].s25 * dt, 2), atol=0.1)


def test_terminal_voltage_follows_the_faces_of_the_same_instant() -> None:
    # V = S(Tm)·ΔT + I·R(Tm) at every sample (Goldsmid 2010, ch. 2), also on the sample right
    # after a switch-on, when the faces move by tens of kelvin within one interval.
    spec = sm.FleetSpec((quiet(fridge(), t_amb_mean_c=30.0),), START, seed=8)
    chunk, _ = run(spec, 0.5)
    tr, d = chunk.truth, spec.devices[0]
    tc, th, cur = (
        tr[k][:, 0] + (T0 if k != "current" else 0.0) for k in ("t_cold", "t_hot", "current")
    )
    on = cur > 0.0
    switched_on = on[1:] & ~on[:-1]
    assert switched_on.sum() >= 3  # the check must include switch-on samples
    s = ph.seebeck_at_temperature(d.s25, 0.5 * (tc + th))
    r = ph.resistance_at_temperature(d.r25, 0.5 * (tc + th))
    expected = s * (th - tc) + cur * r
    np.testing.assert_allclose(tr["voltage"][on, 0], expected[on], rtol=1e-9)


# --- determinism, truth, payloads -----------------------------------------------------------


def _fleet(seed: int) -> sm.FleetSpec:
    return sm.random_fleet(
        6, seed=seed, start_s=START, days=2, faults="wear:1,leak:1,fan:1,sensor:1,offline:1"
    )


def test_goods_go_in_through_the_door() -> None:
    # Loading a cabinet means opening it (common practice, no source): every load the
    # simulator records comes with the door open in that sampling interval.
    spec = _fleet(11)
    spec = replace(spec, devices=tuple(replace(d, loads_per_day=6.0) for d in spec.devices))
    chunk, truth = run(spec, 2)
    loads = [(dev, t) for dev, times in truth.loads.items() for t in times]
    assert len(loads) > 10
    for dev, t in loads:
        i, k = spec.device_ids.index(dev), int(np.searchsorted(chunk.t, t))
        assert chunk.truth["door_s"][k, i] > 0.0


def test_same_seed_same_data_different_seed_different_data() -> None:
    a, _ = run(_fleet(11), 2)
    b, _ = run(_fleet(11), 2)
    c, _ = run(_fleet(12), 2)
    for name in sm.CHANNELS:
        np.testing.assert_array_equal(a.measured[name], b.measured[name])
    np.testing.assert_array_equal(a.ts, b.ts)
    assert not np.array_equal(a.measured["t_cabinet"], c.measured["t_cabinet"])


def test_chunking_does_not_change_the_data() -> None:
    spec = _fleet(13)
    whole = sm.Simulator(spec).run(2880)
    sim = sm.Simulator(spec)
    parts = sm.concat([sim.run(k) for k in (1, 500, 7, 1440, 932)])
    for name in sm.CHANNELS:
        np.testing.assert_array_equal(whole.measured[name], parts.measured[name])
    np.testing.assert_array_equal(whole.present, parts.present)


def test_truth_follows_faults_and_round_trips_to_json(tmp_path: Path) -> None:
    spec = sm.FleetSpec(
        (fridge("a"), fridge("b")),
        START,
        faults=(
            sm.Fault("wear", "a", START + DAY, magnitude=1.1, ramp_s=2 * DAY),
            sm.Fault("leak", "b", START + DAY, magnitude=1.6),
        ),
    )
    _, truth = run(spec, 4)
    r0 = spec.devices[0].r25
    assert truth.params_at("a", START)["r25"] == pytest.approx(r0)
    assert truth.params_at("a", START + 2 * DAY)["r25"] == pytest.approx(r0 * 1.05)
    assert truth.params_at("a", START + 4 * DAY)["r25"] == pytest.approx(r0 * 1.1)
    assert truth.params_at("b", START + 1.5 * DAY)["ua"] == pytest.approx(spec.devices[1].ua * 1.6)
    assert truth.params_at("b", START + 1.5 * DAY)["r_hot"] == spec.devices[1].r_hot
    path = tmp_path / "truth.json"
    truth.write_json(str(path), end_s=START + 4 * DAY)
    doc = json.loads(path.read_text())
    series = doc["devices"]["a"]["series"]
    ts = np.array([row["ts"] for row in series])
    r25 = np.array([row["resistance_25c_ohm"] for row in series])
    assert np.interp(START + 2.5 * DAY, ts, r25) == pytest.approx(r0 * 1.075)
    assert doc["devices"]["b"]["faults"][0]["alert_kind"] == "heat_leak"


def test_every_payload_parses_without_rejects(tmp_path: Path) -> None:
    spec = _fleet(21)
    spec = replace(spec, faults=tuple(f for f in spec.faults if f.mode != "dropout"))
    sim = sm.Simulator(spec)
    chunk = sim.run(2880)
    now = START + 2 * DAY
    rows = chunk.payload_rows()
    n_readings = 0
    for i, device_id in enumerate(chunk.device_ids):
        readings = [r[i] for r in rows if r[i] is not None]
        topic = f"tecfleet/{device_id}/telemetry"
        for batch in (readings[:1], readings[1:241], readings[241:]):
            parsed = parse_message(topic, encode(batch), prefix="tecfleet", now_s=now)
            assert parsed.rejects == []
            assert len(parsed.readings) == len(batch)
            n_readings += len(batch)
    assert n_readings == int(chunk.present.sum())
    # the file sink writes the same readings
    sink = FileSink(str(tmp_path / "out.jsonl"))
    publish_fleet(spec, sink, end_s=START + 0.1 * DAY, batch=50)
    sink.close()
    lines = (tmp_path / "out.jsonl").read_text().splitlines()
    # 6 devices x 144 steps, less missed samples (0.2 %) and an offline fault, if it falls
    # in the first 0.1 day (common practice, no source for the 5 % allowance)
    assert len(lines) > 0.95 * 6 * 144
    assert json.loads(lines[0])["device_id"].startswith("tec-")


def test_dropout_values_are_refused_by_design() -> None:
    dev = fridge()
    fault = sm.Fault("sensor", "unit-1", START, magnitude=0.5, channel="t_cabinet", mode="dropout")
    chunk = sm.Simulator(sm.FleetSpec((dev,), START, faults=(fault,))).run(200)
    rows = [r[0] for r in chunk.payload_rows() if r[0] is not None]
    parsed = parse_message(
        "tecfleet/unit-1/telemetry", encode(rows), prefix="tecfleet", now_s=START + DAY
    )
    assert parsed.rejects and all(r.code == "out_of_range" for r in parsed.rejects)


# --- demo scenario ---------------------------------------------------------------------------


def test_demo_fleet_has_its_units_registrations_and_developed_faults() -> None:
    now = START + 14 * DAY
    spec, registrations = demo_fleet(7, now_s=now)
    assert len(spec.devices) == 24 and set(registrations) == set(spec.device_ids)
    for body in registrations.values():
        assert set(body) == {"label", "site", "module", "cabinet"}
        assert set(body["module"]) == {
            "couples",
            "i_max_a",
            "v_max_v",
            "dt_max_k",
            "q_max_w",
            "t_hot_rated_c",
            "count",
        }
        assert set(body["cabinet"]) == {"volume_l", "setpoint_c", "low_limit_c", "high_limit_c"}
    truth = sm.FleetTruth(spec)
    base = {d.device_id: d for d in spec.devices}
    assert truth.params_at("kv-fer-med02", now)["r25"] == pytest.approx(
        base["kv-fer-med02"].r25 * 1.08
    )
    assert truth.params_at("kv-ald-smp01", now)["ua"] == pytest.approx(
        base["kv-ald-smp01"].ua * 1.6
    )
    assert truth.params_at("kv-sto-med01", now)["r_hot"] == pytest.approx(
        base["kv-sto-med01"].r_hot * 3
    )
    again, _ = demo_fleet(7, now_s=now)
    assert again == spec


@pytest.mark.slow
def test_demo_history_shows_the_excursion_and_healthy_units_hold() -> None:
    now = START + 14 * DAY
    spec, registrations = demo_fleet(7, now_s=now)
    chunk, truth = run(spec, 14)
    assert truth.excursions.get("kv-mil-med02")
    start, _end = truth.excursions["kv-mil-med02"][0]
    # a closed medicine fridge without power leaves 2-8 °C within a few hours of the cut
    # (common practice, no source)
    assert abs(start - (now - 2 * DAY)) < 3 * 3600
    faulty = {f.device_id for f in spec.faults} | {"kv-mil-med02"}
    for i, device_id in enumerate(chunk.device_ids):
        cab = registrations[device_id]["cabinet"]
        t_air = chunk.truth["t_air"][1440:, i]
        inside = np.mean((t_air >= cab["low_limit_c"]) & (t_air <= cab["high_limit_c"]))
        if device_id not in faulty:
            # doors, loads and short random power cuts take a healthy unit out of its
            # limits for at most a few percent of the time (common practice, no source)
            assert inside > 0.97, device_id
