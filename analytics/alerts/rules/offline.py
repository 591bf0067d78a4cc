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
    received_ms: IntArray | None = None,
    receipt_reference_ms: int | None = None,
) -> Observations:
    """Gaps in the readings of rows ``first:`` and after the newest one, up to
    ``reference_ms`` [ms] (the newest reading of the fleet, or the wall clock live).

    A gap longer than ``offline_factor`` usual intervals (at least ``offline_min_s``) is
    offline from the moment the threshold passed, critical after ``offline_critical_s`` or
    ``offline_critical_factor`` thresholds, whichever is longer (both timings scale with the
    unit's usual interval); readings resuming clear it. A retained
    ``offline`` status newer than the last reading counts at once. ``interval`` is
    ``usual_interval_ms(t_ms)``, when the caller has it.

    One time frame: with the readings' receipt times ``received_ms`` [ms] and the receipt
    clock's reference ``receipt_reference_ms`` [ms], a device whose newest reading arrived
    late and which was heard from within the threshold is delivering a backlog, and is not
    silent after its newest reading (those times are still to come); a gap whose reading
    before it arrived only after the gap's threshold had passed is a past outage (nobody
    could have seen it live), recorded with ``past_outage`` in the detail.
    """
    n = len(t_ms)
    if n == 0:
        return Observations.empty()
    if interval is None:
        interval = usual_interval_ms(t_ms)
    fallback = float(np.nanmedian(np.diff(t_ms))) if n > 1 else policy.offline_min_s * 1000
    floor = policy.offline_min_s * 1000
    crit = policy.offline_critical_s * 1000
    out = _gaps(t_ms, max(first, 1), interval, fallback, floor, crit, policy, received_ms)
    last = int(t_ms[-1])
    thr_last = max(policy.offline_factor * fallback, floor)
    tail = {"gap_start_ms": last, "gap_end_ms": None, "past_outage": False}
    delivering = (
        received_ms is not None
        and receipt_reference_ms is not None
        and receipt_reference_ms - int(received_ms[-1]) <= thr_last
        and int(received_ms[-1]) - last > thr_last
    )
    if status == "offline" and status_at_ms is not None and last <= status_at_ms <= reference_ms:
        out.append((int(status_at_ms), 1, (status_at_ms - last) / 1000, tail))
    elif reference_ms - last > thr_last and not delivering:
        out.append((int(last + thr_last), 1, thr_last / 1000, tail))
    crit_last = max(crit, policy.offline_critical_factor * thr_last)
    if reference_ms - last > crit_last and not delivering:
        out.append((int(last + crit_last), 2, crit_last / 1000, tail))
    out.sort(key=lambda x: x[0])
    sev = np.array([o[1] for o in out], dtype=np.int8)
    a = sev > 0
    return Observations(
        np.array([o[0] for o in out], dtype=np.int64),
        a,
        a.copy(),
        sev,
        np.array([o[2] for o in out], dtype=np.float64),
        [o[3] for o in out],
    )


#: One observation: time [ms], severity (0: readings back), value [s], detail.
_Slot = tuple[int, int, float, dict[str, Any]]


def _gaps(
    t_ms: IntArray,
    first: int,
    interval: FloatArray,
    fallback: float,
    floor: float,
    crit: float,
    policy: AlertPolicy,
    received_ms: IntArray | None,
) -> list[_Slot]:
    """Per reading ``i >= first``: offline at the gap's threshold, critical, then the reading
    itself (readings back), each with the gap it belongs to."""
    out: list[_Slot] = []
    for i in range(first, len(t_ms)):
        usual = float(interval[i]) if np.isfinite(interval[i]) else fallback
        thr = max(policy.offline_factor * usual, floor)
        prev, now = int(t_ms[i - 1]), int(t_ms[i])
        gap = now - prev
        if gap > thr:
            past = received_ms is not None and int(received_ms[i - 1]) > prev + thr
            d = {"gap_start_ms": prev, "gap_end_ms": now, "past_outage": bool(past)}
            out.append((int(prev + thr), 1, thr / 1000, d))
            crit_i = max(crit, policy.offline_critical_factor * thr)
            if gap > crit_i:
                out.append((int(prev + crit_i), 2, crit_i / 1000, d))
        out.append((now, 0, gap / 1000, {}))
    return out


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
        scope.frame["received_ms"].to_numpy(np.int64),
        scope.receipt_reference_ms,
    )


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence at time t [ms]: the last reading before it, how long the unit was silent
    [ms] (up to the reading that ended the silence, or up to the reference) and its usual
    interval [s]."""
    t_all, reference_ms = scope.t_all, scope.reference_ms
    interval_all = scope.interval_all
    usual = float(interval_all[-1]) if np.isfinite(interval_all[-1]) else float("nan")

    def context(t: int) -> dict[str, Any]:
        # the silence around t: from the reading before it to the reading at or after it
        # (the one that ended it), or (none yet) up to the reference
        k = int(np.searchsorted(t_all, t, side="left"))
        last = int(t_all[k - 1]) if k else int(t_all[0])
        upto = int(t_all[k]) if k < len(t_all) else max(reference_ms, t)
        return {
            "last_reading_ms": last, "silent_ms": upto - last,
            "usual_interval_s": round(usual / 1000.0, 1) if math.isfinite(usual) else None,
            "reference_ms": reference_ms,
        }  # fmt: skip

    return context
