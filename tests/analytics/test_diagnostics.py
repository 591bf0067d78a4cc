"""Estimators recover known module, cabinet and sink parameters from synthetic readings.

References named beside each check:
- Module equations V = I·R + S·ΔT, Qc, Qh: H. J. Goldsmid, Introduction to Thermoelectricity,
  Springer, 2010, ch. 2; D. M. Rowe (ed.), CRC Handbook of Thermoelectrics, 1995.
- Switch-off separation of I·R and S·ΔT: T. C. Harman, J. Appl. Phys. 29, 1373 (1958).
- Best COP at the Ioffe current: A. F. Ioffe, Semiconductor Thermoelements, 1957.
- First-order error propagation: JCGM 100:2008 (GUM), eq. (13).
The synthetic readings come from tests/analytics/synthetic.py (lumped balances, Incropera et al.
2007 ch. 5); tolerances are set by the noise added there and explained at each check.
"""

from __future__ import annotations

import contextlib
import dataclasses
import math
from typing import Any

import numpy as np
import pandas as pd
import pytest
from scipy import integrate

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics as ph
from tecfleet.analytics import simulation as sm
from tecfleet.analytics.diagnostics import cabinet
from tecfleet.analytics.errors import InsufficientDataError
from tests.analytics.synthetic import Noise, Truth, simulate

K0 = 273.15
QUIET = Noise(0.0, 0.0, 0.0)


def _arrays(df: pd.DataFrame) -> dict[str, Any]:
    t = (df.ts_ms.to_numpy() - df.ts_ms.to_numpy()[0]) / 1000.0
    a: dict[str, Any] = {"t": t}
    for col in ("t_cabinet", "t_cold", "t_hot", "t_ambient"):
        a[col] = df[col].to_numpy() + K0
    a["i"] = df.current.to_numpy()
    a["v"] = df.voltage.to_numpy()
    a["door"] = df.door_open.to_numpy()
    a["flags"] = dg.flag_samples(
        t, a["t_cabinet"], a["t_cold"], a["t_hot"], a["t_ambient"], a["i"], a["v"], a["door"]
    )
    return a


@pytest.fixture(scope="module")
def day() -> dict[str, Any]:
    return _arrays(simulate(Truth(), 1.0, seed=3))


def test_electrical_fit_recovers_r25_and_s25(day: dict[str, Any]) -> None:
    # V = I·R + S·ΔT (Goldsmid 2010). Noise: 5 mV on V and 10 mA on I over ~1000 on samples;
    # the fit's own standard error is ~0.02 % on R, so 0.5 % (R) and 1 % (S) are ample while
    # still catching a missed temperature correction (α·10 K = 4.5 %).
    tr = Truth()
    e = dg.fit_electrical(
        day["i"], day["v"], day["t_cold"], day["t_hot"], day["flags"].usable, floating=True
    )
    assert e.reliable
    assert e.r25 == pytest.approx(tr.r25, rel=5e-3)
    assert e.s25 == pytest.approx(tr.s25, rel=1e-2)
    se_r = float(np.sqrt(e.cov[0, 0]))
    assert 0.0 < se_r < 0.01 * tr.r25
    assert abs(e.r25 - tr.r25) < 6.0 * se_r


@pytest.mark.parametrize("offset_k", [0.3, -0.3])
def test_seebeck_coefficient_allowing_for_a_probe_offset(offset_k: float) -> None:
    # V = I·R + S·ΔT (Goldsmid 2010, ch. 2) with the hot probe reading offset_k off: fitted to
    # ΔT as read, S comes out 1.4-1.5 % off (values this code produced); with a constant term
    # S·δ + b in the fit, which the spread of ΔT while the module is off tells from S, it is
    # within 0.5 % (its stated error is about 0.2 %). The S for the heat balances stays the
    # one fitted to ΔT as read.
    tr = Truth()
    a = _arrays(simulate(tr, 1.0, seed=2, noise=Noise(bias_k={"t_hot": offset_k})))
    e = dg.fit_electrical(a["i"], a["v"], a["t_cold"], a["t_hot"], a["flags"].usable, floating=True)
    assert abs(e.s25 / tr.s25 - 1.0) > 0.01  # the offset matters: the check is not vacuous
    assert e.s25_offset_free == pytest.approx(tr.s25, rel=5e-3)
    assert abs(e.s25_offset_free - tr.s25) < 3.0 * e.s25_offset_free_se


def test_floating_driver_detected_only_when_it_floats(day: dict[str, Any]) -> None:
    # Off and floating, V = S·ΔT (Harman 1958); shorted, V = 0.
    off = ~day["flags"].on
    dt = day["t_hot"] - day["t_cold"]
    assert dg.detect_floating_driver(day["v"][off], dt[off])
    grounded = _arrays(simulate(Truth(floating=False), 0.5, seed=4))
    off_g = ~grounded["flags"].on
    dt_g = grounded["t_hot"] - grounded["t_cold"]
    assert not dg.detect_floating_driver(grounded["v"][off_g], dt_g[off_g])


def test_harman_steps_give_seebeck_at_the_step() -> None:
    # Harman (1958): after switch-off V = S·ΔT. Without noise each step's S equals S at the
    # mean temperature of the first off sample; the only error left is the simulator's Euler
    # step (5 s), hence 0.5 %.
    tr = Truth()
    a = _arrays(simulate(tr, 0.25, seed=1, noise=QUIET))
    s, r = dg.harman_steps(a["t"], a["i"], a["v"], a["t_cold"], a["t_hot"], a["flags"].usable)
    assert s.size >= 5
    tm = 0.5 * (a["t_cold"] + a["t_hot"])
    k = np.flatnonzero(a["flags"].on[:-1] & ~a["flags"].on[1:])
    k = k[np.abs(a["t_hot"][k + 1] - a["t_cold"][k + 1]) > 2.0]
    expected = ph.seebeck_at_temperature(tr.s25, tm[k + 1], tr.beta)
    np.testing.assert_allclose(s, expected, rtol=5e-3)
    # R from the last on sample, with S taken from the off sample (S differs by β·δTm, < 1 %).
    expected_r = ph.resistance_at_temperature(tr.r25, tm[k], tr.alpha)
    np.testing.assert_allclose(r, expected_r, rtol=2e-2)


