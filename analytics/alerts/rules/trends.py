"""Slow faults seen in the diagnostics' estimates: module wear (R25 rise), heat leak (cabinet
UA rise) and hot-side cooling (hot-side thermal resistance rise)."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from tecfleet.analytics.alerts.observations import BoolArray, IntArray, Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.rules.estimates import estimate_series

__all__ = ["heat_leak_observations", "hot_side_observations", "module_wear_observations"]

Series = Mapping[str, Sequence[tuple[int, float]]]


def module_wear_observations(series: Series, policy: AlertPolicy) -> Observations:
    """R25 change [%] at or above ``wear_warning_pct``, or the wear limit under
    ``wear_days_warning`` days away at an established rise (the slope's lower 95 % bound above
    zero); critical at ``wear_limit_pct``."""
    found = estimate_series(series, "module.resistance_25c.change_pct")
    if found is None:
        return Observations.empty()
    ts, vals, details = found
    hyst = policy.trend_hysteresis_pct
    days = np.array(
        [d.get("module.days_to_wear_limit", math.inf) for d in details], dtype=np.float64
    )
    days = np.where(np.isfinite(days), days, math.inf)
    slope_low = np.array(
        [d.get("module.resistance_25c.slope_pct_per_30d_low", math.nan) for d in details],
        dtype=np.float64,
    )
    # NaN (no slope yet) compares False: no established rise
    soon = (days <= policy.wear_days_warning) & (vals > 0) & (slope_low > 0)
    active = (vals >= policy.wear_warning_pct) | soon
    hold = (vals >= policy.wear_warning_pct - hyst) | soon
    sev = np.where(vals >= policy.wear_limit_pct, 2, np.where(active, 1, 0))
    return Observations(ts, active, hold, sev.astype(np.int8), vals, details)


def heat_leak_observations(series: Series, policy: AlertPolicy) -> Observations:
    """Cabinet UA change [%] at or above ``heat_leak_warning_pct`` over
    ``heat_leak_persist_s`` of consecutive estimates, once the diagnostics' own UA flag
    (``cabinet.ua.flag``, where published) has been raised in that spell; critical at
    ``heat_leak_critical_pct``.

    The flag's persistence grows where slow reporting stretches the cabinet fit's window
    (see ``AnalysisSettings.ua_long_window_s``): its windows then share most of their
    readings, and the spell's length alone would rest the alert on one disturbed stretch."""
    found = estimate_series(series, "cabinet.ua.change_pct")
    if found is None:
        return Observations.empty()
    ts, vals, details = found
    hyst = policy.trend_hysteresis_pct
    above = vals >= policy.heat_leak_warning_pct
    active = _persisting(ts, above, int(policy.heat_leak_persist_s * 1000))
    if "cabinet.ua.flag" in series:
        flagged = np.array([d.get("cabinet.ua.flag", 0.0) == 1.0 for d in details], dtype=bool)
        active &= _raised_in_spell(above, flagged)
    hold = vals >= policy.heat_leak_warning_pct - hyst
    sev = np.where(vals >= policy.heat_leak_critical_pct, 2, np.where(active, 1, 0))
    return Observations(ts, active, hold, sev.astype(np.int8), vals, details)


def hot_side_observations(series: Series, policy: AlertPolicy) -> Observations:
    """Hot-side thermal resistance change [%] at or above ``hot_side_warning_pct``, once the
    diagnostics' own flag (``hot_side.resistance.flag``, where published) has been raised in
    that spell; critical at ``hot_side_critical_pct``.

    The flag waits for a second or third hour in a row where the hour's figure rests on
    faces off the probes or on sinks the samples cannot follow (``runner.hot_side``), whose
    single hours reach the warning on healthy units now and then."""
    found = estimate_series(series, "hot_side.resistance.change_pct")
    if found is None:
        return Observations.empty()
    ts, vals, details = found
    hyst = policy.trend_hysteresis_pct
    active = vals >= policy.hot_side_warning_pct
    if "hot_side.resistance.flag" in series:
        flagged = np.array(
            [d.get("hot_side.resistance.flag", 0.0) == 1.0 for d in details], dtype=bool
        )
        active &= _raised_in_spell(active, flagged)
    hold = vals >= policy.hot_side_warning_pct - hyst
    sev = np.where(vals >= policy.hot_side_critical_pct, 2, np.where(active, 1, 0))
    return Observations(ts, active, hold, sev.astype(np.int8), vals, details)


def _raised_in_spell(cond: BoolArray, raised: BoolArray) -> BoolArray:
    """True where ``raised`` has been True at some sample of the current run of ``cond``."""
    out = np.zeros(len(cond), dtype=bool)
    seen = False
    for i in range(len(cond)):
        seen = bool(cond[i]) and (seen or bool(raised[i]))
        out[i] = seen
    return out


def _persisting(ts: IntArray, cond: BoolArray, span_ms: int) -> BoolArray:
    """True where ``cond`` has held at every sample since at least ``span_ms`` ago."""
    out = np.zeros(len(ts), dtype=bool)
    since: int | None = None
    for i in range(len(ts)):
        if not cond[i]:
            since = None
            continue
        if since is None:
            since = int(ts[i])
        out[i] = int(ts[i]) - since >= span_ms
    return out
