"""No readings for longer than a unit's usual interval allows: the unit went silent."""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.observations import FloatArray, IntArray, Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.scope import DeviceScope, usual_interval_ms

__all__ = ["evidence", "observe", "offline_observations"]


def offline_observations(
    t_ms: IntArray,
    first: int,
    reference_ms: int,
    status: str | None,
    status_at_ms: int | None,
    policy: AlertPolicy,
    interval: FloatArray | None = None,
) -> Observations:
    """Gaps in the readings of rows ``first:`` and after the newest one, up to
    ``reference_ms`` [ms] (the newest reading of the fleet, or the wall clock live).

    A gap longer than ``offline_factor`` usual intervals (at least ``offline_min_s``) is
    offline from the moment the threshold passed; readings resuming clear it. A retained
    ``offline`` status newer than the last reading counts at once. ``interval`` is
    ``usual_interval_ms(t_ms)``, when the caller has it.
    """
    n = len(t_ms)
    if n == 0:
        return Observations.empty()
    if interval is None:
        interval = usual_interval_ms(t_ms)
    fallback = float(np.nanmedian(np.diff(t_ms))) if n > 1 else policy.offline_min_s * 1000
    floor = policy.offline_min_s * 1000
    crit = policy.offline_critical_s * 1000
    # Per reading i >= first: [offline at the threshold], [critical], then the reading itself.
    i = np.arange(max(first, 1), n)
    usual = np.where(np.isfinite(interval[i]), interval[i], fallback)
    thr = np.maximum(policy.offline_factor * usual, floor)
    prev = t_ms[i - 1]
    gap = t_ms[i] - prev
    warn = gap > thr
    late = warn & (gap > crit) & (crit > thr)
    m = len(i)
    slot_t = np.zeros((m, 3), np.int64)
    slot_t[:, 0] = (prev + thr).astype(np.int64)
    slot_t[:, 1] = (prev + crit).astype(np.int64)
    slot_t[:, 2] = t_ms[i]
    slot_on = np.column_stack([warn, late, np.ones(m, bool)])
    slot_a = np.zeros((m, 3), bool)
    slot_a[:, 0] = True
    slot_a[:, 1] = True
    slot_s = np.tile(np.array([1, 2, 0], np.int8), (m, 1))
    slot_v = np.column_stack([thr / 1000, np.full(m, crit / 1000), gap / 1000])
    keep = slot_on.ravel()
    out_t = list(slot_t.ravel()[keep])
    out_a = list(slot_a.ravel()[keep])
    out_s = list(slot_s.ravel()[keep])
    out_v = list(slot_v.ravel()[keep])
    last = int(t_ms[-1])
    thr_last = max(policy.offline_factor * fallback, floor)
    if status == "offline" and status_at_ms is not None and last <= status_at_ms <= reference_ms:
        out_t.append(int(status_at_ms))
        out_a.append(True)
        out_s.append(1)
        out_v.append((status_at_ms - last) / 1000)
    elif reference_ms - last > thr_last:
        out_t.append(int(last + thr_last))
        out_a.append(True)
        out_s.append(1)
        out_v.append(thr_last / 1000)
    if reference_ms - last > crit and crit > thr_last:
        out_t.append(int(last + crit))
        out_a.append(True)
        out_s.append(2)
        out_v.append(crit / 1000)
    order = np.argsort(np.array(out_t, dtype=np.int64), kind="stable")
    a = np.array(out_a, dtype=bool)[order]
    return Observations(
        np.array(out_t, dtype=np.int64)[order],
        a,
        a.copy(),
        np.array(out_s, dtype=np.int8)[order],
        np.array(out_v, dtype=np.float64)[order],
    )


def observe(scope: DeviceScope) -> Observations | None:
    """The rule on every loaded reading (None without any): gaps after the last evaluated
    reading, and the silence up to the reference time."""
    if not len(scope.t_all):
        return None
    dev = scope.dev
    return offline_observations(
        scope.t_all,
        max(scope.first, 1),
        scope.reference_ms,
        dev.status,
        dev.status_at_ms,
        scope.policy,
        scope.interval_all,
    )


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence at time t [ms]: the last reading before it, how long the unit has been
    silent [ms] and its usual interval [s]."""
    t_all, reference_ms = scope.t_all, scope.reference_ms
    interval_all = scope.interval_all
    usual = float(interval_all[-1]) if np.isfinite(interval_all[-1]) else float("nan")

    def context(t: int) -> dict[str, Any]:
        before = t_all[t_all <= t]
        last = int(before[-1]) if before.size else int(t_all[0])
        return {
            "last_reading_ms": last, "silent_ms": max(reference_ms, t) - last,
            "usual_interval_s": round(usual / 1000.0, 1) if math.isfinite(usual) else None,
            "reference_ms": reference_ms,
        }  # fmt: skip

    return context