def test_constant_current_without_open_circuit_voltage_is_not_separable() -> None:
    # Constant current, steady temperatures, driver shorting the module while off: V = I·R +
    # S·ΔT has one equation for two unknowns at a single operating point.
    tr = Truth(floating=False, ambient_swing_k=0.0)
    a = _arrays(simulate(tr, 0.25, seed=2, constant_current=3.0))
    usable = a["flags"].usable
    # Leave out the start-up transient: the steady part alone is one operating point.
    usable = usable & (a["t"] > 3 * 3600)
    with pytest.raises(InsufficientDataError):
        dg.fit_electrical(a["i"], a["v"], a["t_cold"], a["t_hot"], usable, floating=False)
    e = dg.fit_electrical(
        a["i"], a["v"], a["t_cold"], a["t_hot"], usable, floating=False, prior=(2.1, 0.050, 0.1)
    )
    assert not e.reliable
    assert e.note is not None and "not separable" in e.note


def test_too_few_on_samples_raise() -> None:
    a = _arrays(simulate(Truth(), 0.01, seed=2))
    with pytest.raises(InsufficientDataError):
        dg.fit_electrical(a["i"], a["v"], a["t_cold"], a["t_hot"], a["flags"].usable, floating=True)


def _thermal(a: dict[str, Any], tr: Truth, k_prior: float = 0.4, **kw: Any) -> dg.ThermalFit:
    tm = 0.5 * (a["t_cold"] + a["t_hot"])
    s = ph.seebeck_at_temperature(tr.s25, tm, tr.beta)
    r = ph.resistance_at_temperature(tr.r25, tm, tr.alpha)
    return dg.fit_thermal(
        a["t"],
        a["t_cabinet"],
        a["t_cold"],
        a["t_hot"],
        a["t_ambient"],
        a["i"],
        np.asarray(s),
        np.asarray(r),
        a["flags"].usable,
        k_prior,
        0.5,
        **kw,
    )


def test_thermal_fit_recovers_cabinet_sinks_and_module_without_noise() -> None:
    # Noise-free: what remains is trapezoidal integration over 60 s samples of a model stepped
    # at 5 s and the heat stored in the cold sink at hour boundaries, a few per cent; 5 % on K
    # and r_hot, 10 % on r_cold (the smallest temperature difference of the three). UA shares
    # the cabinet balance with the 1 W ± 1 W internal-load prior; with a ±2 K ambient swing the
    # split is weak (the fit's own standard error is ~9 %), so 10 % and three standard errors;
    # C within 25 % (hour blocks hold little of the cabinet's stored heat).
    tr = Truth()
    f = _thermal(_arrays(simulate(tr, 1.0, seed=1, noise=QUIET)), tr)
    assert f.ua == pytest.approx(tr.ua, rel=0.10)
    assert abs(f.ua - tr.ua) < 3.0 * f.stderr("ua")
    assert f.k == pytest.approx(tr.k, rel=0.05)
    assert 1.0 / f.g_hot == pytest.approx(tr.r_hot, rel=0.05)
    assert 1.0 / f.g_cold == pytest.approx(tr.r_cold, rel=0.10)
    assert f.c == pytest.approx(tr.c, rel=0.25)
    assert f.k_from_data
    assert f.ua_reliable


def test_settled_internal_load_tightens_ua_where_the_ambient_hardly_moves() -> None:
    # A day with the ambient swinging only ±0.5 K: UA and a constant internal load are nearly
    # collinear in the cabinet balance, so UA's own error is wide (about 15 % here, values
    # the code produced). Given the unit's settled load (here the generator's 1.0 W ± 0.1 W),
    # the error narrows and UA stays on the generator's value (5 %: the noise-free fit's
    # integration error is a few per cent, see above). The load the history is made of is the
    # one the generic prior gave, so a settled value cannot feed on itself.
    tr = Truth(ambient_swing_k=0.5)
    a = _arrays(simulate(tr, 1.0, seed=3))
    generic = _thermal(a, tr)
    settled = _thermal(a, tr, q_settled=(tr.q_internal, 0.1))
    assert settled.q_internal_own == pytest.approx(generic.q_internal, rel=1e-9)
    assert settled.q_internal == pytest.approx(tr.q_internal, abs=0.1)
    assert settled.stderr("ua") < 0.75 * generic.stderr("ua")
    assert settled.ua == pytest.approx(tr.ua, rel=0.05)


def test_thermal_fit_with_noise_stays_within_its_error(day: dict[str, Any]) -> None:
    # 0.05 K temperature noise: UA within 15 % and inside four of its standard errors; the
    # prior on K is 20 % off and must not drag the estimate (cycling makes K observable).
    tr = Truth()
    f = _thermal(day, tr, k_prior=0.4)
    assert f.ua == pytest.approx(tr.ua, rel=0.15)
    assert abs(f.ua - tr.ua) < 4.0 * f.stderr("ua")
    assert f.k == pytest.approx(tr.k, rel=0.10)
    assert 1.0 / f.g_hot == pytest.approx(tr.r_hot, rel=0.05)


