"""Checks of the thermoelectric module model against published closed forms.

References named beside each check:
- A. F. Ioffe, Semiconductor Thermoelements and Thermoelectric Cooling, 1957.
- H. J. Goldsmid, Introduction to Thermoelectricity, Springer, 2010, ch. 2.
- D. M. Rowe (ed.), CRC Handbook of Thermoelectrics, CRC Press, 1995.
- S. Lineykin, S. Ben-Yaakov, IEEE Trans. Ind. Appl. 43(2), 505-512, 2007.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.optimize import minimize_scalar

from tecfleet.analytics import physics as ph
from tecfleet.analytics.errors import (
    InconsistentRatingsError,
    OutOfDomainError,
    PhysicsError,
)

# A 127-couple module in the range of common 40 mm parts; values produced by
# this code from the datasheet-style ratings below, not a reference.
S, R, K = 0.0483, 1.75, 0.544


# --- closed forms -----------------------------------------------------------


@pytest.mark.parametrize(("tc", "th"), [(280.0, 300.0), (260.0, 310.0), (300.0, 305.0)])
def test_best_cop_current_and_value_match_numerical_optimum(tc: float, th: float) -> None:
    # Ioffe (1957); Goldsmid (2010) ch. 2: I_opt = SΔT/(R(M-1)),
    # COP_max = Tc(M - Th/Tc)/(ΔT(M+1)), M = sqrt(1+Z·Tm). scipy's bounded
    # Brent search with xatol 1e-9 A finds the optimum independently; COP is
    # flat at its maximum, so the current agrees to ~1e-5 relative and the COP
    # to ~1e-9.
    res = minimize_scalar(
        lambda i: -ph.cop(i, tc, th, S, R, K),
        bounds=(1e-3, 20.0),
        method="bounded",
        options={"xatol": 1e-9},
    )
    assert res.success
    assert ph.current_for_best_cop(tc, th, S, R, K) == pytest.approx(res.x, rel=1e-5)
    assert ph.best_cop(tc, th, S, R, K) == pytest.approx(-res.fun, rel=1e-9)


def test_most_cooling_current_matches_numerical_optimum() -> None:
    # Goldsmid (2010) ch. 2: dQc/dI = 0 at I = S·Tc/R, Qc,max = S²Tc²/(2R) - KΔT.
    tc, th = 275.0, 310.0
    res = minimize_scalar(
        lambda i: -ph.cold_side_heat(i, tc, th, S, R, K),
        bounds=(0.0, 30.0),
        method="bounded",
        options={"xatol": 1e-9},
    )
    assert ph.current_for_max_cooling(tc, S, R) == pytest.approx(res.x, rel=1e-6)
    assert ph.max_cooling(tc, th, S, R, K) == pytest.approx(-res.fun, rel=1e-12)


def test_cooling_at_zero_delta_t_is_textbook_expression() -> None:
    # Goldsmid (2010) ch. 2: at ΔT = 0 and I = S·Tc/R, Qc = S²Tc²/(2R);
    # floating-point only, hence 1e-12.
    tc = 300.0
    i = ph.current_for_max_cooling(tc, S, R)
    assert ph.cold_side_heat(i, tc, tc, S, R, K) == pytest.approx(S**2 * tc**2 / (2 * R), rel=1e-12)


@pytest.mark.parametrize("th", [273.15, 298.15, 323.15])
def test_no_cooling_at_delta_t_max(th: float) -> None:
    # Ioffe (1957): ΔTmax = ½·Z·Tc², reached at I = S·Tc/R with Qc = 0.
    z = ph.figure_of_merit(S, R, K)
    dt = ph.max_delta_t_at_hot_side(th, z)
    tc = th - dt
    assert ph.max_delta_t(tc, z) == pytest.approx(dt, rel=1e-12)
    i = ph.current_for_max_cooling(tc, S, R)
    assert abs(float(ph.cold_side_heat(i, tc, th, S, R, K))) < 1e-9 * S**2 * float(tc) ** 2 / R


def test_best_cop_approaches_carnot_as_z_grows() -> None:
    # Goldsmid (2010) ch. 2: COP_max -> Tc/ΔT as Z·Tm -> infinity. With
    # Z·Tm = 1e8, M ≈ 1e4 and the shortfall is ~(1+Th/Tc)/M ≈ 2e-4 relative.
    tc, th = 280.0, 300.0
    k_small = S**2 / (R * 1e8 / 290.0)
    assert ph.best_cop(tc, th, S, R, k_small) == pytest.approx(ph.carnot_cop(tc, th), rel=5e-4)


def test_ratios_are_one_at_the_optimum() -> None:
    # At Ioffe's optimum current both ratios are 1 by definition.
    tc, th = 280.0, 305.0
    i = ph.current_for_best_cop(tc, th, S, R, K)
    assert ph.cop_fraction_of_best(i, tc, th, S, R, K) == pytest.approx(1.0, rel=1e-12)
    assert ph.current_fraction_of_best(i, tc, th, S, R, K) == pytest.approx(1.0, rel=1e-12)
    assert ph.cop_fraction_of_best(2 * i, tc, th, S, R, K) < 1.0


def test_arrays_broadcast() -> None:
    i = np.linspace(0.5, 6.0, 5)
    out = ph.cold_side_heat(i, 280.0, 300.0, S, R, K)
    assert isinstance(out, np.ndarray) and out.shape == (5,)
    expected = np.array([float(ph.cold_side_heat(float(x), 280.0, 300.0, S, R, K)) for x in i])
    assert np.allclose(out, expected, rtol=1e-14, atol=0.0)


# --- ratings ----------------------------------------------------------------

# Ratings of a common 127-couple, 40 mm x 40 mm, 6 A module at Th = 25 °C:
# Imax 6.4 A, Vmax 14.4 V, ΔTmax 66 K, Qmax 51.4 W (from memory, a widely
# quoted datasheet set; not a published worked example).
TH_RATED = 298.15
I_MAX, V_MAX, DT_MAX, Q_MAX = 6.4, 14.4, 66.0, 51.4


def test_ratings_conversion_closed_form() -> None:
    # Lineykin & Ben-Yaakov (2007): S = Vmax/Th, R = Vmax(Th-ΔTmax)/(Imax·Th),
    # K = Imax·Vmax(Th-ΔTmax)/(2·Th·ΔTmax). Values computed by hand from those
    # equations to 4 significant figures.
    p = ph.parameters_from_ratings(I_MAX, V_MAX, DT_MAX, TH_RATED)
    assert p.seebeck == pytest.approx(0.04830, rel=5e-4)
    assert p.resistance == pytest.approx(1.752, rel=5e-4)
    assert p.conductance == pytest.approx(0.5436, rel=5e-4)


def test_ratings_example_is_physically_plausible() -> None:
    # The Seebeck coefficient per couple should be about 2 x 200 µV/K for
    # bismuth telluride (Rowe 1995, property tables; from memory) and ZT near
    # room temperature 0.6..1 for commercial modules (Goldsmid 2010, ch. 2;
    # from memory). Qmax from the model should be within the 10 % the
    # constant-property model is good to against datasheets (common practice,
    # no source).
    p = ph.parameters_from_ratings(I_MAX, V_MAX, DT_MAX, TH_RATED, q_max=Q_MAX, n_couples=127)
    per_couple = p.seebeck / 127
    assert 320e-6 < per_couple < 440e-6
    assert (
        0.6 < ph.dimensionless_figure_of_merit(300.0, p.seebeck, p.resistance, p.conductance) < 1.0
    )
    rt = ph.ratings_from_parameters(p, TH_RATED)
    for got, rated in [
        (rt.i_max, I_MAX),
        (rt.v_max, V_MAX),
        (rt.dt_max, DT_MAX),
        (rt.q_max, Q_MAX),
    ]:
        assert got == pytest.approx(rated, rel=0.10)


@pytest.mark.parametrize("th", [273.15, 298.15, 323.15])
def test_parameters_ratings_round_trip(th: float) -> None:
    # The inversion is exact within the model; only rounding remains (1e-10).
    p = ph.ModuleParameters(S, R, K)
    rt = ph.ratings_from_parameters(p, th)
    assert rt.v_max == pytest.approx(S * th, rel=1e-12)
    back = ph.parameters_from_ratings(rt.i_max, rt.v_max, rt.dt_max, th)
    assert (back.seebeck, back.resistance, back.conductance) == pytest.approx((S, R, K), rel=1e-10)
    fitted = ph.parameters_from_ratings(rt.i_max, rt.v_max, rt.dt_max, th, q_max=rt.q_max)
    assert (fitted.seebeck, fitted.resistance, fitted.conductance) == pytest.approx(
        (S, R, K), rel=1e-6
    )


def test_least_squares_reconciles_slightly_off_ratings() -> None:
    # Four ratings each moved by a few percent: the fit must land nearer every
    # rating than the worst of the perturbations did (self-produced values).
    p = ph.ModuleParameters(S, R, K)
    rt = ph.ratings_from_parameters(p, TH_RATED)
    noisy = (rt.i_max * 1.02, rt.v_max * 0.98, rt.dt_max * 1.01, rt.q_max * 1.04)
    fit = ph.parameters_from_ratings(*noisy[:3], TH_RATED, q_max=noisy[3])
    back = ph.ratings_from_parameters(fit, TH_RATED)
    got = np.array([back.i_max, back.v_max, back.dt_max, back.q_max])
    assert np.max(np.abs(got / np.array(noisy) - 1.0)) < 0.04


def test_least_squares_spreads_the_qmax_mismatch_over_all_four_ratings() -> None:
    # Every model rating set satisfies Qmax = Imax·Vmax·(Th + ΔTmax)/(2·Th)
    # (Lineykin & Ben-Yaakov 2007), i.e. in logs the one constraint
    # c·e = -g0 on the relative residuals e of (Imax, Vmax, ΔTmax, Qmax), with
    # c = (-1, -1, -ΔTmax/(Th + ΔTmax), 1) and g0 the rated ratings' mismatch
    # ln Qmax - ln(Imax·Vmax·(Th + ΔTmax)/(2·Th)). The least-squares fit is then,
    # to first order, the minimum-norm solution e = -g0·c/|c|² (Lagrange
    # multiplier). Ignoring Qmax instead leaves e = (0, 0, 0, exp(-g0) - 1):
    # ~0.037 on Qmax alone, which this check tells apart from ~0.012 on each.
    p = ph.ModuleParameters(S, R, K)
    rt = ph.ratings_from_parameters(p, TH_RATED)
    i, v, dt, q = rt.i_max * 1.02, rt.v_max * 0.98, rt.dt_max * 1.01, rt.q_max * 1.04
    th = TH_RATED
    g0 = math.log(q) - math.log(i * v * (th + dt) / (2.0 * th))
    c = np.array([-1.0, -1.0, -dt / (th + dt), 1.0])
    expected = -g0 * c / float(c @ c)

    fit = ph.parameters_from_ratings(i, v, dt, th, q_max=q)
    back = ph.ratings_from_parameters(fit, th)
    got = np.array([back.i_max, back.v_max, back.dt_max, back.q_max]) / np.array([i, v, dt, q])
    # Second-order terms are of order g0²/2 ≈ 7e-4 here: allow 1e-3.
    assert got - 1.0 == pytest.approx(expected, abs=1e-3)

    # The fit without Qmax reproduces the other three exactly and misses Qmax by
    # the whole mismatch; the fit with it must not.
    three = ph.ratings_from_parameters(ph.parameters_from_ratings(i, v, dt, th), th)
    assert three.q_max / q - 1.0 == pytest.approx(math.expm1(-g0), rel=1e-9)
    assert abs(back.q_max / q - 1.0) < 0.5 * abs(three.q_max / q - 1.0)


def test_inconsistent_qmax_is_refused_and_named() -> None:
    with pytest.raises(InconsistentRatingsError, match="Qmax") as err:
        ph.parameters_from_ratings(I_MAX, V_MAX, DT_MAX, TH_RATED, q_max=2 * Q_MAX)
    assert err.value.rating == "q_max"
    assert isinstance(err.value, PhysicsError) and isinstance(err.value, ValueError)


def test_inconsistent_vmax_for_couple_count_is_named() -> None:
    # 14.4 V over 31 couples would need ~1.6 mV/K per couple, far outside
    # bismuth telluride (Rowe 1995; from memory).
    with pytest.raises(InconsistentRatingsError, match="Vmax") as err:
        ph.parameters_from_ratings(I_MAX, V_MAX, DT_MAX, TH_RATED, n_couples=31)
    assert err.value.rating == "v_max"


def test_impossible_dtmax_is_named() -> None:
    with pytest.raises(InconsistentRatingsError, match="ΔTmax") as err:
        ph.parameters_from_ratings(I_MAX, V_MAX, 200.0, TH_RATED)
    assert err.value.rating == "dt_max"
    with pytest.raises(InconsistentRatingsError, match="Imax"):
        ph.parameters_from_ratings(-1.0, V_MAX, DT_MAX, TH_RATED)


def test_series_and_parallel_arrays() -> None:
    # Series: same current, voltages and heats add; parallel: same voltage,
    # currents and heats add (Rowe 1995, module arrays). Compared against n
    # copies of one module evaluated directly.
    one = ph.ModuleParameters(S, R, K, 127)
    tc, th, i = 280.0, 305.0, 3.0
    ser = ph.modules_in_series(one, 3)
    assert ser.n_couples == 381
    assert ph.module_voltage(i, tc, th, ser.seebeck, ser.resistance) == pytest.approx(
        3 * ph.module_voltage(i, tc, th, S, R), rel=1e-12
    )
    assert ph.cold_side_heat(i, tc, th, ser.seebeck, ser.resistance, ser.conductance) == (
        pytest.approx(3 * ph.cold_side_heat(i, tc, th, S, R, K), rel=1e-12)
    )
    par = ph.modules_in_parallel(one, 2)
    assert ph.module_voltage(2 * i, tc, th, par.seebeck, par.resistance) == pytest.approx(
        ph.module_voltage(i, tc, th, S, R), rel=1e-12
    )
    assert ph.cold_side_heat(2 * i, tc, th, par.seebeck, par.resistance, par.conductance) == (
        pytest.approx(2 * ph.cold_side_heat(i, tc, th, S, R, K), rel=1e-12)
    )
    rt_one, rt_ser = ph.ratings_from_parameters(one, 300.0), ph.ratings_from_parameters(ser, 300.0)
    assert rt_ser.dt_max == pytest.approx(rt_one.dt_max, rel=1e-12)
    assert rt_ser.i_max == pytest.approx(rt_one.i_max, rel=1e-12)


# --- material sanity --------------------------------------------------------

# Bismuth telluride near 300 K: α ≈ 200 µV/K per leg, ρ ≈ 1e-5 ohm·m,
# λ ≈ 1.5 W/(m·K) (Rowe 1995, CRC Handbook of Thermoelectrics, property
# tables; from memory). Leg 1.4 x 1.4 mm, 1.6 mm long (common practice, no source).
N_COUPLES = 127


def _handbook_module() -> ph.ModuleParameters:
    return ph.module_from_leg_properties(
        seebeck_leg=200e-6,
        resistivity=1e-5,
        thermal_conductivity=1.5,
        leg_area=1.4e-3**2,
        leg_length=1.6e-3,
        n_couples=N_COUPLES,
    )


def test_handbook_material_module_has_commercial_zt() -> None:
    # ZT = α²/(ρλ)·T for identical legs (Goldsmid 2010 ch. 2) = 0.80 at 300 K;
    # commercial modules sit at 0.6..1 (Goldsmid 2010; from memory).
    m = _handbook_module()
    zt = ph.dimensionless_figure_of_merit(300.0, m.seebeck, m.resistance, m.conductance)
    assert 0.6 < zt < 1.0
    assert zt == pytest.approx(200e-6**2 / (1e-5 * 1.5) * 300.0, rel=1e-12)


@pytest.mark.parametrize("current", [5.0, 6.0])
@pytest.mark.parametrize("dt", [0.0, 40.0, 70.0])
def test_per_leg_voltage_stays_below_100_mv(current: float, dt: float) -> None:
    # Under about 100 mV per leg at 5-6 A (common practice, no source).
    m = _handbook_module()
    v = ph.module_voltage(current, 300.0 - dt, 300.0, m.seebeck, m.resistance)
    assert 0.0 < float(v) / (2 * N_COUPLES) < 0.100


# --- temperature dependence -------------------------------------------------


def test_resistance_temperature_coefficient_is_plausible() -> None:
    # Carrier density fixed by doping, acoustic-phonon scattering, one parabolic
    # band: ρ ∝ T^(3/2) for non-degenerate carriers (mobility ∝ T^(-3/2)) and
    # ρ ∝ T for degenerate ones (mobility ∝ T^(-1)), partly degenerate carriers in
    # between (standard transport theory, from memory). So (1/ρ)dρ/dT lies within
    # 1/T..1.5/T = 0.0034..0.0050 /K at 298 K; the from-memory module figure must
    # lie in that bracket. Not a check against measured Bi2Te3 data.
    t = 298.15
    assert 1.0 / t <= ph.BI2TE3_RESISTANCE_TEMPCO <= 1.5 / t


def test_seasonal_swing_is_not_mistaken_for_wear() -> None:
    # Same module (R25 = 1.75 ohm) measured in winter (15 °C mean) and in
    # summer (38 °C mean): the raw readings differ by ~10 %, the corrected
    # ones agree to rounding.
    winter = ph.resistance_at_temperature(1.75, 288.15)
    summer = ph.resistance_at_temperature(1.75, 311.15)
    assert summer / winter > 1.09
    assert ph.resistance_at_25c(winter, 288.15) == pytest.approx(1.75, rel=1e-12)
    assert ph.resistance_at_25c(summer, 311.15) == pytest.approx(1.75, rel=1e-12)
    worn = 1.05 * summer
    assert ph.resistance_at_25c(worn, 311.15) == pytest.approx(1.05 * 1.75, rel=1e-12)


def test_module_at_temperature_scales_s_and_r_only() -> None:
    m = ph.ModuleParameters(S, R, K, 127)
    hot = ph.module_at_temperature(m, 318.15)
    assert hot.seebeck == pytest.approx(S * (1 + 20 * ph.BI2TE3_SEEBECK_TEMPCO), rel=1e-12)
    assert hot.resistance == pytest.approx(R * (1 + 20 * ph.BI2TE3_RESISTANCE_TEMPCO), rel=1e-12)
    assert hot.conductance == K and hot.n_couples == 127
    with pytest.raises(OutOfDomainError):
        ph.resistance_at_25c(1.75, 300.0, alpha=0.05)


# --- properties over the documented domain ----------------------------------

temps = st.floats(min_value=213.15, max_value=423.15)
currents = st.floats(min_value=0.01, max_value=15.0)
seebecks = st.floats(min_value=1e-3, max_value=0.2)
resistances = st.floats(min_value=0.05, max_value=20.0)
conductances = st.floats(min_value=0.01, max_value=5.0)


@settings(max_examples=150, deadline=None)
@given(currents, temps, temps, seebecks, resistances, conductances)
def test_energy_balance_always_holds(
    i: float, tc: float, th: float, s: float, r: float, k: float
) -> None:
    # First law for the module (Goldsmid 2010 ch. 2): Qh = Qc + V·I.
    qc = float(ph.cold_side_heat(i, tc, th, s, r, k))
    qh = float(ph.hot_side_heat(i, tc, th, s, r, k))
    p = float(ph.input_power(i, tc, th, s, r))
    v = float(ph.module_voltage(i, tc, th, s, r))
    assert all(math.isfinite(x) for x in (qc, qh, p, v))
    assert p == pytest.approx(v * i, rel=1e-12)
    scale = abs(qh) + abs(qc) + abs(p)
    assert abs(qh - (qc + p)) <= 1e-12 * scale


@settings(max_examples=150, deadline=None)
@given(
    currents, temps, st.floats(min_value=0.5, max_value=150.0), seebecks, resistances, conductances
)
def test_cop_never_exceeds_carnot(
    i: float, tc: float, dt: float, s: float, r: float, k: float
) -> None:
    # Second law: a cooler's COP cannot exceed Tc/(Th - Tc).
    th = tc + dt
    assume(th <= 423.15)
    c = ph.cop(i, tc, th, s, r, k)
    assert math.isfinite(c)
    assert c <= ph.carnot_cop(tc, th)
    assert ph.best_cop(tc, th, s, r, k) <= ph.carnot_cop(tc, th)
    assert c <= ph.best_cop(tc, th, s, r, k) * (1 + 1e-12)


@settings(max_examples=60, deadline=None)
@given(st.one_of(st.floats(max_value=213.14), st.floats(min_value=423.16)).filter(math.isfinite))
def test_temperature_outside_domain_is_refused(t: float) -> None:
    with pytest.raises(OutOfDomainError):
        ph.cold_side_heat(1.0, t, 300.0, S, R, K)
    with pytest.raises(OutOfDomainError):
        ph.resistance_at_25c(R, t)


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda: ph.cold_side_heat(1.0, 280.0, 300.0, S, -R, K), "resistance"),
        (lambda: ph.module_voltage(1.0, -5.0, 300.0, S, R), "absolute zero"),
        (lambda: ph.figure_of_merit(S, R, 0.0), "conductance"),
        (lambda: ph.cop(0.0, 280.0, 300.0, S, R, K), "power"),
        (lambda: ph.best_cop(300.0, 300.0, S, R, K), "t_hot > t_cold"),
        (lambda: ph.carnot_cop(300.0, 290.0), "t_hot > t_cold"),
        (lambda: ph.module_voltage(float("nan"), 280.0, 300.0, S, R), "finite"),
        (lambda: ph.ModuleParameters(S, R, K, 0), "n_couples"),
        (lambda: ph.modules_in_series(ph.ModuleParameters(S, R, K), 0), "n must"),
    ],
)
def test_clear_errors_outside_domain(call: Callable[[], object], match: str) -> None:
    with pytest.raises(OutOfDomainError, match=match):
        call()
