"""Trend and change statistics on series of stored estimates (R25, UA, r_hot, ...).

Pure functions on numbers and arrays; times in days, changes in per cent of a commissioning
baseline. Sources:

* Theil-Sen slope with its confidence interval: H. Theil (1950), P. K. Sen, "Estimates of the
  regression coefficient based on Kendall's tau", JASA 63, 1379-1389 (1968); computed with
  ``scipy.stats.theilslopes``.
* One-sided CUSUM: E. S. Page, "Continuous inspection schemes", Biometrika 41, 100-115 (1954);
  the usual reference value k = 0.5 σ and decision interval h = 4-5 σ are from
  D. C. Montgomery, *Introduction to Statistical Quality Control*, ch. 9 (from memory).
* Baseline spread: median absolute deviation scaled to σ for normal data,
  ``scipy.stats.median_abs_deviation(scale="normal")``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.stats import median_abs_deviation, theilslopes

from ._validate import FloatArray
from .errors import InsufficientDataError

__all__ = [
    "Baseline",
    "Trend",
    "baseline",
    "cusum_update",
    "days_to_limit",
    "percent_change",
    "theil_sen_trend",
]


@dataclass(frozen=True)
class Baseline:
    """Commissioning reference of a quantity.

    Attributes
    ----------
    center : Median of the baseline values [unit of the quantity].
    spread : Robust standard deviation of one value about it [same unit].
    n : Values behind it [-].
    """

    center: float
    spread: float
    n: int


def baseline(values: FloatArray, min_rel_spread: float = 0.0) -> Baseline:
    """Median and robust spread (scaled MAD) of the values from the commissioning period.

    Parameters
    ----------
    values : Estimates from the baseline period [unit of the quantity].
    min_rel_spread : Floor on spread/center, so a very quiet baseline does not turn every later
        wobble into a large standardised step [-].

    Returns
    -------
    The baseline.

    Raises
    ------
    InsufficientDataError : no finite values.
    """
    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v)]
    if v.size == 0:
        raise InsufficientDataError("no baseline values", "no reliable estimates yet")
    center = float(np.median(v))
    spread = float(median_abs_deviation(v, scale="normal")) if v.size > 1 else 0.0
    spread = max(spread, abs(center) * min_rel_spread, 1e-300)
    return Baseline(center, spread, int(v.size))


def percent_change(value: float, reference: float) -> float:
    """Change of ``value`` against ``reference`` [%]: 100·(value/reference - 1).

    Parameters
    ----------
    value : Current value [unit of the quantity].
    reference : Baseline value, non-zero [same unit].

    Returns
    -------
    Change [%].
    """
    return 100.0 * (value / reference - 1.0)


@dataclass(frozen=True)
class Trend:
    """Theil-Sen slope of a change series.

    Attributes
    ----------
    slope : Median slope [unit per day].
    low, high : Confidence interval of the slope [unit per day].
    intercept : Value at day 0 [unit].
    n : Points used [-].
    """

    slope: float
    low: float
    high: float
    intercept: float
    n: int


def theil_sen_trend(
    t_days: FloatArray, values: FloatArray, confidence: float = 0.95, min_points: int = 8
) -> Trend:
    """Robust linear trend with a confidence interval (Theil 1950; Sen 1968).

    ``scipy.stats.theilslopes``: the slope is the median of all pairwise slopes, the interval
    from Kendall's tau.

    Parameters
    ----------
    t_days : Times [day].
    values : Values [unit].
    confidence : Two-sided confidence level of the interval [-].
    min_points : Fewest points accepted [-].

    Returns
    -------
    The trend.

    Raises
    ------
    InsufficientDataError : too few points or no spread in time.
    """
    t = np.asarray(t_days, dtype=np.float64)
    v = np.asarray(values, dtype=np.float64)
    ok = np.isfinite(t) & np.isfinite(v)
    t, v = t[ok], v[ok]
    if t.size < min_points or float(np.ptp(t)) <= 0.0:
        raise InsufficientDataError(
            f"{t.size} points for a trend, need {min_points}", "history too short for a trend"
        )
    res = theilslopes(v, t, alpha=confidence)
    return Trend(
        float(res.slope), float(res.low_slope), float(res.high_slope), float(res.intercept), t.size
    )


def days_to_limit(change_pct: float, slope_pct_per_day: float, limit_pct: float) -> float:
    """Days until a change reaches a limit at a constant slope: (limit - change)/slope.

    Parameters
    ----------
    change_pct : Current change against baseline [%].
    slope_pct_per_day : Rate of change [%/day].
    limit_pct : Limit [%].

    Returns
    -------
    Days [day]; 0 when already past the limit, infinity when not heading towards it.
    """
    if change_pct >= limit_pct:
        return 0.0
    if slope_pct_per_day <= 0.0 or not math.isfinite(slope_pct_per_day):
        return math.inf
    return (limit_pct - change_pct) / slope_pct_per_day


def cusum_update(
    previous: float, value: float, target: float, sigma: float, allowance: float = 0.5
) -> float:
    """One step of Page's upper CUSUM on a standardised value.

    C_k = max(0, C_(k-1) + (x_k - μ0)/σ - k), Page (1954). It grows steadily after an upward
    step of more than k·σ and stays near zero otherwise; compare it with a decision interval h
    (4-5 is usual; Montgomery, from memory).

    Parameters
    ----------
    previous : C_(k-1) [-].
    value : New value x_k [unit].
    target : In-control mean μ0 [unit].
    sigma : In-control standard deviation of one value [unit].
    allowance : Reference value k [σ].

    Returns
    -------
    C_k [σ].
    """
    return max(0.0, previous + (value - target) / sigma - allowance)