def test_conductance_leans_on_prior_at_constant_current() -> None:
    # One operating point: K·∫ΔT and UA·∫(Ta - Tcab) move together, so the data cannot
    # separate them and K must be reported as prior-driven.
    tr = Truth(ambient_swing_k=0.0)
    a = _arrays(simulate(tr, 1.0, seed=5, constant_current=2.0))
    f = a["flags"]
    a["flags"] = dg.SampleFlags(
        f.usable & (a["t"] > 3 * 3600), f.on, f.steady, f.missing, f.fault, f.door
    )
    f = _thermal(a, tr)
    assert not f.k_from_data
    assert f.note is not None and "conductance" in f.note


def test_hot_side_resistance_over_one_hour(day: dict[str, Any]) -> None:
    # Integrated hot-sink balance over one hour of cycling: the heat stored in the sink (Ch·δTh)
    # is corrected with the true Ch, noise 0.05 K on ~12 K rise; 5 %. The stated error includes
    # a 0.3 K probe offset on that rise (~2.5 %) plus noise, so it lies between 2 % and 10 %.
    tr = Truth()
    sl = slice(600, 660)
    tm = 0.5 * (day["t_cold"][sl] + day["t_hot"][sl])
    est = dg.hot_side_resistance_ratio(
        day["t"][sl],
        day["t_hot"][sl],
        day["t_ambient"][sl],
        day["t_cold"][sl],
        day["i"][sl],
        np.asarray(ph.seebeck_at_temperature(tr.s25, tm, tr.beta)),
        np.asarray(ph.resistance_at_temperature(tr.r25, tm, tr.alpha)),
        tr.k,
        day["flags"].usable[sl],
        c_hot=tr.c_hot,
    )
    assert est.value == pytest.approx(tr.r_hot, rel=0.05)
    assert est.stderr is not None and 0.02 * tr.r_hot < est.stderr < 0.10 * tr.r_hot
    assert est.reliable


def test_flags_count_door_spike_and_missing() -> None:
    df = simulate(Truth(), 0.2, seed=7, door_every_h=2.0)
    df.loc[50, "t_hot"] += 20.0  # a spike on one channel
    df.loc[60, "voltage"] = np.nan  # a missing channel
    a = _arrays(df)
    c = a["flags"].counts
    assert c["missing"] == 1
    assert c["sensor_fault"] >= 1 and not a["flags"].usable[50]
    # Two minutes open every two hours plus 15 minutes settling: 17 samples per opening.
    openings = int(np.sum(np.diff(df.door_open.astype(int)) == 1)) + int(df.door_open.iloc[0])
    assert c["door"] == pytest.approx(17 * openings, abs=openings)


def test_performance_consistent_with_ioffe_optimum() -> None:
    # Ioffe (1957): at I = current_for_best_cop the COP equals the best COP; the best COP lies
    # below the Carnot COP (second law). With zero covariance the standard errors are zero.
    tr = Truth()
    tc, th = 278.0, 308.0
    cov = np.zeros((3, 3))
    p = dg.performance_now(3.0, tc, th, tr.s25, tr.r25, tr.k, cov, 10)
    i_best = p.current_for_best_cop_a.value
    at_best = dg.performance_now(i_best, tc, th, tr.s25, tr.r25, tr.k, cov, 10)
    assert at_best.cop.value == pytest.approx(p.cop_max.value, rel=1e-9)
    assert p.cop.value < p.cop_max.value < p.carnot_cop.value
    assert p.carnot_cop.value == pytest.approx(tc / (th - tc))
    assert p.cop.stderr == 0.0
    # Qc by hand from Goldsmid (2010) ch. 2 with S, R at the mean face temperature.
    s = tr.s25 * (1 + tr.beta * (0.5 * (tc + th) - 298.15))
    r = tr.r25 * (1 + tr.alpha * (0.5 * (tc + th) - 298.15))
    assert p.cooling_w.value == pytest.approx(s * 3.0 * tc - 0.5 * 9.0 * r - tr.k * (th - tc))


def test_propagate_matches_gum_for_a_linear_function() -> None:
    # GUM eq. (13): for f = a·x + b·y, u² = a²·u_x² + b²·u_y² + 2·a·b·u_xy (exact when linear).
    cov = np.array([[0.04, 0.01], [0.01, 0.09]])
    value, se = dg.propagate(lambda p: 3.0 * p[:, 0] - 2.0 * p[:, 1], np.array([1.0, 2.0]), cov)
    assert value[0] == pytest.approx(-1.0)
    assert se[0] == pytest.approx(np.sqrt(9 * 0.04 + 4 * 0.09 - 12 * 0.01), rel=1e-5)


def test_capacity_with_true_parameters() -> None:
    # The true cooler holds 5 °C at 25 °C ambient with its 4 A drive (it does in the simulator),
    # so the capacity check at that ambient must agree and report a positive margin.
    tr = Truth()
    cap = dg.setpoint_capacity(
        tr.setpoint_c + K0, 25.0 + K0, tr.s25, tr.r25, tr.k, tr.r_hot, tr.r_cold, tr.ua, 4.0
    )
    assert cap.holdable and cap.margin > 0.0
    assert cap.heat_load == pytest.approx(tr.ua * 20.0)


def test_cycle_locked_to_the_sampling_is_left_out_of_the_cabinet_balance() -> None:
    # Sampling theorem (C. E. Shannon, Proc. IRE 37, 10, 1949): a cycle whose period is a
    # whole number of sampling intervals is seen at the same few phases every time, so the
    # sample mean of its on fraction is biased. Three one-hour blocks of 60 samples: an on/off
    # pattern repeating every 3 samples (locked), an irregular pattern with the same share of
    # on samples drawn at random, and a module on throughout (no cycle to alias).
    rng = np.random.default_rng(7)
    locked = np.tile([False, True, False], 20)
    irregular = rng.random(60) < 1.0 / 3.0
    steady = np.ones(60, dtype=bool)
    on = np.concatenate([locked, irregular, steady])
    block = np.repeat(np.arange(3), 60)[:-1]
    assert cabinet.strobed_blocks(on, block).tolist() == [True, False, False]


