"""Cabinet out of its band, with the mean kinetic temperature in the evidence."""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.constants import MKT_ACTIVATION_J_PER_MOL, MKT_GAS_CONSTANT, T0
from tecfleet.analytics.alerts.observations import BoolArray, FloatArray, IntArray, Observations
from tecfleet.analytics.alerts.policy import Band
from tecfleet.analytics.alerts.rules import commissioning
from tecfleet.analytics.alerts.scope import DeviceScope
from tecfleet.analytics.errors import AlertError

__all__ = [
    "evidence",
    "excursion_observations",
    "mean_kinetic_temperature",
    "observe",
    "slow_reporting_wait",
]


def mean_kinetic_temperature(
    t_c: Sequence[float] | FloatArray, activation_j_per_mol: float = MKT_ACTIVATION_J_PER_MOL
) -> float:
    """Mean kinetic temperature of equally spaced samples [°C].

    MKT = (ΔH/R) / (−ln(mean(exp(−ΔH/(R·T_i))))) with T_i in kelvin (Haynes 1971; USP <1079>),
    ΔH the activation energy [J/mol] and R = 8.3144 J/(mol·K) as USP states it.
    """
    t_k = np.asarray(t_c, dtype=np.float64) + T0
    if t_k.size == 0 or not np.all(np.isfinite(t_k)):
        raise AlertError("mean kinetic temperature needs finite samples")
    a = activation_j_per_mol / MKT_GAS_CONSTANT
    x = -a / t_k
    # log-mean-exp, shifted by the largest term so exp() cannot underflow
    m = float(np.max(x))
    log_mean = m + math.log(float(np.mean(np.exp(x - m))))
    return a / -log_mean - T0


def excursion_observations(t_ms: IntArray, t_cabinet: FloatArray, band: Band) -> Observations:
    """Cabinet out of band. ``t_cabinet`` [°C], band limits [°C]; critical beyond the critical
    limits (freezing for medicines, the legal ceiling for food)."""
    low = t_cabinet < band.low_c
    high = t_cabinet > band.high_c
    active = low | high
    sev = np.where(active, 1, 0).astype(np.int8)
    if band.critical_low_c is not None:
        sev[t_cabinet <= band.critical_low_c] = 2
    if band.critical_high_c is not None:
        sev[t_cabinet >= band.critical_high_c] = 2
    return Observations(t_ms, active, active.copy(), sev, np.asarray(t_cabinet, np.float64))


def slow_reporting_wait(
    t_ms: IntArray, out_of_band: BoolArray, interval_ms: FloatArray, delay_s: float, n: float
) -> BoolArray:
    """Readings of a spell out of band that come too early in it to count at slow reporting.

    The lifecycle opens an alert ``delay_s`` [s] after a spell's first reading counts; where
    ``n`` usual intervals (``interval_ms`` per reading [ms]) are longer than that, a spell's
    readings count only from ``n`` intervals less ``delay_s`` after its first, so that the
    alert waits at least ``n`` intervals. Times ``t_ms`` [ms]; at one- to fifteen-minute
    reporting (with the default 30 minutes and two intervals) nothing waits.
    """
    wait = np.zeros(len(t_ms), dtype=bool)
    extra = np.nan_to_num(n * interval_ms - delay_s * 1000.0, nan=0.0)
    if not out_of_band.any() or not (extra > 0.0).any():
        return wait
    start = -1
    for k in range(len(t_ms)):
        if not out_of_band[k]:
            start = -1
            continue
        start = k if start < 0 else start
        wait[k] = t_ms[k] - t_ms[start] < extra[k]
    return wait


def observe(scope: DeviceScope) -> Observations | None:
    """The rule on the new readings (None without any); none while the unit is commissioning
    or inside a maintenance window (see rules.commissioning). At slow reporting a spell waits
    ``excursion_delay_intervals`` usual intervals in all (:func:`slow_reporting_wait`)."""
    if not len(scope.t_new):
        return None
    obs = excursion_observations(scope.t_new, scope.new_column("t_cabinet"), scope.band)
    # The spell's start may lie before the new readings: judged over every loaded one.
    t_all = scope.t_all
    every = excursion_observations(t_all, scope.frame["t_cabinet"].to_numpy(np.float64), scope.band)
    policy = scope.policy
    wait = slow_reporting_wait(
        t_all, every.active, scope.interval_all, policy.excursion_delay_s,
        policy.excursion_delay_intervals,
    )[scope.first :]  # fmt: skip
    obs.active &= ~wait
    held = commissioning.phase(scope).excursion_held
    obs.active &= ~held
    obs.hold &= ~held
    obs.severity[held] = 0
    return obs


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence at time t [ms]: the band and its source, and over the trailing MKT window the
    time in range, the mean kinetic temperature and the mean."""
    policy, band, t_all, frame = scope.policy, scope.band, scope.t_all, scope.frame
    com = scope.state.get("commissioning") or {}

    def context(t: int) -> dict[str, Any]:
        w0 = t - int(policy.mkt_window_s * 1000)
        m = (t_all > w0) & (t_all <= t)
        tc = frame["t_cabinet"].to_numpy(np.float64)[m]
        ctx: dict[str, Any] = {
            "profile": policy.profile, "low_limit_c": band.low_c, "high_limit_c": band.high_c,
            "critical_low_c": band.critical_low_c, "critical_high_c": band.critical_high_c,
            "limits_source": band.source, "window_s": policy.mkt_window_s,
            "window_start_ms": w0, "window_end_ms": t,
        }  # fmt: skip
        if com.get("pull_down_s") is not None:
            # the unit's last pull-down: its commissioning, or its return after maintenance
            ctx["commissioned_ms"] = com["in_band_ms"]
            ctx["pull_down_s"] = com["pull_down_s"]
        if tc.size:
            inside = (tc >= band.low_c) & (tc <= band.high_c)
            ctx["time_in_range_pct"] = round(100.0 * float(np.mean(inside)), 2)
            ctx["mkt_c"] = round(mean_kinetic_temperature(tc, policy.mkt_activation_j_per_mol), 3)
            ctx["mkt_activation_kj_per_mol"] = policy.mkt_activation_j_per_mol / 1000.0
            ctx["mean_c"] = round(float(np.mean(tc)), 3)
            ctx["samples"] = int(tc.size)
        return ctx

    return context
