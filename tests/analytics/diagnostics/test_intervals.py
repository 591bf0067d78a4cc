"""Readings 1 to 15 minutes apart: the usual interval, the time scales it sets, and integrals
from interval means.

References: the fundamental theorem of calculus for the integral of sin(ωt) (its antiderivative
-cos(ωt)/ω), and the median as the usual interval of an irregular series (common practice, no
source). The one-minute options are the documented defaults of DiagnosticsOptions.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics.diagnostics.integrals import SampleGrid


def test_usual_interval_is_the_median_gap_whatever_the_gaps() -> None:
    rng = np.random.default_rng(201)
    t = np.cumsum(300.0 + rng.uniform(-60.0, 60.0, 500))  # jittered 5-minute readings
    t = np.delete(t, [10, 11, 12, 200])  # missed readings and an outage
    assert abs(dg.usual_interval(t) - 300.0) < 10.0
    assert dg.usual_interval(np.array([5.0])) == 0.0


def test_one_minute_readings_keep_every_time_scale() -> None:
    opts = dg.DEFAULT_OPTIONS
    assert dg.scaled_for_interval(opts, 60.0) == opts
    assert dg.scaled_for_interval(opts, 0.0) == opts


def test_slow_readings_stretch_gap_segments_and_blocks_by_the_interval() -> None:
    opts = dg.DEFAULT_OPTIONS
    slow = dg.scaled_for_interval(opts, 900.0)
    assert slow.max_gap_s == 3 * 900.0
    assert slow.segment_s == 6 * 900.0
    assert slow.cabinet_block_s == 12 * 900.0
    # Warm goods' releases are not looked for in the scatter of slow instants' block sums;
    # with interval means (below) they are, as at one minute.
    assert not slow.warm_goods_releases
    assert not dg.scaled_for_interval(opts, 300.0).warm_goods_releases
    assert dg.scaled_for_interval(opts, 120.0).warm_goods_releases
    # Interval means integrate each pair exactly: only the largest gap grows.
    means = dg.scaled_for_interval(opts, 900.0, summarised=True)
    assert dataclasses.replace(means, max_gap_s=opts.max_gap_s) == opts
    assert means.max_gap_s == 2700.0


def _means_of_sine(t: np.ndarray, omega: float) -> np.ndarray:
    # The mean of sin(ωt) over (t[k-1], t[k]]: (cos ωt[k-1] - cos ωt[k]) / (ω·h).
    out = np.full(t.size, np.nan)
    out[1:] = (np.cos(omega * t[:-1]) - np.cos(omega * t[1:])) / (omega * np.diff(t))
    return out


def test_interval_means_integrate_a_cycle_the_samples_miss() -> None:
    # A 10-minute cycle read every 15 minutes: the trapezoid of the instants is far off,
    # the means give the integral to rounding.
    omega = 2.0 * math.pi / 600.0
    t = np.arange(0.0, 86_400.0 + 1.0, 900.0) + 37.0
    exact = (np.cos(omega * t[:-1]) - np.cos(omega * t[1:])) / omega  # per pair [s]
    inst = SampleGrid.of(t).trap(np.sin(omega * t))
    closing = np.ones(t.size - 1, dtype=bool)
    means = SampleGrid.of(t, closing).trap(_means_of_sine(t, omega))
    assert np.max(np.abs(means - exact)) < 1e-9
    assert np.max(np.abs(inst - exact)) > 100.0  # the instants alias the cycle


def _means(n: int, interval: float) -> dg.IntervalMeans:
    ones = np.ones(n)
    return dg.IntervalMeans(interval * ones, *(ones for _ in range(8)))


def test_a_summary_stands_for_a_pair_only_where_it_covers_it() -> None:
    t = np.array([0.0, 900.0, 1800.0, 3600.0, 4500.0])  # one reading missed before 3600
    m = _means(t.size, 900.0)
    assert dg.closing_pairs(t, m).tolist() == [True, True, False, True]
    m.current_sq[4] = np.nan  # a reading without every mean the balances use
    assert dg.closing_pairs(t, m).tolist() == [True, True, False, False]


def test_basis_words_name_the_interval_and_the_kind() -> None:
    assert dg.interval_basis(300.0) == "5-minute instants"
    assert dg.interval_basis(900.0, summaries=True) == "15-minute interval means"
    assert dg.interval_basis(20.0) == "20-second instants"