def test_lag_one_autocorrelation_of_the_cabinet_residuals() -> None:
    # Checked against numpy.corrcoef of the series against itself one step later, on a long
    # first-order autoregressive series x[k] = 0.6·x[k-1] + e[k] (its lag-one autocorrelation
    # is 0.6); 0.03 is about two standard errors at n = 4000 (sqrt((1 - 0.36)/4000) = 0.013).
    # Negative ones count as none (they would shrink the stated error) and the largest is
    # capped, so a trend the model missed cannot blow the error up without bound.
    rng = np.random.default_rng(3)
    e = rng.standard_normal(4000)
    x = np.zeros_like(e)
    for k in range(1, e.size):
        x[k] = 0.6 * x[k - 1] + e[k]
    rho = cabinet.lag_one_autocorrelation(x)
    assert rho == pytest.approx(float(np.corrcoef(x[1:], x[:-1])[0, 1]), abs=0.01)
    assert rho == pytest.approx(0.6, abs=0.03)
    alternating = np.tile([1.0, -1.0], 20)
    assert cabinet.lag_one_autocorrelation(alternating) == 0.0
    assert cabinet.lag_one_autocorrelation(np.arange(40.0)) == 0.9
    assert cabinet.lag_one_autocorrelation(np.array([1.0, 2.0])) == 0.0


def test_hot_side_resistance_per_hour_matches_one_hour_at_a_time(day: dict[str, Any]) -> None:
    # Several hours in one call: each hour's figures as from its own call (pairs never span
    # two hours); an hour with the module off gives its reason instead.
    tr = Truth()
    sl = slice(540, 780)
    tm = 0.5 * (day["t_cold"] + day["t_hot"])
    args = (
        day["t"], day["t_hot"], day["t_ambient"], day["t_cold"], day["i"].copy(),
        np.asarray(ph.seebeck_at_temperature(tr.s25, tm, tr.beta)),
        np.asarray(ph.resistance_at_temperature(tr.r25, tm, tr.alpha)),
    )  # fmt: skip
    args[4][720:780] = 0.0
    usable = day["flags"].usable
    block = (np.arange(sl.start, sl.stop) - sl.start) // 60
    many = dg.hot_side_resistance_ratios(
        *(a[sl] for a in args), tr.k, usable[sl], block, 4, c_hot=tr.c_hot
    )
    assert len(many) == 4
    for j, got in enumerate(many[:3]):
        one = slice(sl.start + 60 * j, sl.start + 60 * (j + 1))
        want = dg.hot_side_resistance_ratio(
            *(a[one] for a in args), tr.k, usable[one], c_hot=tr.c_hot
        )
        assert isinstance(got, dg.Estimate)
        assert got.n == want.n and got.reliable == want.reliable
        assert got.value == pytest.approx(want.value, rel=1e-12)
        assert got.stderr == pytest.approx(want.stderr, rel=1e-12)
    assert isinstance(many[3], InsufficientDataError)


SIM_START = 1_735_689_600.0


def _simulated_cooler(
    events: tuple[Any, ...], days: float, **kw: Any
) -> tuple[Any, dict[str, Any], dict[str, float], Any]:
    """One quiet cooler from the simulator (contents 30 kJ/K at 2 W/K, no sensor errors, no
    random use), with ``events``: its spec, its readings (temperatures [K]), its true
    parameters and the simulator's truth."""
    fields: dict[str, Any] = dict(
        ua=0.45, r_hot=0.22, r_cold=0.4, c_air=900.0, c_contents=30_000.0, g_contents=2.0,
        t_amb_mean_c=24.0, t_amb_daily_k=1.5, t_amb_weather_k=0.0, door_per_day=0.0,
        loads_per_day=0.0, cuts_per_30d=0.0,
    )  # fmt: skip
    dev = sm.device_from_ratings("unit-1", **(fields | kw))
    spec = sm.FleetSpec((dev,), SIM_START, seed=2, sensors=False, random_use=False, events=events)
    chunks, truth = sm.simulate(spec, days)
    c = sm.concat(chunks)
    a = {k: v[:, 0] for k, v in c.measured.items()}
    for k in ("t_cabinet", "t_cold", "t_hot", "t_ambient"):
        a[k] = a[k] + K0
    a["t"] = c.t - c.t[0]
    return dev, a, truth.params_at("unit-1", SIM_START), truth


def _fit_simulated(
    a: dict[str, Any], p: dict[str, float], sel: Any = slice(None), **kw: Any
) -> dg.ThermalFit:
    """fit_thermal on the samples ``sel`` of a simulated cooler, with its true S, R and K
    (``kw`` passed on)."""
    t = a["t"][sel]
    temps = [a[k][sel] for k in ("t_cabinet", "t_cold", "t_hot", "t_ambient")]
    flags = dg.flag_samples(t, *temps, a["current"][sel], a["voltage"][sel])
    tm = 0.5 * (temps[1] + temps[2])
    s = np.asarray(ph.seebeck_at_temperature(p["s25"], tm, sm.BETA_S))
    r = np.asarray(ph.resistance_at_temperature(p["r25"], tm, sm.ALPHA_R))
    return dg.fit_thermal(t, *temps, a["current"][sel], s, r, flags.usable, p["k"], 0.3, **kw)


def test_warm_goods_put_in_do_not_inflate_ua() -> None:
    # A day of a cooler from the simulator, with half of its contents (30 kJ/K) replaced by
    # goods at room temperature at noon: about 280 kJ released into the air over the
    # following hours (time constant C_n/g_n = 4 h), as much heat as the walls let in over
    # nine hours. Left in the cabinet balance it would read as UA about 40 % high (value this
    # code produced with the run exclusion switched off); the hours that carry it are left out,
    # so UA stays within the 15 % of the quiet day (same balance, same data quality).
    # Lumped balances: Incropera et al. (2007), ch. 5.
    load = sm.ScheduledEvent("load", "unit-1", SIM_START + 12 * 3600.0, 0.0, 0.5)
    dev, quiet, p, _ = _simulated_cooler((), 1.0)
    _, loaded, _, truth = _simulated_cooler((load,), 1.0)
    assert truth.loads.get("unit-1")
    assert _fit_simulated(quiet, p).ua == pytest.approx(dev.ua, rel=0.15)
    assert _fit_simulated(loaded, p).ua == pytest.approx(dev.ua, rel=0.15)


