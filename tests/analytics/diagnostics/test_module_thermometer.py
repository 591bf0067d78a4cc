"""The module as its own thermometer, checked against outside references.

References named beside each check:
- H. J. Goldsmid, Introduction to Thermoelectricity, Springer, 2010, ch. 2: V = S·ΔT + I·R.
- T. C. Harman, J. Appl. Phys. 29, 1373 (1958): at a switch-off the ohmic part vanishes at
  once, the Seebeck part S·ΔT remains.
- The simulator's true face temperatures (simulated truth, not measurements).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from tecfleet.analytics import simulation as sim
from tecfleet.analytics._validate import T_25C_K
from tecfleet.analytics.diagnostics import module_thermometer as mt
from tecfleet.analytics.errors import InsufficientDataError
from tecfleet.analytics.runner.data import Readings, complete_faces, fill_cold_face, priors
from tecfleet.analytics.runner.settings import AnalysisSettings
from tecfleet.analytics.simulation.chunk import Chunk, concat

T0 = 273.15

# A hand-worked example of V = S·ΔT + I·R (Goldsmid 2010, ch. 2). Module: 127 couples of
# bismuth telluride at about 400 µV/K per couple (p and n legs about ±200 µV/K; from
# memory), so S = 127 × 400e-6 = 0.0508 V/K; R = 2.0 Ω and I = 3.0 A, ΔT = 30 K (a typical
# small module and operating point; from memory). By hand:
#   Seebeck part S·ΔT = 0.0508 × 30 = 1.524 V, ohmic part I·R = 3.0 × 2.0 = 6.0 V,
#   terminal voltage V = 7.524 V; open circuit after switch-off V_oc = 1.524 V;
#   Harman: R = (V_on - V_off)/I_on = (7.524 - 1.524)/3.0 = 2.0 Ω.
S_HAND, R_HAND, I_HAND, DT_HAND = 0.0508, 2.0, 3.0, 30.0
V_ON_HAND, V_OC_HAND = 7.524, 1.524


def test_hand_worked_voltage_gives_back_delta_t_driven_and_floating() -> None:
    # At a mean module temperature of 25 °C the temperature factors are 1, so ΔT must be the
    # hand-worked 30 K from V = 7.524 V driven and from V_oc = 1.524 V floating.
    dt, se = mt.reconstruct_delta_t(
        np.array([I_HAND, 0.0]), np.array([V_ON_HAND, V_OC_HAND]), np.full(2, T_25C_K),
        True, R_HAND, 0.0, S_HAND, 0.0,
    )  # fmt: skip
    assert dt == pytest.approx([DT_HAND, DT_HAND], abs=1e-9)
    # The only error left is the voltage reading's offset over S: 0.01 V / 0.0508 V/K.
    assert se == pytest.approx([0.01 / 0.0508] * 2, rel=1e-9)


def test_hand_worked_voltage_errors_follow_first_order_propagation() -> None:
    # First-order propagation (JCGM 100:2008 eq. (13)) of ΔT = (V - I·R)/S by hand:
    # ∂ΔT/∂R = -I/S = -3/0.0508 K/Ω, so δR = 0.02 Ω gives 1.181 K; ∂ΔT/∂S·δS = -ΔT·δS/S,
    # 3 % of 30 K = 0.9 K; voltage offset 0.01 V / 0.0508 = 0.197 K. In quadrature 1.498 K.
    _, se = mt.reconstruct_delta_t(
        np.array([I_HAND]), np.array([V_ON_HAND]), np.array([T_25C_K]), True, R_HAND, 0.02,
        S_HAND, 0.03,
    )  # fmt: skip
    by_hand = math.sqrt((3.0 * 0.02 / 0.0508) ** 2 + 0.9**2 + (0.01 / 0.0508) ** 2)
    assert float(se[0]) == pytest.approx(by_hand, rel=1e-9)
    assert by_hand == pytest.approx(1.498, abs=1e-3)


def test_an_r25_without_a_finite_error_leaves_driven_delta_t_unknown_and_off_ones_kept() -> None:
    # ΔT = (V - I·R)/S (Goldsmid 2010, ch. 2): an unbounded error of R makes the driven ΔT's
    # error unbounded, while the floating sample's V_oc/S carries none of R (Harman 1958),
    # so its error stays the voltage offset's 0.01 V / 0.0508 V/K; quietly, with no warning.
    with np.errstate(all="raise"):
        dt, se = mt.reconstruct_delta_t(
            np.array([I_HAND, 0.0]), np.array([V_ON_HAND, V_OC_HAND]), np.full(2, T_25C_K),
            True, R_HAND, math.inf, S_HAND, 0.0,
        )  # fmt: skip
    assert dt == pytest.approx([DT_HAND, DT_HAND], abs=1e-9)
    assert math.isinf(se[0])
    assert se[1] == pytest.approx(0.01 / 0.0508, rel=1e-9)


def test_zero_volt_driver_off_samples_carry_no_delta_t() -> None:
    # A driver that shorts the module while off shows 0 V whatever ΔT (Harman's open circuit
    # is missing): ΔT there is unknown, not zero.
    dt, _ = mt.reconstruct_delta_t(
        np.array([I_HAND, 0.0]), np.array([V_ON_HAND, 0.0]), np.full(2, T_25C_K), False,
        R_HAND, 0.0, S_HAND, 0.0,
    )  # fmt: skip
    assert dt[0] == pytest.approx(DT_HAND)
    assert math.isnan(dt[1])


def _hand_trace(tau_s: float, jump: bool = False, jump_k: float = 0.0) -> tuple[np.ndarray, ...]:
    # On for 10 min at I_HAND with ΔT = 30 K, then off for 10 min with ΔT relaxing to 5 K with
    # time constant tau_s (faces that carry heat), switched at a random instant within the
    # sampling interval; one-minute samples. With ``jump`` the faces relax at once (no heat
    # capacity); ``jump_k`` of ΔT is lost at the switch and the rest relaxes. Built from the
    # hand-worked module above, not from the code under test.
    rng = np.random.default_rng(7)
    t, i, dt = [], [], []
    t0 = 0.0
    for _ in range(12):
        t_off = t0 + 600.0 + rng.uniform(0.0, 60.0)
        for k in range(20):
            ts = t0 + 60.0 * k + 30.0
            on = ts < t_off
            decay = 0.0 if jump else math.exp(-(ts - t_off) / tau_s)
            t.append(ts)
            i.append(I_HAND if on else 0.0)
            dt.append(DT_HAND if on else 5.0 + (DT_HAND - 5.0 - jump_k) * decay)
        t0 += 1200.0
    ta, ia, dta = np.array(t), np.array(i), np.array(dt)
    v = S_HAND * dta + ia * R_HAND
    return ta, ia, v, dta


def test_switch_off_steps_give_harman_resistance_where_faces_carry_heat() -> None:
    # Harman (1958): R = (V_on - V_off)/I_on with ΔT continuous across the step. Faces that
    # relax over 10 min: the hand-worked R = 2.0 Ω, to within the stated error.
    t, i, v, dt = _hand_trace(600.0)
    n = t.size
    # Hot face at 25 °C + ΔT/2, so that Tm = Th - ΔT/2 is 25 °C throughout (factors of 1).
    th = T_25C_K + 0.5 * dt
    res = mt.step_resistance(
        t, i, v, np.full(n, 278.0), np.full(n, 295.0), th, np.ones(n, dtype=bool), s25=S_HAND
    )
    assert res.n_steps == 12
    assert abs(res.r25 - R_HAND) <= 2.0 * res.r25_se
    assert res.r25 == pytest.approx(R_HAND, rel=0.01)
    assert res.reliable


def test_steps_where_the_hot_face_jumps_are_left_out() -> None:
    # Faces without heat capacity: ΔT drops at the switch, so V_on - V_off holds
    # S·(30 - 5) K besides I·R and no R comes of it. A hot probe that jumps with the
    # current (here by half of ΔT's drop, then still) shows it.
    t, i, v, dt = _hand_trace(600.0, jump=True)
    th = 310.0 + 0.5 * dt
    n = t.size
    with pytest.raises(InsufficientDataError):
        mt.step_resistance(
            t, i, v, np.full(n, 278.0), np.full(n, 295.0), th, np.ones(n, dtype=bool),
            s25=S_HAND,
        )  # fmt: skip


def test_zero_volt_driver_without_face_probes_is_not_separable() -> None:
    # V = I·R + S·ΔT is one equation in two unknowns at every sample when no open-circuit
    # voltage is seen (Goldsmid 2010, ch. 2): a specific error, never a number.
    t, i, v, _ = _hand_trace(600.0)
    n = t.size
    with pytest.raises(mt.NotSeparableError, match="not separable"):
        mt.reconstruct_faces(
            t, i, np.where(i > 0, v, 0.0), np.full(n, 278.0), np.full(n, 295.0), None,
            np.ones(n, dtype=bool), floating=False, s25=S_HAND,
        )  # fmt: skip


def test_floating_is_told_from_zero_volts_without_face_probes() -> None:
    # An idle module's few kelvin show tenths of a volt (Harman 1958); a shorted driver 0 V.
    assert mt.floating_without_faces(np.full(20, S_HAND * 4.0))
    assert not mt.floating_without_faces(np.zeros(20))


def test_faces_that_jump_without_face_probes_give_no_resistance() -> None:
    # Faces that jump at the switch and no hot probe to show it: the steps' R would hold
    # S·(30 - 5) K / 3 A = 0.42 Ω besides the hand-worked 2.0 Ω (Harman 1958 needs ΔT
    # continuous across the step). The open-circuit voltage then stays flat after the switch,
    # with the cabinet and ambient steady, so no R and no faces are given, with the reason.
    t, i, v, _ = _hand_trace(600.0, jump=True)
    n = t.size
    with pytest.raises(InsufficientDataError) as err:
        mt.reconstruct_faces(
            t, i, v, np.full(n, 278.0), np.full(n, 295.0), None, np.ones(n, dtype=bool),
            floating=True, s25=S_HAND,
        )  # fmt: skip
    assert "does not relax" in err.value.reason


def test_faces_that_relax_without_face_probes_give_harman_resistance() -> None:
    # Faces relaxing over 10 min: the open-circuit voltage falls by about
    # S·25 K·(1 - e^(-60/600)) = 0.12 V over the first minute after the switch against no
    # drift of cabinet or ambient, so the steps count, and R at the middle of cabinet and
    # ambient (no K given) is the hand-worked 2.0 Ω within 1 % (Harman 1958).
    t, i, v, _ = _hand_trace(600.0)
    n = t.size
    res = mt.step_resistance(
        t, i, v, np.full(n, 278.0), np.full(n, 295.0), None, np.ones(n, dtype=bool), s25=S_HAND
    )
    assert res.decay_ratio is not None and res.decay_ratio > 10.0
    f_r = 1.0 + mt.physics.BI2TE3_RESISTANCE_TEMPCO * (286.5 - T_25C_K)
    assert res.r25 * f_r == pytest.approx(R_HAND, rel=0.01)


@pytest.fixture(scope="module")
def simulated() -> tuple[sim.FleetSpec, Chunk]:
    # Three thermostat units with floating drivers and sinks of 1000/3000 J/K (time constants
    # of several minutes), one day of one-minute data; tuning seed 204.
    spec = sim.random_fleet(3, seed=204, start_s=1_735_689_600.0, days=1)
    devs = tuple(
        dataclasses.replace(
            d, control="thermostat", off_voltage="open_circuit", c_cold_sink=1000.0,
            c_hot_sink=3000.0,
        )
        for d in spec.devices
    )  # fmt: skip
    spec = dataclasses.replace(spec, devices=devs)
    chunks, _truth = sim.simulate(spec, 1.0)
    return spec, concat(chunks)


def test_cold_face_without_its_probe_matches_the_simulated_truth(
    simulated: tuple[sim.FleetSpec, Chunk],
) -> None:
    # Against the simulator's true faces (simulated truth): the cold face read from the
    # voltage and the hot probe, with R25 from the switch-off steps and S from the ratings.
    spec, c = simulated
    for j, d in enumerate(spec.devices):
        ok, m = c.present[:, j], c.measured
        prior = priors(d.registration()["module"], AnalysisSettings())
        assert prior is not None
        rec = mt.reconstruct_faces(
            c.ts[ok, j], m["current"][ok, j], m["voltage"][ok, j],
            m["t_cabinet"][ok, j] + T0, m["t_ambient"][ok, j] + T0, m["t_hot"][ok, j] + T0,
            np.ones(int(ok.sum()), dtype=bool), floating=True,
            s25=prior.seebeck,
        )  # fmt: skip
        assert abs(rec.step.r25 / d.r25 - 1.0) <= max(0.02, 2.0 * rec.step.r25_se / d.r25)
        true_tc = c.truth["t_cold"][ok, j] + T0
        err = rec.t_cold - true_tc
        # The error is mostly one draw per unit (S from the ratings, the voltage reading's
        # offset), the same at every sample: its stated size must cover it.
        assert abs(float(np.median(err))) <= 2.0 * float(np.median(rec.t_cold_se))
        assert "hot probe" in rec.basis


def _network(i: float, rho: float) -> tuple[float, float, float]:
    # Reference: the steady module between its sinks, solved by scipy.optimize.fsolve:
    # Qc = S·I·Tc - ½·I²·R - K·ΔT, Qh = S·I·Th + ½·I²·R - K·ΔT (Goldsmid 2010, ch. 2), S and R
    # at Tm by the linear laws, Th = Ta + r_hot·Qh, Tc = Tcab - r_cold·Qc. A 127-couple module
    # (S25 0.0508 V/K, R25 2.0 Ω, K 0.5 W/K), r_cold 0.4 K/W, ambient 25 °C, cabinet 5 °C
    # (a typical small cooler; from memory). Returns (Tm, ΔT, V).
    from scipy.optimize import fsolve

    ta, tcab, k, r_cold = T_25C_K, T_25C_K - 20.0, 0.5, 0.4

    def faces(x: np.ndarray) -> list[float]:
        th, tc = float(x[0]), float(x[1])
        tm = 0.5 * (th + tc) - T_25C_K
        s = S_HAND * (1.0 + mt.physics.BI2TE3_SEEBECK_TEMPCO * tm)
        r = R_HAND * (1.0 + mt.physics.BI2TE3_RESISTANCE_TEMPCO * tm)
        qc = s * i * tc - 0.5 * i**2 * r - k * (th - tc)
        qh = s * i * th + 0.5 * i**2 * r - k * (th - tc)
        return [th - ta - rho * r_cold * qh, tcab - tc - r_cold * qc]

    th, tc = fsolve(faces, [ta + 5.0, tcab - 5.0], xtol=1e-12)
    tm = 0.5 * (th + tc) - T_25C_K
    s = S_HAND * (1.0 + mt.physics.BI2TE3_SEEBECK_TEMPCO * tm)
    r = R_HAND * (1.0 + mt.physics.BI2TE3_RESISTANCE_TEMPCO * tm)
    return float(0.5 * (th + tc)), float(th - tc), float(s * (th - tc) + i * r)


@pytest.mark.parametrize("i", [I_HAND, 0.0])
def test_mean_temperature_without_face_probes_follows_the_sinks_share(i: float) -> None:
    # With r_hot/r_cold known (a range of one value) Tm is that of the network solved by
    # scipy; the tolerance, 0.01 K, is the fixed-point passes' remainder, (S·I·r_cold)³ of the
    # few kelvin the first pass moves Tm.
    rho = 0.5
    tm, dt, v = _network(i, rho)
    opts = dataclasses.replace(mt.DEFAULT_OPTIONS, sink_ratio_range=(rho, rho))
    got, sd = mt.unanchored_mean_temperature(
        np.array([dt]), np.array([T_25C_K - 20.0]), np.array([T_25C_K]), np.array([i]),
        np.array([v]), r25=R_HAND, s25=S_HAND, k=0.5, options=opts,
    )  # fmt: skip
    assert float(got[0]) == pytest.approx(tm, abs=0.01)
    assert float(sd[0]) == pytest.approx(opts.probe_offset_k)


def test_mean_temperature_without_face_probes_states_what_the_ratio_leaves_open() -> None:
    # Over the default range of r_hot/r_cold, networks at its ends and inside it (solved by
    # scipy) lie within two stated standard deviations; the middle of cabinet and ambient,
    # what the reading took before, lies kelvins below a running module's faces unless the hot
    # sink is much the better one.
    for rho in (0.25, 0.5, 0.7, 1.0):
        tm, dt, v = _network(I_HAND, rho)
        got, sd = mt.unanchored_mean_temperature(
            np.array([dt]), np.array([T_25C_K - 20.0]), np.array([T_25C_K]),
            np.array([I_HAND]), np.array([v]), r25=R_HAND, s25=S_HAND, k=0.5,
        )  # fmt: skip
        assert abs(float(got[0]) - tm) <= 2.0 * float(sd[0])
        if rho >= 0.7:
            assert tm - (T_25C_K - 10.0) > 2.0


def test_resistance_without_face_probes_matches_the_simulated_truth(
    simulated: tuple[sim.FleetSpec, Chunk],
) -> None:
    # Against the simulator's true R25 (simulated truth), no face probe: the switch-off steps
    # with Tm from how the sinks share ΔT (K from the ratings) come within the stated error,
    # and within 2 % where the middle of cabinet and ambient read all three high.
    spec, c = simulated
    with_k, without_k = [], []
    for j, d in enumerate(spec.devices):
        ok, m = c.present[:, j], c.measured
        prior = priors(d.registration()["module"], AnalysisSettings())
        assert prior is not None
        args = (
            c.ts[ok, j], m["current"][ok, j], m["voltage"][ok, j], m["t_cabinet"][ok, j] + T0,
            m["t_ambient"][ok, j] + T0, None, np.ones(int(ok.sum()), dtype=bool),
        )  # fmt: skip
        step = mt.step_resistance(*args, s25=prior.seebeck, k25=prior.conductance)
        assert abs(step.r25 / d.r25 - 1.0) <= min(0.02, 2.0 * step.r25_se / d.r25)
        with_k.append(step.r25 / d.r25 - 1.0)
        without_k.append(mt.step_resistance(*args, s25=prior.seebeck).r25 / d.r25 - 1.0)
    assert float(np.mean(np.abs(with_k))) < float(np.mean(np.abs(without_k)))


def _readings(c: Chunk, j: int) -> Readings:
    ok, m = c.present[:, j], c.measured
    ts = np.round(c.ts[ok, j] * 1000.0).astype(np.int64)
    return Readings(
        ts=ts, t=(ts - ts[0]) / 1000.0, tcab=m["t_cabinet"][ok, j] + T0,
        tc=m["t_cold"][ok, j] + T0, th=m["t_hot"][ok, j] + T0, ta=m["t_ambient"][ok, j] + T0,
        i=m["current"][ok, j], v=m["voltage"][ok, j], door=c.truth["door_s"][ok, j] > 0,
    )  # fmt: skip


def test_runner_fills_the_cold_face_only_where_its_probe_is_missing(
    simulated: tuple[sim.FleetSpec, Chunk],
) -> None:
    # Both probes present: the arrays stay exactly as loaded. Cold probe missing (NaN, as a
    # cooler without it delivers): the cold face is read from the voltage, near the
    # simulator's true face (simulated truth), and what it rests on is kept; the hours after
    # the window are read with the window's R25 and S.
    spec, c = simulated
    cfg = AnalysisSettings()
    prior = priors(spec.devices[0].registration()["module"], cfg)
    assert prior is not None
    full = _readings(c, 0)
    before = full.tc.copy()
    complete_faces(full, slice(0, full.ts.size), prior, cfg)
    assert full.faces is None and full.faces_missing is None
    assert np.array_equal(full.tc, before)

    reduced = _readings(c, 0)
    reduced.tc = np.full_like(reduced.tc, np.nan)
    reduced.cold_probe = False
    n = reduced.ts.size
    complete_faces(reduced, slice(0, n // 2), prior, cfg)
    assert reduced.faces is not None
    assert "hot probe" in reduced.faces.basis
    assert np.isnan(reduced.tc[n // 2 :]).all()
    fill_cold_face(reduced, slice(n // 2, n), reduced.faces.step.r25, prior.seebeck, cfg)
    true_tc = c.truth["t_cold"][c.present[:, 0], 0] + T0
    se = float(np.median(reduced.faces.t_cold_se))
    for part in (slice(0, n // 2), slice(n // 2, n)):
        assert abs(float(np.median((reduced.tc - true_tc)[part]))) <= 2.0 * se


def test_runner_states_why_a_zero_volt_unit_without_face_probes_has_no_faces(
    simulated: tuple[sim.FleetSpec, Chunk],
) -> None:
    # No open-circuit voltage and no face probes: R25 and S cannot be told apart; the reason
    # is kept for the estimates, the arrays stay NaN.
    spec, c = simulated
    cfg = AnalysisSettings()
    data = _readings(c, 1)
    data.v = np.where(data.i > cfg.on_current, data.v, 0.0)
    data.tc = np.full_like(data.tc, np.nan)
    data.th = np.full_like(data.th, np.nan)
    data.cold_probe = data.hot_probe = False
    prior = priors(spec.devices[1].registration()["module"], cfg)
    complete_faces(data, slice(0, data.ts.size), prior, cfg)
    assert data.faces is None
    assert data.faces_missing is not None and "cannot be told apart" in data.faces_missing
    assert np.isnan(data.tc).all()


def _massless_trace(
    seed: int, wear_per_day: float = 0.0, cut_s: tuple[float, float] | None = None
) -> tuple[np.ndarray, ...]:
    # Faces without heat capacity, both balances steady at every sample (Goldsmid 2010,
    # ch. 2, constant S, K: α = β = 0 here; R = R_HAND·(1 + wear_per_day·(t - 12 h)), a module
    # wearing across the day, constant where wear_per_day is 0):
    #   (Tcab - Tc)/r_cold = S·I·Tc - ½·I²·R - K·ΔT,   (Th - Ta)/r_hot = S·I·Th + ½·I²·R - K·ΔT,
    # solved by hand as a 2×2 linear system per sample. A thermostat switching every few
    # minutes at 3-4 A, the cabinet drifting over 2 K and the ambient over a day's 4 K; the
    # module of the hand-worked example, K = 0.5 W/K, r_cold = 0.4 K/W, r_hot = 0.25 K/W (a
    # small cooler; from memory). Readings with 0.05 K probe noise and 5 mV/5 mA noise.
    # ``cut_s``: a power cut from..to [s]: no current, both fans stopped (r_cold 2.5 and
    # r_hot 3 times as high: natural convection instead of forced, from memory), the cabinet
    # warming 6 K across it and cooled back within the hour after it.
    rng = np.random.default_rng(seed)
    n = 1440
    t = np.arange(n) * 60.0
    on = (np.arange(n) // 2) % 3 != 0
    tcab = 278.0 + 1.0 * np.sin(t / 5000.0)
    k, rc, rh = 0.5, np.full(n, 0.4), np.full(n, 0.25)
    if cut_s is not None:
        a, b = cut_s
        cut = (t >= a) & (t < b)
        on &= ~cut
        rc[cut], rh[cut] = 2.5 * rc[cut], 3.0 * rh[cut]
        tcab += np.where(cut, 6.0 * (t - a) / (b - a), 0.0)
        tcab += np.where(t >= b, 6.0 * np.exp(-(t - b) / 900.0), 0.0)
    i = np.where(on, 3.5 + 0.5 * np.sin(t / 7000.0), 0.0)
    ta = 295.0 + 2.0 * np.sin(2.0 * np.pi * t / 86_400.0)
    r = R_HAND * (1.0 + wear_per_day * (t - 43_200.0) / 86_400.0)
    jh = 0.5 * i**2 * r
    a11, a12 = 1.0 / rc + S_HAND * i + k, -k
    a21, a22 = -k, 1.0 / rh - S_HAND * i + k
    b1, b2 = tcab / rc + jh, ta / rh + jh
    det = a11 * a22 - a12 * a21
    tc = (b1 * a22 - a12 * b2) / det
    th = (a11 * b2 - a21 * b1) / det
    v = S_HAND * (th - tc) + i * r
    noisy = [x + rng.normal(0.0, sd, n) for x, sd in ((tcab, 0.05), (th, 0.05), (v, 0.005))]
    i_read = np.where(on, i + rng.normal(0.0, 0.005, n), 0.0)
    return t, i_read, noisy[2], noisy[0], ta, noisy[1]


def test_faces_that_jump_give_r_from_the_cold_faces_steady_balance() -> None:
    # No switch-off step gives R here (ΔT jumps with the current), but every sample holds the
    # cold face's balance: R25 comes back within 1 % and twice its stated error, from the hot
    # probe, the cabinet probe and the voltage (the hand-worked 2.0 Ω), S from the ratings.
    t, i, v, tcab, ta, th = _massless_trace(11)
    n = t.size
    ok = np.ones(n, dtype=bool)
    with pytest.raises(InsufficientDataError):
        mt.step_resistance(t, i, v, tcab, ta, th, ok, s25=S_HAND, alpha=0.0)
    res = mt.balance_resistance(t, i, v, tcab, th, ok, s25=S_HAND, r25_guess=2.3, alpha=0.0,
                                beta=0.0)  # fmt: skip
    assert res.r25 == pytest.approx(R_HAND, rel=0.01)
    assert abs(res.r25 - R_HAND) <= 2.0 * res.r25_se
    # A module that does not wear keeps R25 held across the window (Schwarz's criterion
    # does not pay for the drift).
    assert res.drift_per_day == 0.0
    rec = mt.reconstruct_faces(
        t, i, v, tcab, ta, th, ok, floating=True, s25=S_HAND, r25_guess=2.3, alpha=0.0,
        beta=0.0,
    )  # fmt: skip
    assert "steady heat balance" in rec.basis
    assert rec.step.r25 == pytest.approx(res.r25)


def test_a_power_cut_is_left_out_of_the_cold_faces_balance() -> None:
    # The hand-solved balance with an hour's power cut at midday: the fans stop with the
    # module, so through the cut the cold side's path is 2.5 times the one the balance fits.
    # Its samples are a warm spell with the cooling lost (6 K above the usual low within the
    # hour): left out, R25 comes back within 1 % and twice its stated error, as without a
    # cut; fed to the balance with the rest, they pull it further than that.
    t, i, v, tcab, ta, th = _massless_trace(11, cut_s=(43_200.0, 46_800.0))
    ok = np.ones(t.size, dtype=bool)
    rec = mt.reconstruct_faces(
        t, i, v, tcab, ta, th, ok, floating=True, s25=S_HAND, r25_guess=2.3, alpha=0.0,
        beta=0.0,
    )  # fmt: skip
    assert "of a spell with the cooling lost" in rec.basis
    assert rec.step.r25 == pytest.approx(R_HAND, rel=0.01)
    assert abs(rec.step.r25 - R_HAND) <= 2.0 * rec.step.r25_se
    fed = mt.balance_resistance(
        t, i, v, tcab, th, ok, s25=S_HAND, r25_guess=2.3, alpha=0.0, beta=0.0
    )
    assert abs(fed.r25 - R_HAND) > abs(rec.step.r25 - R_HAND) + 0.01 * R_HAND


def test_a_module_wearing_within_the_window_gives_r_at_its_middle_and_the_drift() -> None:
    # The same hand-solved balance with R rising 0.7 % over the day (a module gaining 10 %
    # in two weeks). Held across the day, R25 leaves a residual in step with the current
    # that grows along the window (I·δR/S, about 1 K per per cent of R), far beyond the
    # 0.05 K noise; allowed to move linearly, R25 at the driven samples' mean time (the
    # trace's middle within the share of driven samples) comes
    # back within 1 % and twice its stated error, the drift within a fifth of 0.7 %/day.
    t, i, v, tcab, _ta, th = _massless_trace(13, wear_per_day=0.007)
    ok = np.ones(t.size, dtype=bool)
    res = mt.balance_resistance(
        t, i, v, tcab, th, ok, s25=S_HAND, r25_guess=2.3, alpha=0.0, beta=0.0
    )
    on = i > 0.05
    r_mid = R_HAND * (1.0 + 0.007 * (float(np.mean(t[on])) - 43_200.0) / 86_400.0)
    assert res.reliable
    assert res.r25 == pytest.approx(r_mid, rel=0.01)
    assert abs(res.r25 - r_mid) <= 2.0 * res.r25_se
    assert res.drift_per_day == pytest.approx(0.007, rel=0.2)


def test_a_wearing_module_keeps_its_drift_beside_the_recent_windows_r25() -> None:
    # The wearing module above, with the unit's recent windows reading R25 as it was at the
    # window's start (R_HAND·(1 - 0.007/2)): the drifting fit puts R25 at the window's
    # middle nearer that than the held fit, so wear is still read, within 1 % of the
    # middle's R and the drift within a fifth of 0.7 %/day.
    t, i, v, tcab, _ta, th = _massless_trace(13, wear_per_day=0.007)
    ok = np.ones(t.size, dtype=bool)
    res = mt.balance_resistance(
        t, i, v, tcab, th, ok, s25=S_HAND, r25_guess=2.3, r25_recent=R_HAND * (1.0 - 0.0035),
        alpha=0.0, beta=0.0,
    )  # fmt: skip
    on = i > 0.05
    r_mid = R_HAND * (1.0 + 0.007 * (float(np.mean(t[on])) - 43_200.0) / 86_400.0)
    assert res.r25 == pytest.approx(r_mid, rel=0.01)
    assert res.drift_per_day == pytest.approx(0.007, rel=0.2)


def test_a_creeping_cabinet_probe_is_not_read_as_wear_beside_the_recent_windows_r25() -> None:
    # The steady module of the hand-solved balance, its cabinet probe creeping by 1 K over
    # the day (the probe drifts, the module does not): the balance pays Schwarz's price for a
    # drift of R25 of about half a per cent a day, which absorbs the probe's creep. Given
    # the unit's recent windows' R25 (the true one here), that drift moves R25 away from
    # them, and the held fit is kept: no drift, R25 within 1 % (as for the steady module).
    t, i, v, tcab, _ta, th = _massless_trace(13)
    tcab = tcab + (t - float(np.mean(t))) / 86_400.0
    ok = np.ones(t.size, dtype=bool)
    alone = mt.balance_resistance(
        t, i, v, tcab, th, ok, s25=S_HAND, r25_guess=2.3, alpha=0.0, beta=0.0
    )
    assert alone.drift_per_day > 0.002  # the creep read as a drift without a reference
    res = mt.balance_resistance(
        t, i, v, tcab, th, ok, s25=S_HAND, r25_guess=2.3, r25_recent=R_HAND, alpha=0.0,
        beta=0.0,
    )  # fmt: skip
    assert res.drift_per_day == 0.0
    assert res.r25 == pytest.approx(R_HAND, rel=0.01)


def test_faces_that_store_heat_are_not_read_from_a_steady_balance() -> None:
    # The same module with both faces lagging their steady values by a 5-minute time
    # constant (sinks that store heat): a slow drift can fit a steady balance with the wrong
    # R, but the hot probe then moves smoothly across the switch-offs instead of jumping, and
    # the R is not called reliable.
    t, i, v, tcab, _ta, th = _massless_trace(12)
    dt = (v - i * R_HAND) / S_HAND
    faces = np.column_stack([th - dt, th])
    w = 1.0 - math.exp(-60.0 / 300.0)
    for j in range(1, t.size):
        faces[j] = faces[j - 1] + w * (faces[j] - faces[j - 1])
    v_lag = S_HAND * (faces[:, 1] - faces[:, 0]) + i * R_HAND
    ok = np.ones(t.size, dtype=bool)
    res = mt.balance_resistance(
        t, i, v_lag, tcab, faces[:, 1], ok, s25=S_HAND, r25_guess=2.3, alpha=0.0, beta=0.0
    )
    assert not res.reliable
    assert res.note is not None and "store heat" in res.note


def test_faces_read_at_a_given_resistance_shift_by_its_ohmic_part(
    simulated: tuple[sim.FleetSpec, Chunk],
) -> None:
    # V = S(Tm)·ΔT + I·R(Tm) (Goldsmid 2010, ch. 2) with Tm = Th - ΔT/2 and R, S linear in
    # Tm: reading ΔT at an R25 1 % higher takes I·R·1 % / (S - ΔT·S25·β/2 - I·R25·α/2) off
    # every driven sample's ΔT (implicit differentiation, by hand). 10 % tolerance: the
    # step is not infinitesimal. The readings' own R25 (their steps) is kept.
    spec, c = simulated
    d, j = spec.devices[0], 0
    ok, m = c.present[:, j], c.measured
    prior = priors(d.registration()["module"], AnalysisSettings())
    assert prior is not None
    args = (
        c.ts[ok, j], m["current"][ok, j], m["voltage"][ok, j], m["t_cabinet"][ok, j] + T0,
        m["t_ambient"][ok, j] + T0, m["t_hot"][ok, j] + T0, np.ones(int(ok.sum()), dtype=bool),
    )  # fmt: skip
    own = mt.reconstruct_faces(*args, floating=True, s25=prior.seebeck)
    read = (1.01 * own.step.r25, own.step.r25_se)
    moved = mt.reconstruct_faces(*args, floating=True, s25=prior.seebeck, r25_read=read)
    assert moved.step == own.step
    i = m["current"][ok, j]
    on = (i > 0.5) & np.isfinite(own.delta_t) & np.isfinite(moved.delta_t)
    assert on.sum() > 100
    alpha, beta = mt.physics.BI2TE3_RESISTANCE_TEMPCO, mt.physics.BI2TE3_SEEBECK_TEMPCO
    r25, s25, dt = own.step.r25, prior.seebeck, own.delta_t[on]
    f_r = 1.0 + alpha * (own.t_mean[on] - T_25C_K)
    f_s = 1.0 + beta * (own.t_mean[on] - T_25C_K)
    slope = s25 * f_s - dt * s25 * beta / 2.0 - i[on] * r25 * alpha / 2.0
    expected = i[on] * 0.01 * r25 * f_r / slope
    shift = own.delta_t[on] - moved.delta_t[on]
    assert np.allclose(shift, expected, rtol=0.10)
    assert "recent windows" in moved.basis and "switch-off steps" in moved.basis


def test_a_resistance_the_heat_flows_rule_out_is_not_served_even_behind_a_given_one() -> None:
    # Faces that lose 15 K of ΔT at the switch and relax over 5 min from there: the
    # open-circuit voltage relaxes (0.09 V over the first minute), but the steps' R holds
    # S·15 K / 3 A = 0.25 Ω besides the hand-worked 2.0 Ω and reads ΔT as 30 - 15 = 15 K, below
    # the 17 K the ambient leads the cabinet by. While the module cools Tc <= Tcab and
    # Th >= Ta (heat flows from warm to cold; common practice, no source), so that R is ruled
    # out, and reading the faces at a plausible R25 given from elsewhere must not let it
    # through.
    t, i, v, _ = _hand_trace(300.0, jump_k=15.0)
    n = t.size
    args = (t, i, v, np.full(n, 278.0), np.full(n, 295.0), None, np.ones(n, dtype=bool))
    with pytest.raises(InsufficientDataError, match="ambient's lead"):
        mt.reconstruct_faces(*args, floating=True, s25=S_HAND)
    # At the hand-worked 2.0 ohm the faces themselves would pass (ΔT = 30 K > 17 K) ...
    dt = mt.reconstruct_delta_t(i, v, np.full(n, 298.15), True, R_HAND, 0.0, S_HAND, 0.0)[0]
    assert float(np.nanmedian(dt[i > 0.5])) > 17.0
    # ... but the steps' own resistance is still ruled out.
    with pytest.raises(InsufficientDataError, match="ambient's lead"):
        mt.reconstruct_faces(*args, floating=True, s25=S_HAND, r25_read=(R_HAND, 0.02))


def test_faces_without_probes_keep_the_hot_sinks_changes() -> None:
    # Reference: the steady network solved by scipy (``_network``). With the sinks' ratio
    # known, both faces land on the network's within 0.1 K (the fixed-point passes'
    # remainder, as above, read twice). Over the default range the hot sink's rise Th - Ta,
    # read for units at the range's ends, is off by a factor (the code gave 1.31 and 0.89
    # at 3 A) that moves by under 10 % between 2 and 3 A, and a tripled r_hot (a failed fan)
    # raises it by more than the hot side's 50 % flag.
    ta, tcab = np.array([T_25C_K]), np.array([T_25C_K - 20.0])

    def rises(i: float, rho: float, options: mt.DiagnosticsOptions) -> tuple[float, float, float]:
        tm, dt, v = _network(i, rho)
        th, tc = mt.unanchored_faces(
            np.array([i]), np.array([v]), tcab, ta, r25=R_HAND, s25=S_HAND, k=0.5,
            options=options,
        )  # fmt: skip
        return float(th[0] - ta[0]), tm + 0.5 * dt - float(ta[0]), float(tc[0]) - (tm - 0.5 * dt)

    known = dataclasses.replace(mt.DEFAULT_OPTIONS, sink_ratio_range=(0.5, 0.5))
    got, true, cold_err = rises(I_HAND, 0.5, known)
    assert got == pytest.approx(true, abs=0.1) and abs(cold_err) <= 0.1
    for rho in mt.DEFAULT_OPTIONS.sink_ratio_range:
        factors = [
            rises(i, rho, mt.DEFAULT_OPTIONS)[0] / rises(i, rho, mt.DEFAULT_OPTIONS)[1]
            for i in (I_HAND, 2.0)
        ]
        assert abs(factors[0] / factors[1] - 1.0) < 0.10
        failed = rises(I_HAND, 3.0 * rho, mt.DEFAULT_OPTIONS)[0]
        assert failed / rises(I_HAND, rho, mt.DEFAULT_OPTIONS)[0] > 1.5
