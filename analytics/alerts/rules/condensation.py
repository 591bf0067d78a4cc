"""Cold side below the ambient dew point: water where it should not be."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.constants import T0
from tecfleet.analytics.alerts.observations import FloatArray, IntArray, Observations
from tecfleet.analytics.alerts.scope import DeviceScope
from tecfleet.analytics.psychrometrics import dew_point

__all__ = ["condensation_observations", "evidence", "observe"]


def condensation_observations(
    t_ms: IntArray,
    t_cold: FloatArray,
    t_ambient: FloatArray,
    rh_pct: FloatArray,
    margin_k: float,
    critical_k: float,
    hysteresis_k: float,
) -> Observations:
    """Cold side below the ambient dew point. Temperatures [°C], ``rh_pct`` [%]; samples
    without humidity are dropped. Margin = t_cold − dew point [K]; active below −margin_k,
    critical below −critical_k, held until above −margin_k + hysteresis_k."""
    ok = np.isfinite(rh_pct) & (rh_pct > 0) & (rh_pct <= 100)
    if not np.any(ok):
        return Observations.empty()
    td = np.asarray(dew_point(t_ambient[ok] + T0, rh_pct[ok] / 100.0), dtype=np.float64) - T0
    margin = t_cold[ok] - td
    active = margin < -margin_k
    hold = margin < -margin_k + hysteresis_k
    sev = np.where(margin < -critical_k, 2, np.where(active, 1, 0)).astype(np.int8)
    detail = [
        {"dew_point_c": round(float(d), 2), "t_cold_c": round(float(c), 2), "rh_pct": float(r)}
        for d, c, r in zip(td, t_cold[ok], rh_pct[ok], strict=True)
    ]
    return Observations(t_ms[ok], active, hold, sev, margin, detail)


def observe(scope: DeviceScope) -> Observations | None:
    """The rule on the new readings; None without any, or when the policy does not judge
    condensation (by default only the "enclosure" profile is judged)."""
    if not len(scope.t_new):
        return None
    p = scope.policy
    check = p.condensation_check
    if check is None:
        check = p.profile == "enclosure"
    if not check:
        return None
    return condensation_observations(
        scope.t_new,
        scope.new_column("t_cold"),
        scope.new_column("t_ambient"),
        scope.new_column("rh"),
        p.condensation_margin_k,
        p.condensation_critical_k,
        p.condensation_hysteresis_k,
    )


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence: the margin [K] the rule allows."""
    policy = scope.policy
    return lambda _t: {"margin_k": policy.condensation_margin_k}