def test_two_smaller_loads_of_warm_goods_do_not_inflate_ua(monkeypatch: Any) -> None:
    # Two loads three hours apart, each replacing 15 % (then 25 %) of the contents with goods at
    # room temperature, as a busy day brings: each releases a few robust scales of excess heat
    # at its peak and a long tail below one. Left in the cabinet balance they read as UA 30 %
    # and 44 % high (with the run exclusion and the releases switched off, below); a run that
    # began only at two scales and ended below half of one left +18.6 % and +21.7 % (values
    # this code produced with those thresholds). UA stays within the 10 % of the quiet day's
    # (-4.8 % here).
    # Lumped balances: Incropera et al. (2007), ch. 5.
    dev, _quiet, p, _ = _simulated_cooler((), 1.0)
    for frac, first_h in ((0.15, 12.0), (0.25, 10.5)):
        loads = tuple(
            sm.ScheduledEvent("load", "unit-1", SIM_START + (first_h + 3.0 * k) * 3600.0, 0.0, frac)
            for k in range(2)
        )
        _, loaded, _, truth = _simulated_cooler(loads, 1.0)
        assert len(truth.loads["unit-1"]) == 2
        assert _fit_simulated(loaded, p).ua == pytest.approx(dev.ua, rel=0.10)
        with monkeypatch.context() as m:
            m.setattr(cabinet, "warm_goods_runs", lambda res: np.zeros(res.size, dtype=bool))
            m.setattr(cabinet, "RELEASES_MAX", 0)
            assert _fit_simulated(loaded, p).ua > 1.25 * dev.ua


def test_release_of_warm_goods_decays_as_a_lumped_body() -> None:
    # Lumped body through a conductance: θ(t)/θ0 = exp(-t/τ) (Incropera et al. 2007, ch. 5,
    # eq. (5.6)); nothing before the goods go in; the heat given up per watt at the start is
    # τ, checked against scipy's quadrature.
    t = np.array([0.0, 999.0, 1000.0, 4600.0, 1000.0 + 3.0 * 3600.0])
    got = cabinet.release(t, 1000.0, 3600.0)
    assert got.tolist() == pytest.approx([0.0, 0.0, 1.0, math.exp(-1.0), math.exp(-3.0)])
    heat, _ = integrate.quad(lambda x: float(cabinet.release(np.array([x]), 0.0, 3600.0)[0]),
                             0.0, 20 * 3600.0)  # fmt: skip
    assert heat == pytest.approx(3600.0, rel=1e-6)


def test_warm_goods_put_in_on_a_warm_afternoon_are_not_taken_for_ua(monkeypatch: Any) -> None:
    # Two loads, each replacing a fifth of the contents (30 kJ/K) with goods at room
    # temperature, at 14:00 and 17:00 of a day whose room swings ±3 K with its warmest hour at
    # 15:00: their heat goes in step with Ta - Tcab. Fitted over a day from 06:00, the balance
    # without a release of their heat read UA +22.6 % (value this code produced with releases
    # switched off, below); with them, within the 10 % of a quiet day. Fitted over the day
    # that ends at midnight, before their decay shows, no release joins (a step that lasts
    # is not one): the loads still read +41.5 % there, and are left to the next windows.
    # On the quiet day no release joins either. Lumped balances: Incropera et al. (2007),
    # ch. 5.
    loads = tuple(
        sm.ScheduledEvent("load", "unit-1", SIM_START + h * 3600.0, 0.0, 0.2) for h in (14.0, 17.0)
    )
    dev, quiet, p, _ = _simulated_cooler((), 1.5, t_amb_daily_k=3.0)
    _, loaded, _, truth = _simulated_cooler(loads, 1.5, t_amb_daily_k=3.0)
    assert len(truth.loads["unit-1"]) == 2
    from_six = (loaded["t"] >= 6 * 3600.0) & (loaded["t"] <= 30 * 3600.0)
    to_midnight = loaded["t"] <= 24 * 3600.0
    fitted = {
        (name, data_name): _fit_simulated(data, p, sel).ua
        for name, sel in (("from_six", from_six), ("to_midnight", to_midnight))
        for data_name, data in (("loaded", loaded), ("quiet", quiet))
    }
    assert fitted["from_six", "loaded"] == pytest.approx(dev.ua, rel=0.10)
    with monkeypatch.context() as m:
        m.setattr(cabinet, "RELEASES_MAX", 0)
        assert _fit_simulated(loaded, p, from_six).ua > 1.2 * dev.ua
        for name, sel in (("from_six", from_six), ("to_midnight", to_midnight)):
            assert _fit_simulated(quiet, p, sel).ua == fitted[name, "quiet"]
        assert _fit_simulated(loaded, p, to_midnight).ua == fitted["to_midnight", "loaded"]


