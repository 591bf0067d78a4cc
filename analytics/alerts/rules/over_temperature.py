"""Hot side too hot: the module's solder and the hot-side cooling at risk."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.observations import FloatArray, IntArray, Observations
from tecfleet.analytics.alerts.scope import DeviceScope

__all__ = ["evidence", "observe", "over_temperature_observations"]


def over_temperature_observations(
    t_ms: IntArray, t_hot: FloatArray, warning_c: float, critical_c: float, hysteresis_k: float
) -> Observations:
    """Hot side at or above ``warning_c`` [°C]; critical at ``critical_c`` [°C]; an open alert
    holds until ``t_hot`` is ``hysteresis_k`` [K] below the warning level."""
    active = t_hot >= warning_c
    hold = t_hot >= warning_c - hysteresis_k
    sev = np.where(t_hot >= critical_c, 2, np.where(active, 1, 0)).astype(np.int8)
    return Observations(t_ms, active, hold, sev, np.asarray(t_hot, np.float64))


def observe(scope: DeviceScope) -> Observations | None:
    """The rule on the new readings (None without any)."""
    if not len(scope.t_new):
        return None
    p = scope.policy
    return over_temperature_observations(
        scope.t_new,
        scope.new_column("t_hot"),
        p.over_temperature_warning_c,
        p.over_temperature_critical_c,
        p.over_temperature_hysteresis_k,
    )


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence: the warning and critical levels [°C]."""
    policy = scope.policy
    return lambda _t: {
        "warning_c": policy.over_temperature_warning_c,
        "critical_c": policy.over_temperature_critical_c,
    }
