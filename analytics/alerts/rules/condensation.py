"""Cold side below the ambient dew point: water where it should not be.

Where the cold face is not probed, the cabinet air stands in for it only as an upper bound:
while the module cools, heat flows from the air into the cold side, so the face is colder
than the air (a steady heat path; common practice, no source). Air below the dew point
proves the face is too; air above it proves nothing, and the unit's answer says so
(``coverage``) instead of reporting an all-clear. A unit whose module heats by reversing its
current is not covered by that bound."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.constants import T0
from tecfleet.analytics.alerts.coverage import set_limit
from tecfleet.analytics.alerts.observations import BoolArray, FloatArray, IntArray, Observations
from tecfleet.analytics.alerts.scope import DeviceScope
from tecfleet.analytics.psychrometrics import dew_point

__all__ = ["AIR_BOUND", "NOT_PROBED", "condensation_observations", "evidence", "observe"]

#: What the rule judges on where the cold face is not probed, and what that leaves unknown.
AIR_BOUND = "cabinet air as an upper bound of the cold face while the module cools"
NOT_PROBED = (
    "The cold face is not probed: it may sit below the dew point while the cabinet air is "
    "above it, so condensation there cannot be ruled out; only air below the dew point "
    "while the module cools shows it for certain."
)


def condensation_observations(
    t_ms: IntArray,
    t_cold: FloatArray,
    t_ambient: FloatArray,
    rh_pct: FloatArray,
    margin_k: float,
    critical_k: float,
    hysteresis_k: float,
    t_cabinet: FloatArray | None = None,
    cooling: BoolArray | None = None,
) -> Observations:
    """Cold side below the ambient dew point. Temperatures [°C], ``rh_pct`` [%]; samples
    without humidity are dropped. Margin = t_cold − dew point [K]; active below −margin_k,
    critical below −critical_k, held until above −margin_k + hysteresis_k.

    A sample without a cold-face temperature (NaN) is judged on ``t_cabinet`` [°C] where
    ``cooling`` (the module driven, boolean per sample) holds, the air being an upper bound
    of the face then: its margin is the most the face can have (``t_cold_at_most_c`` in the
    detail), so it can only show the risk, never rule it out; other such samples are
    dropped."""
    probed = np.isfinite(t_cold)
    face = t_cold
    if t_cabinet is not None and cooling is not None:
        face = np.where(probed, t_cold, np.where(cooling, t_cabinet, np.nan))
    ok = np.isfinite(rh_pct) & (rh_pct > 0) & (rh_pct <= 100) & np.isfinite(face)
    if not np.any(ok):
        return Observations.empty()
    td = np.asarray(dew_point(t_ambient[ok] + T0, rh_pct[ok] / 100.0), dtype=np.float64) - T0
    margin = face[ok] - td
    active = margin < -margin_k
    hold = margin < -margin_k + hysteresis_k
    sev = np.where(margin < -critical_k, 2, np.where(active, 1, 0)).astype(np.int8)
    detail = [
        {"dew_point_c": round(float(d), 2), "t_cold_c": round(float(c), 2), "rh_pct": float(r)}
        if p
        else {
            "dew_point_c": round(float(d), 2),
            "t_cold_at_most_c": round(float(c), 2),
            "rh_pct": float(r),
            "basis": AIR_BOUND,
            "note": NOT_PROBED,
        }
        for d, c, r, p in zip(td, face[ok], rh_pct[ok], probed[ok], strict=True)
    ]
    return Observations(t_ms[ok], active, hold, sev, margin, detail)


def observe(scope: DeviceScope) -> Observations | None:
    """The rule on the new readings; None without any, or when the policy does not judge
    condensation (by default only the "enclosure" profile is judged). Where the newest
    reading has no cold face, the device's limited checks say what the rule rests on."""
    if not len(scope.t_new):
        return None
    p = scope.policy
    check = p.condensation_check
    if check is None:
        check = p.profile == "enclosure"
    if not check:
        return None
    t_cold = scope.new_column("t_cold")
    probed = bool(np.isfinite(t_cold[-1]))
    set_limit(scope.state, "condensation_risk", None if probed else AIR_BOUND,
              None if probed else NOT_PROBED)  # fmt: skip
    return condensation_observations(
        scope.t_new,
        t_cold,
        scope.new_column("t_ambient"),
        scope.new_column("rh"),
        p.condensation_margin_k,
        p.condensation_critical_k,
        p.condensation_hysteresis_k,
        scope.new_column("t_cabinet"),
        scope.new_column("current") > p.condensation_cooling_a,
    )


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence: the margin [K] the rule allows."""
    policy = scope.policy
    return lambda _t: {"margin_k": policy.condensation_margin_k}