def test_module_at_one_operating_point_keeps_k_at_its_prior() -> None:
    # A proportionally driven cooler from the simulator (probes read to 0.1 K, no noise or
    # bias): the module never rests and its current stays within 1.9-2.3 A, so the sink
    # balances (Goldsmid 2010, ch. 2) see a single operating point. Fitted from the data
    # alone, K read 10 % high and the cold side's resistance 18 % high (values this code
    # produced with the hold switched off). K is held at its prior (here the true value),
    # and with it both sink resistances come out within 2 %.
    dev, a, p, _ = _simulated_cooler((), 2.0, control="proportional")
    sel = a["t"] >= 86_400.0
    assert np.all(a["current"][sel] > 1.0)
    fit = _fit_simulated(a, p, sel)
    assert not fit.k_from_data
    assert fit.k == pytest.approx(p["k"], rel=1e-9)
    assert 1.0 / fit.g_cold == pytest.approx(dev.r_cold, rel=0.02)
    assert 1.0 / fit.g_hot == pytest.approx(dev.r_hot, rel=0.02)
    # K's prior error is the same in every window: it stays out of UA's own precision
    # (which its changes are judged on) and goes with the offsets that cancel in them.
    assert fit.stderrs["ua_probe"] > fit.stderrs["ua"]
    # Given the unit's own K from windows with two operating points, it is held there instead.
    own = _fit_simulated(a, p, sel, k_settled=1.05 * p["k"])
    assert own.k == pytest.approx(1.05 * p["k"], rel=1e-9) and not own.k_from_data
    # UA's stated response to the cabinet's K against a refit at a K half a per cent away:
    # the balance is linear in K, so only the robust weights may differ (2 % of the slope).
    # A larger step can change which blocks the robust fit leaves out, and UA with them.
    assert own.k_cabinet == pytest.approx(1.05 * p["k"], rel=1e-12)
    assert own.ua_per_k < -1.0  # K·ΔT outweighs the walls' Ta - Tcab: a strong lever
    other = _fit_simulated(a, p, sel, k_settled=1.055 * p["k"])
    slope = (other.ua - own.ua) / (other.k_cabinet - own.k_cabinet)
    assert slope == pytest.approx(own.ua_per_k, rel=0.02)


def test_a_power_cut_is_no_second_operating_point_for_the_sinks() -> None:
    # The proportionally driven cooler above with a 40-minute power cut at hour 36: the fans
    # stop with the module, the cabinet air warms several kelvin within minutes, and the
    # cut's off samples are the only ones of the day. Taken into the sink balances they were
    # a second operating point through paths that were not the usual ones (the fans stood
    # still): K read 34 % high on a simulated unit of the detection bench, and the hot
    # side's hourly resistance followed at it drifted +46 % (values this code produced
    # before). Left out, the day is a single operating point again: K is held at its prior
    # (here the true value) and both sink resistances come out within 2 %, as without a cut
    # (the sink balances: Goldsmid 2010, ch. 2; fans stopped in a cut: common practice, no
    # source).
    cut = sm.ScheduledEvent("power_cut", "unit-1", SIM_START + 36 * 3600.0, 2400.0)
    dev, a, p, truth = _simulated_cooler((cut,), 2.0, control="proportional")
    assert truth.power_cuts.get("unit-1")
    sel = a["t"] >= 86_400.0
    assert np.any(a["current"][sel] < 0.1)  # the cut is inside the fitted day
    fit = _fit_simulated(a, p, sel)
    assert not fit.k_from_data
    assert fit.k == pytest.approx(p["k"], rel=1e-9)
    assert 1.0 / fit.g_cold == pytest.approx(dev.r_cold, rel=0.02)
    assert 1.0 / fit.g_hot == pytest.approx(dev.r_hot, rel=0.02)


def test_contents_lag_of_a_module_that_never_rests_does_not_pull_ua_low() -> None:
    # The same proportionally driven cooler (contents 30 kJ/K at 2 W/K, time constant 4.2 h):
    # its air moves with the load and the contents follow hours late. Without a contents term
    # the day's balance read UA 17 % low and the internal load 2.4 W against a true 1 W
    # (values this code produced with ``contents_tau_s=()``); with it, UA is within 5 % and
    # the internal load within 0.5 W on each of two days. Lumped balances: Incropera et al.
    # (2007), ch. 5.
    dev, a, p, _ = _simulated_cooler((), 3.0, control="proportional")
    for day in (1.0, 2.0):
        sel = (a["t"] >= day * 86_400.0) & (a["t"] < (day + 1.0) * 86_400.0)
        fit = _fit_simulated(a, p, sel)
        assert fit.ua == pytest.approx(dev.ua, rel=0.05)
        assert fit.q_internal == pytest.approx(dev.q_internal, abs=0.5)


@pytest.mark.parametrize(("i_low", "i_high", "reliable"), [(0.08, 0.25, False), (2.0, 4.0, True)])
def test_current_reading_offset_is_carried_into_resistance(
    i_low: float, i_high: float, reliable: bool
) -> None:
    # V = I·R + S·ΔT (Goldsmid 2010, ch. 2) with the current read 10 mA low, one step of a
    # 10 mA converter (common practice, no source). At a few tenths of an ampere that offset
    # moves R by several per cent, beyond anything the voltage noise shows: R must then be
    # marked unreliable, with an error that covers what it got wrong; at a few amperes it is
    # well under 1 % and R stays reliable.
    rng = np.random.default_rng(7)
    n = 600
    r25, s25 = 2.0, 0.05
    i_true = rng.uniform(i_low, i_high, n)
    tc = np.full(n, 285.0) + rng.normal(0, 0.5, n)
    th = tc + rng.uniform(0.5, 20.0, n)
    tm = 0.5 * (tc + th) - 298.15
    v = i_true * r25 * (1 + ph.BI2TE3_RESISTANCE_TEMPCO * tm) + s25 * (th - tc) * (
        1 + ph.BI2TE3_SEEBECK_TEMPCO * tm
    )
    v = v + rng.normal(0, 0.002, n)
    fit = dg.fit_electrical(
        i_true - 0.01,
        v,
        tc,
        th,
        np.ones(n, dtype=bool),
        floating=False,
        options=dg.DiagnosticsOptions(current_offset=0.01),
    )
    se_r = math.sqrt(fit.cov[0, 0])
    assert fit.r_reliable is reliable
    assert abs(fit.r25 - r25) < 3.0 * se_r
    if not reliable:
        assert fit.note is not None and "offset" in fit.note


