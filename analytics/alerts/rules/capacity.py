"""Too little cooling to spare at the design ambient, judged on the daily capacity
estimates; critical only for a unit losing its setpoint now (driven flat out and still warm,
``capacity.losing_setpoint``): a shortfall at the design ambient alone is a warning."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from tecfleet.analytics.alerts.observations import FloatArray, Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.rules.estimates import estimate_series

__all__ = ["capacity_observations"]


def capacity_observations(
    series: Mapping[str, Sequence[tuple[int, float]]], policy: AlertPolicy
) -> Observations:
    """Spare cooling [W] over the maximum cooling under ``capacity_warning_fraction`` (or
    under ``capacity_warning_w``), or a setpoint the unit cannot hold, on the median of the
    last ``capacity_persist`` daily figures, or a unit losing its setpoint on the newest day;
    critical only while it is losing its setpoint. The value is the median margin [W]."""
    found = estimate_series(series, "capacity.margin_w")
    if found is None:
        return Observations.empty()
    ts, vals, details = found
    holdable = np.array([d.get("capacity.holdable", 1.0) for d in details], np.float64)
    losing = np.array([d.get("capacity.losing_setpoint", 0.0) >= 0.5 for d in details], bool)
    q_max = np.array([d.get("capacity.max_cooling_w", math.nan) for d in details], dtype=np.float64)
    n = max(int(policy.capacity_persist), 1)
    margin = _trailing_median(vals, n)
    cap = _trailing_median(q_max, n)
    can_hold = _trailing_median(holdable, n)
    full = np.arange(len(vals)) >= n - 1  # judged once n daily figures exist
    with np.errstate(invalid="ignore"):
        frac = np.where(cap > 0, margin / cap, math.nan)
    low = (frac < policy.capacity_warning_fraction) | (margin < policy.capacity_warning_w)
    active = full & (low | (can_hold < 0.5) | losing)
    hold = full & (
        (frac < policy.capacity_warning_fraction + 0.02)
        | (margin < policy.capacity_warning_w + 0.5)
        | (can_hold < 0.5)
        | losing
    )
    sev = np.where(active & losing, 2, np.where(active, 1, 0))
    for d, m, f in zip(details, margin, frac, strict=True):
        d["capacity.margin_median_w"] = float(m)
        d["capacity.margin_fraction"] = float(f)
        d["capacity.days_judged"] = n
    return Observations(ts, active, hold, sev.astype(np.int8), margin, details)


def _trailing_median(x: FloatArray, n: int) -> FloatArray:
    """Median of each sample and the ``n - 1`` before it (fewer at the start)."""
    return np.asarray(
        pd.Series(x, dtype=np.float64).rolling(n, min_periods=1).median(), dtype=np.float64
    )
