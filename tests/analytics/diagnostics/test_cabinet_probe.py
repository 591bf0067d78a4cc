"""The cabinet probe against the cold side's heat balance, with the cold face read from a
floating module's open-circuit voltage.

References: the Seebeck voltage V_oc = S·ΔT and the cold-face heat Qc = S·I·Tc − ½I²R − K·ΔT
(H. J. Goldsmid, *Introduction to Thermoelectricity*, 2010, ch. 2), which at I = 0 is −K·ΔT;
the asymptotic standard error of a sample median of normal data, √(π/2)·σ/√n (A. Stuart and
J. K. Ord, *Kendall's Advanced Theory of Statistics*, vol. 1, 1994, §10.10; from memory);
ordinary least squares checked against ``scipy.stats.linregress``.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import stats

from tecfleet.analytics.diagnostics import cabinet_probe as cp


def test_a_floating_module_reads_its_cold_face_and_its_conduction() -> None:
    # Hand-worked: S = 50 mV/K, V_oc = 0.6 V -> ΔT = 12 K, so Tc = 30 - 12 = 18 °C; with
    # K = 0.5 W/K the cold face takes Qc = -0.5 * 12 = -6 W (heat brought to it).
    tc, qc = cp.floating_cold_face(np.array([30.0]), np.array([0.6]), 0.05, 0.5)
    assert math.isclose(float(tc[0]), 18.0, rel_tol=1e-12)
    assert math.isclose(float(qc[0]), -6.0, rel_tol=1e-12)


def test_the_driven_balance_reduces_to_conduction_without_current() -> None:
    # At I = 0 the cold-face heat of the driven balance is -K·ΔT whatever the voltage reads.
    qc = cp.cold_side_heat_balance(
        np.array([0.0]), np.array([5.0]), np.array([25.0]), np.array([1.0]), 0.05, 0.5
    )
    assert math.isclose(float(qc[0]), -0.5 * 20.0, rel_tol=1e-12)


def _floating_unit(n: int, drift: np.ndarray, seed: int) -> tuple[np.ndarray, ...]:
    # Off samples of a floating module: ΔT between 6 and 14 K, the cabinet 0.35 K/W times
    # Qc = -K·ΔT from the face, a probe offset of 0.4 K and 0.05 K of noise; values made
    # here, the balance T_cab - Tc = offset + r_cold·Qc as the module docstring states it.
    rng = np.random.default_rng(seed)
    s, k, r_cold = 0.05, 0.5, 0.35
    th = 30.0 + rng.uniform(-2.0, 2.0, n)
    dt = rng.uniform(6.0, 14.0, n)
    v = s * dt
    tc_true = th - dt
    t_cab = tc_true + r_cold * (-k * dt) + 0.4 + drift + rng.normal(0.0, 0.05, n)
    tc, qc = cp.floating_cold_face(th, v, s, k)
    return t_cab, tc, qc


def test_the_commissioning_fit_is_the_least_squares_line() -> None:
    n = 400
    t_cab, tc, qc = _floating_unit(n, np.zeros(n), 201)
    fit = cp.fit_cold_side_baseline(t_cab, tc, qc, np.ones(n, bool), min_samples=30)
    assert fit is not None
    ref = stats.linregress(qc, t_cab - tc)
    assert math.isclose(fit[0], ref.intercept, rel_tol=1e-9)
    assert math.isclose(fit[1], ref.slope, rel_tol=1e-9)
    # and near the values the samples were made with, within 3 of scipy's standard errors
    assert abs(fit[1] - 0.35) < 3 * ref.stderr
    assert abs(fit[0] - 0.4) < 3 * ref.intercept_stderr
    assert cp.fit_cold_side_baseline(t_cab, tc, qc, np.ones(n, bool), min_samples=n + 1) is None


def test_a_window_shift_is_the_probe_drift_and_zero_without_one() -> None:
    n = 300
    t_cab, tc, qc = _floating_unit(n, np.zeros(n), 202)
    base = cp.fit_cold_side_baseline(t_cab, tc, qc, np.ones(n, bool), min_samples=30)
    assert base is not None
    judged = np.ones(n, bool)
    steady = cp.window_shift(*_floating_unit(n, np.zeros(n), 203), judged, base)
    moved = cp.window_shift(*_floating_unit(n, np.full(n, 1.5), 204), judged, base)
    # the baseline's own error is a few hundredths of a kelvin (noise 0.05 K over 300)
    assert abs(steady[0]) < 0.02
    assert abs(moved[0] - 1.5) < 0.02
    assert steady[2] == moved[2] == n
    assert math.isnan(cp.window_shift(t_cab, tc, qc, np.zeros(n, bool), base)[0])


def test_a_window_shift_states_the_median_standard_error() -> None:
    # Over many draws the medians scatter by √(π/2)·σ/√n; the stated error, from the MAD,
    # agrees with that within 10 % (400 draws: the spread's own error is about 4 %).
    n, sigma = 200, 0.05
    rng = np.random.default_rng(205)
    zero = np.zeros(n)
    judged = np.ones(n, bool)
    meds, ses = [], []
    for _ in range(400):
        noise = rng.normal(0.0, sigma, n)
        med, se, _ = cp.window_shift(noise, zero, zero, judged, (0.0, 0.3))
        meds.append(med)
        ses.append(se)
    expected = math.sqrt(math.pi / 2.0) * sigma / math.sqrt(n)
    assert abs(float(np.std(meds)) / expected - 1.0) < 0.1
    assert abs(float(np.mean(ses)) / expected - 1.0) < 0.1