@pytest.mark.parametrize(
    "offsets_k", [(0.3, -0.3, 0.0, 0.0), (0.0, 0.3, -0.3, 0.0), (-0.3, 0.3, 0.3, -0.3)]
)
def test_stated_errors_cover_constant_probe_offsets(
    offsets_k: tuple[float, float, float, float],
) -> None:
    # Probes that disagree by a few tenths of a kelvin are usual for uncalibrated thermistors
    # (common practice, no source). On the noise-free thermostat day of the tests above such
    # offsets move K by 12-13 % and UA by 15-23 % when the sink balances assume none (values
    # this code produced with ``probe_offset_k`` near zero, checked below so that the test is
    # not vacuous). With a constant heat flow per balance for them, which the switching
    # transients separate from K, K is within 10 %. The stated errors must cover what is
    # left at two standard errors (a coverage factor of 2, JCGM 100:2008 6.2-6.3), UA's as the
    # root-sum-square of its fit error and its probe-offset part.
    tr = Truth()
    a = _arrays(simulate(tr, 1.0, seed=1, noise=QUIET))
    for name, off in zip(("t_cabinet", "t_cold", "t_hot", "t_ambient"), offsets_k, strict=True):
        a[name] = a[name] + off
    a["flags"] = dg.flag_samples(
        a["t"], a["t_cabinet"], a["t_cold"], a["t_hot"], a["t_ambient"], a["i"], a["v"], a["door"]
    )
    assumed_none = _thermal(a, tr, options=dg.DiagnosticsOptions(probe_offset_k=1e-6))
    assert abs(assumed_none.k - tr.k) > 0.1 * tr.k
    f = _thermal(a, tr)
    assert abs(f.k - tr.k) < 0.1 * tr.k
    assert abs(f.k - tr.k) < 2.0 * f.stderr("k")
    ua_se = math.hypot(f.stderr("ua"), f.stderr("ua_probe"))
    assert abs(f.ua - tr.ua) < 2.0 * ua_se


def test_power_cut_aftermath_is_left_out_of_the_cabinet_balance() -> None:
    # A six-hour power cut at hour 44 of a simulated cooler (contents 30 kJ/K, 2 W/K): the air
    # warms to about 14 °C and the contents with it; back on power they give that heat back
    # for hours. Left in, the day after the cut read UA about 19 % high (value this code
    # produced with the warm-spell rule switched off); with the spell and 12 h after it left
    # out, UA is within the 10 % of a quiet day. Windows holding the cut itself keep little of
    # the cabinet's normal behaviour (while the sink balances took the cut's samples, K read
    # 21-24 % high there and UA half its value; with them left out, K within 2 % and UA 3-10 %
    # low: values this code produced): their UA must be refused, not called reliable, or
    # within two of its stated standard errors.
    # Lumped balances: Incropera et al. (2007), ch. 5.
    cut = sm.ScheduledEvent("power_cut", "unit-1", SIM_START + 44 * 3600.0, 6 * 3600.0)
    dev, a, p, truth = _simulated_cooler((cut,), 3.0)

    def fit(from_h: float) -> dg.ThermalFit:
        sel = (a["t"] >= from_h * 3600.0) & (a["t"] < (from_h + 24.0) * 3600.0)
        return _fit_simulated(a, p, sel)

    assert truth.power_cuts.get("unit-1")
    assert fit(48.0).ua == pytest.approx(dev.ua, rel=0.10)
    for from_h in (30.0, 36.0):
        with contextlib.suppress(InsufficientDataError):  # refusing is as good
            f = fit(from_h)
            se = math.hypot(f.stderr("ua"), f.stderr("ua_probe"))
            assert not f.ua_reliable or abs(f.ua - dev.ua) < 2.0 * se


def test_hot_spell_with_the_cooling_at_its_limit_stays_in_the_cabinet_balance() -> None:
    # A unit of a simulated fleet (season weather: a slow anomaly of 5 K s.d. and a 4 K daily
    # swing) through a hot spell: the ambient reaches 36-40 °C, the module runs 97-100 % of
    # the time and the air still climbs to 10-15 °C every afternoon, with warm goods put in
    # on three of its days. Such a spell is the cooling at its limit, not cooling lost: left
    # out like a power cut (with 12 h after it), several windows could not be fitted at all
    # and others kept a few night hours only and read UA up to 16 % high (values this code
    # produced with ``saturated_share=2``). Kept, with the contents node, every 24-h window
    # from day 8 to day 12 is fitted and within 10 % (given the true S, R and K; sensors with
    # noise and bias, doors, loads). Lumped balances: Incropera et al. (2007), ch. 5.
    spec = sm.random_fleet(4, seed=1, start_s=SIM_START, days=13.0)
    season = tuple(
        dataclasses.replace(d, t_amb_weather_k=5.0, t_amb_tau_h=480.0, t_amb_daily_k=4.0)
        for d in spec.devices
    )
    chunks, truth = sm.simulate(dataclasses.replace(spec, devices=season), 13.0)
    c = sm.concat(chunks)
    dev = season[0]
    a = {k: v[:, 0] for k, v in c.measured.items()}
    for k in ("t_cabinet", "t_cold", "t_hot", "t_ambient"):
        a[k] = a[k] + K0
    a["t"] = c.t - c.t[0]
    p = truth.params_at(dev.device_id, SIM_START)
    refused = beyond = 0
    for day in np.arange(8.0, 12.01, 0.5):
        sel = (a["t"] >= day * 86_400.0) & (a["t"] < (day + 1.0) * 86_400.0)
        assert np.mean(a["current"][sel] > 0.05) > 0.95  # at its limit
        assert np.ptp(a["t_cabinet"][sel]) > 4.0  # and the air still warms
        assert _fit_simulated(a, p, sel).ua == pytest.approx(dev.ua, rel=0.10)
        try:
            old = _fit_simulated(a, p, sel, options=dg.DiagnosticsOptions(saturated_share=2.0))
        except InsufficientDataError:
            refused += 1
        else:
            beyond += abs(old.ua / dev.ua - 1.0) > 0.10
    assert refused >= 2 and beyond >= 1


