"""Checks of sinks, cabinet model and whole-cooler steady state.

References named beside each check:
- J. P. Holman, Heat Transfer, 10th ed., McGraw-Hill, 2010 (Table 3-1).
- F. P. Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed.,
  Wiley, 2007 (ch. 3 fins, Table 4.1 shape factors, ch. 5 lumped capacitance).
- ASHRAE Handbook—Fundamentals, insulation property tables.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.typing import NDArray
from scipy.integrate import solve_bvp, solve_ivp
from scipy.optimize import root as scipy_root

from tecfleet.analytics import heat_paths as hp
from tecfleet.analytics import physics as ph
from tecfleet.analytics.errors import NoConvergenceError, OutOfDomainError

# A 127-couple module from datasheet-style ratings (see test_physics; from memory).
MODULE = ph.parameters_from_ratings(6.4, 14.4, 66.0, 298.15)
R_HOT, R_COLD = 0.15, 0.30  # sink resistances of a small cooler [K/W] (common practice, no source)


# --- cabinet construction ---------------------------------------------------


def test_holman_cubical_furnace_example() -> None:
    # Holman, Heat Transfer, worked example on a small cubical furnace (example
    # number and printed answer from memory): 50 x 50 x 50 cm inside, 10 cm
    # fireclay brick walls, k = 1.04 W/(m·K), 500 °C inside, 50 °C outside.
    # Walls 6 x 2.5 m, edges 12 x 0.27 m, corners 8 x 0.015 m: S = 18.36 m and
    # q = 8.592 kW, printed to 4 figures, hence rel 1e-3.
    assert hp.box_shape_factor(0.5, 0.5, 0.5, 0.1) == pytest.approx(18.36, rel=1e-3)
    q = hp.cabinet_ua(0.5, 0.5, 0.5, 0.1, 1.04) * (500.0 - 50.0)
    assert q == pytest.approx(8592.0, rel=1e-3)


@pytest.mark.parametrize("k_foam", [0.022, 0.025])
def test_foam_box_ua_lies_between_one_dimensional_bounds(k_foam: float) -> None:
    # About 50 litres inside (0.40 x 0.35 x 0.357 m), 50 mm polyurethane foam
    # with k = 0.022-0.025 W/(m·K) (ASHRAE Handbook—Fundamentals, insulation
    # tables; from memory). Plane-wall conduction through the inner area
    # underestimates the loss, through the outer area overestimates it
    # (Holman 2010, discussion of Table 3-1), so UA must fall between.
    a, b, c, dx = 0.40, 0.35, 0.357, 0.05
    assert a * b * c == pytest.approx(0.050, rel=0.01)
    ua = hp.cabinet_ua(a, b, c, dx, k_foam)
    area_in = 2 * (a * b + b * c + a * c)
    ao, bo, co = a + 2 * dx, b + 2 * dx, c + 2 * dx
    area_out = 2 * (ao * bo + bo * co + ao * co)
    assert k_foam * area_in / dx < ua < k_foam * area_out / dx
    # Still-air films of about 8 W/(m²·K) each side (from memory) add a small
    # series resistance (~0.25 K/W against ~2 K/W for the foam): UA drops by
    # about a tenth; allow up to 15 %.
    with_films = hp.cabinet_ua(a, b, c, dx, k_foam, h_inside=8.0, h_outside=8.0)
    assert 0.85 * ua < with_films < ua


def test_thin_box_edges_are_refused() -> None:
    # Table 3-1's edge factor needs each inner dimension > Δx/5 (Holman 2010).
    with pytest.raises(OutOfDomainError, match="wall_thickness/5"):
        hp.box_shape_factor(0.5, 0.5, 0.01, 0.1)


# --- sinks ------------------------------------------------------------------


def test_fin_efficiency_matches_fin_equation_solved_numerically() -> None:
    # Incropera (2007) ch. 3: θ'' = m²θ, θ(0) = 1, adiabatic tip at the
    # corrected length Lc; η = q / (h·A_fin·θb) = -θ'(0) / (m²·Lc).
    # scipy.solve_bvp at tol 1e-8 on a fine mesh: agreement to 1e-5.
    h, t, length, k = 40.0, 1.5e-3, 30e-3, 205.0  # aluminium fin (k from memory)
    m = math.sqrt(2 * h / (k * t))
    lc = length + t / 2
    x = np.linspace(0.0, lc, 200)

    def fun(_x: NDArray[np.float64], y: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.vstack([y[1], m**2 * y[0]])

    def bc(ya: NDArray[np.float64], yb: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.array([ya[0] - 1.0, yb[1]])

    sol = solve_bvp(fun, bc, x, np.ones((2, x.size)), tol=1e-8)
    assert sol.success
    eta_numeric = -sol.sol(0.0)[1] / (m**2 * lc)
    assert hp.straight_fin_efficiency(h, t, length, k) == pytest.approx(eta_numeric, rel=1e-5)


def test_fin_array_resistance_equals_base_plus_fin_conductances() -> None:
    # Incropera (2007) ch. 3: q = h·(A_b + ηf·A_f)·θb is the same as
    # q = ηo·h·A_t·θb with ηo = 1 - (A_f/A_t)(1 - ηf).
    h, a_fin, a_base = 25.0, 0.12, 0.01
    eta_f = hp.straight_fin_efficiency(h, 1.2e-3, 35e-3, 205.0)
    eta_o = hp.overall_surface_efficiency(a_fin, a_fin + a_base, eta_f)
    r = hp.sink_resistance(h, a_fin + a_base, eta_o, contact_resistance=0.02)
    assert r == pytest.approx(1.0 / (h * (a_base + eta_f * a_fin)) + 0.02, rel=1e-12)


# --- cabinet dynamics -------------------------------------------------------


def test_cabinet_air_follows_lumped_capacitance_solution() -> None:
    # Incropera (2007) ch. 5, lumped capacitance: with the contents decoupled,
    # T_air = T_ss + (T0 - T_ss)·exp(-UA·t/C), T_ss = T_amb + (q_int - Qc)/UA.
    # solve_ivp at rtol 1e-10 reproduces it to ~1e-7 K.
    ua, c_air, qc, q_int, ta = 0.45, 2000.0, 12.0, 2.0, 303.15
    t_ss = ta + (q_int - qc) / ua
    times = np.linspace(0.0, 20000.0, 9)
    sol = solve_ivp(
        hp.cabinet_rhs,
        (0.0, times[-1]),
        [ta, ta],
        t_eval=times,
        args=(ta, qc, ua, c_air, 5e4, 0.0, q_int),
        rtol=1e-10,
        atol=1e-10,
    )
    expected = t_ss + (ta - t_ss) * np.exp(-ua * times / c_air)
    np.testing.assert_allclose(sol.y[0], expected, atol=1e-6)
    np.testing.assert_allclose(sol.y[1], ta, atol=1e-9)


def test_cabinet_with_contents_settles_at_network_steady_state() -> None:
    # Both nodes end at T_amb + (q_int - Qc)/UA (energy balance of the
    # network); Qc given as a function of state (a proportional controller
    # Qc = g·(T_air - T_set)), whose steady state is then the linear solution
    # T = (UA·T_amb + q_int + g·T_set)/(UA + g).
    ua, ta, tset, g, q_int = 0.45, 303.15, 278.15, 3.0, 1.0

    def qc(_t: float, y: NDArray[np.float64]) -> float:
        return g * (float(y[0]) - tset)

    sol = solve_ivp(
        hp.cabinet_rhs,
        (0.0, 4e5),
        [ta, ta],
        args=(ta, qc, ua, 600.0, 2e4, 1.5, q_int),
        method="LSODA",
        rtol=1e-9,
        atol=1e-9,
    )
    t_expected = (ua * ta + q_int + g * tset) / (ua + g)
    assert sol.y[0, -1] == pytest.approx(t_expected, abs=1e-5)
    assert sol.y[1, -1] == pytest.approx(t_expected, abs=1e-5)


def test_air_heat_capacity_of_fifty_litres() -> None:
    # ρ·cp·V with ρ = 1.204 kg/m³ at 20 °C, 1 atm (ISO 2533 ideal-gas value
    # scaled to 20 °C) and cp = 1006 J/(kg·K) (ASHRAE ch. 1): about 60.6 J/K.
    assert hp.air_heat_capacity(0.05, 293.15) == pytest.approx(1.204 * 1006 * 0.05, rel=1e-3)


# --- whole cooler -----------------------------------------------------------

UA = hp.cabinet_ua(0.40, 0.35, 0.357, 0.05, 0.023)


def _check_balances(op: hp.OperatingPoint, ta: float, q_int: float, s: float, r: float) -> None:
    # Every balance of the network and of the module (Goldsmid 2010 ch. 2)
    # closes at the solution; the solver stops at residuals < 1e-7 K.
    k = MODULE.conductance
    assert op.qc == pytest.approx(UA * (ta - op.t_cabinet) + q_int, abs=1e-6)
    assert op.qc == pytest.approx((op.t_cabinet - op.tc) / R_COLD, abs=1e-6)
    assert op.qh == pytest.approx((op.th - ta) / R_HOT, abs=1e-6)
    assert op.qh == pytest.approx(op.qc + op.power, rel=1e-12)
    assert op.voltage == pytest.approx(s * (op.th - op.tc) + op.current * r, rel=1e-12)
    assert op.qc == pytest.approx(ph.cold_side_heat(op.current, op.tc, op.th, s, r, k), rel=1e-12)
    # The Carnot bound applies while the module pumps heat uphill; at a tiny current with an
    # internal load the cold face can end up warmer than the hot face, where it has no meaning.
    if op.th > op.tc and op.qc > 0:
        assert op.cop <= ph.carnot_cop(op.tc, op.th)


@pytest.mark.parametrize("current", [0.5, 2.0, 4.0, 6.0])
def test_current_driven_operating_point_closes_balances(current: float) -> None:
    ta, q_int = 305.15, 3.0
    op = hp.operating_point(ta, MODULE, R_HOT, R_COLD, UA, current=current, q_internal=q_int)
    _check_balances(op, ta, q_int, MODULE.seebeck, MODULE.resistance)
    assert op.tc < op.t_cabinet < ta < op.th


@pytest.mark.parametrize("voltage", [3.0, 8.0, 12.0])
def test_voltage_driven_operating_point_with_temperature_dependence(voltage: float) -> None:
    ta = 298.15
    a, b = ph.BI2TE3_RESISTANCE_TEMPCO, ph.BI2TE3_SEEBECK_TEMPCO
    op = hp.operating_point(ta, MODULE, R_HOT, R_COLD, UA, voltage=voltage, alpha=a, beta=b)
    tm = 0.5 * (op.tc + op.th)
    s = ph.seebeck_at_temperature(MODULE.seebeck, tm, b)
    r = ph.resistance_at_temperature(MODULE.resistance, tm, a)
    assert op.voltage == pytest.approx(voltage, rel=1e-9)
    _check_balances(op, ta, 0.0, float(s), float(r))


def test_ideal_sinks_reduce_to_module_between_cabinet_and_ambient() -> None:
    # With r_hot = r_cold = 0 the faces sit at ambient and cabinet temperature,
    # and Qc(I, T_cab, T_amb) = UA·(T_amb - T_cab) (Goldsmid 2010 ch. 2 module
    # equation, solved here independently with scipy.optimize.root).
    ta, i = 300.0, 3.0
    op = hp.operating_point(ta, MODULE, 0.0, 0.0, UA, current=i)
    s, r, k = MODULE.seebeck, MODULE.resistance, MODULE.conductance
    ref = scipy_root(lambda x: ph.cold_side_heat(i, x[0], ta, s, r, k) - UA * (ta - x[0]), [290.0])
    assert op.th == pytest.approx(ta, abs=1e-9)
    assert op.tc == pytest.approx(op.t_cabinet, abs=1e-9)
    assert op.t_cabinet == pytest.approx(float(ref.x[0]), abs=1e-8)


def test_capacity_current_holds_the_setpoint() -> None:
    # Cross-check of two solvers: driving the cooler at the current the
    # capacity search asks for must settle the cabinet at the setpoint.
    ta, tset, q_int = 305.15, 278.15, 2.0
    cap = hp.capacity_at_setpoint(tset, ta, MODULE, R_HOT, R_COLD, UA, 6.0, q_internal=q_int)
    assert cap.holdable and cap.margin > 0.0
    assert cap.heat_load == pytest.approx(UA * (ta - tset) + q_int, rel=1e-12)
    assert cap.margin == pytest.approx(cap.max_cooling - cap.heat_load, rel=1e-12)
    op = hp.operating_point(ta, MODULE, R_HOT, R_COLD, UA, current=cap.current, q_internal=q_int)
    assert op.t_cabinet == pytest.approx(tset, abs=1e-6)
    assert op.cop == pytest.approx(cap.cop, rel=1e-6)


def test_capacity_falls_short_and_respects_drive_limits() -> None:
    ta, tset = 313.15, 268.15
    cap = hp.capacity_at_setpoint(tset, ta, MODULE, R_HOT, R_COLD, UA, 6.0, max_voltage=12.0)
    assert not cap.holdable and cap.margin < 0.0
    assert cap.point.voltage <= 12.0 + 1e-6
    assert cap.current <= 6.0
    # Relaxing the drive limits can only add cooling (self-produced values).
    more = hp.capacity_at_setpoint(tset, ta, MODULE, R_HOT, R_COLD, UA, 20.0)
    assert more.max_cooling >= cap.max_cooling - 1e-9


def test_setpoint_above_ambient_is_refused() -> None:
    with pytest.raises(OutOfDomainError, match="needs no cooling"):
        hp.capacity_at_setpoint(310.0, 300.0, MODULE, R_HOT, R_COLD, UA, 6.0)


def test_runaway_hot_side_is_refused_not_returned() -> None:
    # A tiny hot-side sink at full current heats the whole cooler far above
    # 150 °C, beyond the model's domain.
    with pytest.raises(OutOfDomainError, match="outside the model"):
        hp.operating_point(313.15, MODULE, 5.0, R_COLD, UA, current=6.0)


def test_solver_failure_raises(monkeypatch: pytest.MonkeyPatch) -> None:
    # Starve the solver of function evaluations: it must report failure.
    def starved(*args: Any, **kwargs: Any) -> Any:
        return scipy_root(*args, **kwargs, options={"maxfev": 2})

    monkeypatch.setattr(hp, "root", starved)
    with pytest.raises(NoConvergenceError):
        hp.operating_point(298.15, MODULE, R_HOT, R_COLD, UA, voltage=12.0, alpha=0.0045)


@pytest.mark.parametrize(
    "kwargs",
    [
        {"current": 2.0, "voltage": 5.0},
        {},
        {"current": -1.0},
    ],
)
def test_bad_drive_is_refused(kwargs: dict[str, float]) -> None:
    with pytest.raises(OutOfDomainError):
        hp.operating_point(298.15, MODULE, R_HOT, R_COLD, UA, **kwargs)


def test_negative_sink_resistance_is_refused() -> None:
    with pytest.raises(OutOfDomainError, match="r_hot"):
        hp.operating_point(298.15, MODULE, -0.1, R_COLD, UA, current=2.0)


@settings(max_examples=30, deadline=None)
@given(
    st.floats(min_value=273.15, max_value=318.15),
    st.floats(min_value=0.2, max_value=6.5),
    st.floats(min_value=0.0, max_value=20.0),
)
def test_operating_point_closes_or_refuses_across_domain(
    ta: float, current: float, q_int: float
) -> None:
    # Over 0..45 °C ambient and the module's current range the result is
    # either a state whose balances close or a specific, documented refusal.
    try:
        op = hp.operating_point(ta, MODULE, R_HOT, R_COLD, UA, current=current, q_internal=q_int)
    except OutOfDomainError:
        return
    assert all(math.isfinite(getattr(op, f)) for f in op.__dataclass_fields__)
    _check_balances(op, ta, q_int, MODULE.seebeck, MODULE.resistance)
