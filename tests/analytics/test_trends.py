"""Trend statistics against their definitions.

References: Theil-Sen slope (H. Theil 1950; P. K. Sen, JASA 63, 1379, 1968); Page's CUSUM
(E. S. Page, Biometrika 41, 100, 1954); the normal-consistency constant 1.4826 of the median
absolute deviation (F. R. Hampel, JASA 69, 383, 1974; value from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tecfleet.analytics import trends
from tecfleet.analytics.errors import InsufficientDataError


def test_theil_sen_recovers_an_exact_line_despite_an_outlier() -> None:
    # Sen (1968): the median of pairwise slopes is exact on a line and ignores a minority of
    # gross outliers (breakdown point ~29 %).
    t = np.arange(30.0)
    y = 0.2 * t + 1.0
    y[7] += 50.0
    tr = trends.theil_sen_trend(t, y)
    assert tr.slope == pytest.approx(0.2, rel=1e-12)
    assert tr.low <= tr.slope <= tr.high
    assert tr.n == 30


def test_theil_sen_refuses_short_series() -> None:
    with pytest.raises(InsufficientDataError):
        trends.theil_sen_trend(np.arange(3.0), np.arange(3.0))


def test_cusum_stays_at_zero_in_control_and_grows_after_a_step() -> None:
    # Page (1954): C_k = max(0, C_(k-1) + z_k - k); in control (z = 0) it stays at 0; after a
    # 2-sigma step it grows by 2 - 0.5 = 1.5 per sample.
    c = 0.0
    for _ in range(10):
        c = trends.cusum_update(c, 10.0, 10.0, 1.0)
    assert c == 0.0
    for k in range(1, 5):
        c = trends.cusum_update(c, 12.0, 10.0, 1.0)
        assert c == pytest.approx(1.5 * k)


def test_baseline_uses_median_and_scaled_mad() -> None:
    # Median 3, MAD 1, scaled by 1.4826 for consistency with sigma under normality (Hampel 1974).
    bl = trends.baseline(np.array([1.0, 2.0, 3.0, 4.0, 100.0]))
    assert bl.center == 3.0
    assert bl.spread == pytest.approx(1.4826, rel=1e-4)
    # The floor keeps a perfectly quiet baseline from making every wobble a huge step.
    quiet = trends.baseline(np.full(5, 2.0), min_rel_spread=0.01)
    assert quiet.spread == pytest.approx(0.02)


def test_days_to_limit_arithmetic() -> None:
    # (limit - change) / slope: 4 % now, 0.5 %/day, limit 10 % -> 12 days.
    assert trends.days_to_limit(4.0, 0.5, 10.0) == pytest.approx(12.0)
    assert trends.days_to_limit(11.0, 0.5, 10.0) == 0.0
    assert math.isinf(trends.days_to_limit(4.0, -0.1, 10.0))
    assert trends.percent_change(1.05, 1.0) == pytest.approx(5.0)