def test_sinks_that_store_heat_are_seen_and_k_is_held_at_its_prior() -> None:
    # A day of a thermostat cooler from the simulator, no sensor errors, with sinks of 150 J/K
    # (cold) and 400 J/K (hot): time constants C·r of 60 s and 88 s against one-minute
    # samples of a cycle a few minutes long. The faces then move within a sample interval in
    # a way the trapezoid rule does not follow, and K fitted from the switching transients
    # came out a third of its value, UA 2.2x (values this code produced with the check off).
    # The fit sees the sinks' time constant (tens of seconds, against well under one for
    # massless faces) and holds K at its prior, here 20 % high, as at one operating point.
    dev, massive, p, _ = _simulated_cooler((), 1.0, c_cold_sink=150.0, c_hot_sink=400.0)
    _, massless, _, _ = _simulated_cooler((), 1.0)
    k_prior = 1.2 * p["k"]

    def fit(a: dict[str, Any], **kw: Any) -> dg.ThermalFit:
        t = a["t"]
        temps = [a[k] for k in ("t_cabinet", "t_cold", "t_hot", "t_ambient")]
        flags = dg.flag_samples(t, *temps, a["current"], a["voltage"])
        tm = 0.5 * (temps[1] + temps[2])
        s = np.asarray(ph.seebeck_at_temperature(p["s25"], tm, sm.BETA_S))
        r = np.asarray(ph.resistance_at_temperature(p["r25"], tm, sm.ALPHA_R))
        return dg.fit_thermal(t, *temps, a["current"], s, r, flags.usable, k_prior, 0.3, **kw)

    held = fit(massive)
    assert not held.faces_followed and not held.k_from_data
    assert held.k == pytest.approx(k_prior)
    assert held.sink_taus is not None
    tau_c, _, tau_h, sd_h = held.sink_taus
    assert 20.0 < max(tau_c, tau_h) < 120.0 and tau_h > 3.0 * sd_h
    assert held.note is not None and "sinks store heat" in held.note
    free = fit(massive, options=dg.DiagnosticsOptions(max_sink_tau_share=math.inf))
    assert free.faces_followed and free.k < 0.5 * p["k"]  # the bias the check avoids
    quiet = fit(massless)
    assert quiet.faces_followed and quiet.k_from_data
    assert quiet.sink_taus is not None
    assert abs(quiet.sink_taus[0]) < 1.0 and abs(quiet.sink_taus[2]) < 1.0
    assert quiet.k == pytest.approx(p["k"], rel=0.1)
    assert quiet.ua == pytest.approx(dev.ua, rel=0.15)


def test_sinks_that_store_heat_hold_k_only_where_the_cycle_is_short() -> None:
    # The generator's cooler (sinks of 150/300 J/K, time constants about a minute, stepped at
    # 5 s) with its 1.2 K band: runs of about seven samples between switches, and K fitted
    # from the transients within 1 % (the noise-free test above). With a band of 0.3 K the
    # cycle is short enough for the transients to fill a fifth of the time, and K fitted
    # there came out 32 % low (value this code produced with the check off): held.
    long_cycle = Truth()
    short_cycle = dataclasses.replace(Truth(), band_k=0.15)
    fits = {
        tr.band_k: _thermal(_arrays(simulate(tr, 1.0, seed=1, noise=QUIET)), tr, k_prior=0.45)
        for tr in (long_cycle, short_cycle)
    }
    assert fits[0.6].faces_followed and fits[0.6].k_from_data
    assert fits[0.6].k == pytest.approx(long_cycle.k, rel=0.05)
    assert not fits[0.15].faces_followed and fits[0.15].k == pytest.approx(0.45)


def test_hours_where_the_sinks_store_heat_are_not_reliable_and_locked_ones_give_none() -> None:
    # Sampling theorem (C. E. Shannon, Proc. IRE 37, 10, 1949): with the on/off cycle locked to
    # four samples, the samples see the same phases of every cycle; where the hot sink stores
    # heat the rise lags the heat within each cycle, so that hour's ratio is biased (such
    # hours read up to twice the true resistance on simulated units; value this code
    # produced) and gives none. Other hours there carry a steady bias of some tens of per
    # cent: served, not called reliable. Massless faces follow the heat at every sample, and
    # both hours stay reliable there.
    n = 120
    t = 60.0 * np.arange(n)
    on = np.concatenate([np.tile([False, False, False, True], 15), np.ones(60, dtype=bool)])
    i = np.where(on, 3.0, 0.0)
    th = np.full(n, 300.0 + 6.0)
    ta = np.full(n, 300.0)
    tc = np.full(n, 280.0)
    s, r = np.full(n, 0.05), np.full(n, 2.0)
    block = np.repeat(np.arange(2), 60)
    usable = np.ones(n, dtype=bool)
    args = (t, th, ta, tc, i, s, r, 0.1, usable, block, 2)
    locked, steady = dg.hot_side_resistance_ratios(*args, faces_followed=False)
    assert isinstance(locked, InsufficientDataError) and "locked" in str(locked)
    assert isinstance(steady, dg.Estimate) and not steady.reliable
    assert steady.note is not None and "stores heat" in steady.note
    fast = dg.hot_side_resistance_ratios(*args)
    assert all(isinstance(e, dg.Estimate) and e.reliable for e in fast)
    assert isinstance(fast[1], dg.Estimate) and fast[1].value == steady.value
