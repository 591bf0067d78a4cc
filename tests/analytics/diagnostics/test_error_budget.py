"""Stated errors of the thermal fit where the electrical fit left a parameter unbounded.

Reference: the combined standard uncertainty of a first-order combination, u² = wᵀ·C·w
(JCGM 100:2008, *Guide to the expression of uncertainty in measurement*, eq. (13); from
memory), checked against a direct evaluation with numpy.
"""

from __future__ import annotations

import math
import warnings

import numpy as np

from tecfleet.analytics.diagnostics.error_budget import cabinet_stderrs


def _stderrs(sr_rel_cov: np.ndarray, dk_el: np.ndarray) -> dict[str, float]:
    # Sink and cabinet covariances, responses and scatter: values made here.
    cov1 = np.diag([0.01, 1.0, 0.04, 0.09, 1.0])
    cov2 = np.diag([0.0004, 0.25, 1.0])
    resp = np.array([[0.8], [0.3], [-0.2], [0.05]])
    return cabinet_stderrs(cov1, cov2, resp, dk_el, 0.5, 0.02, 0.01, False, sr_rel_cov, 0.3)


def test_a_finite_budget_is_the_quadratic_form() -> None:
    cov = np.array([[1e-4, 2e-5], [2e-5, 4e-4]])
    dk = np.array([0.4, -0.2])
    got = _stderrs(cov, dk)
    k_el = math.sqrt(float(dk @ cov @ dk))
    assert math.isclose(got["k"], math.hypot(0.02, 0.01, k_el), rel_tol=1e-12)


def test_an_unbounded_resistance_makes_the_errors_it_reaches_infinite_not_nan() -> None:
    # R25's variance infinite (a flat cold-face balance): K's error is infinite where K
    # depends on R, and untouched where it does not; never NaN, and no numpy warning.
    cov = np.array([[1e-4, 0.0], [0.0, math.inf]])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        reached = _stderrs(cov, np.array([0.4, -0.2]))
        spared = _stderrs(cov, np.array([0.4, 0.0]))
    assert reached["k"] == math.inf
    assert math.isclose(spared["k"], math.hypot(0.02, 0.01, 0.4 * 1e-2), rel_tol=1e-12)
    assert not any(math.isnan(v) for v in (*reached.values(), *spared.values()))
