"""The lifecycle of one (device, kind): observations in, alert changes out.

* a condition must hold for ``open_after`` before an alert opens (no alert for a door opening);
* while open, a looser "hold" test applies (hysteresis), and the alert resolves only once the
  condition has been clear for ``clear_after``;
* severity only rises within a spell (no flapping between warning and critical);
* one alert per device and kind is open at a time; a condition returning within
  ``reopen_window_s`` of resolving (``estimate_reopen_window_s`` for the trend kinds) reopens
  the same alert and counts the reopen (what that does to its notices: see ``incidents``).

The lifecycle state is a JSON dict carried between calls, so the same history gives the same
alerts whether it arrives live or as a backfill.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from tecfleet.analytics.alerts.constants import MS_MIN
from tecfleet.analytics.alerts.incidents import Windows
from tecfleet.analytics.alerts.ledger import Ledger
from tecfleet.analytics.alerts.observations import Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.summaries import describe

__all__ = ["Timing", "run_machine", "timing_for"]


@dataclass(frozen=True)
class Timing:
    """Delays of one kind's lifecycle [ms]: to open, to resolve once clear, to reopen rather
    than open anew, to turn critical (None: never by time), the entry bridge, and the window
    in which a symptom joins its cause's incident."""

    open_after_ms: int
    clear_after_ms: int
    reopen_within_ms: int
    critical_after_ms: int | None = None
    bridge_ms: int = 0
    incident_link_ms: int = 0

    @property
    def windows(self) -> Windows:
        """The times a change's notice is judged by."""
        return Windows(self.reopen_within_ms, self.incident_link_ms)


def timing_for(kind: str, p: AlertPolicy) -> Timing:
    """The lifecycle delays of ``kind`` under policy ``p``."""
    return dataclasses.replace(_delays(kind, p), incident_link_ms=int(p.incident_link_s * 1000))


def _delays(kind: str, p: AlertPolicy) -> Timing:
    s = 1000
    clear = int(p.clear_s * s)
    reopen = int(p.reopen_window_s * s)
    bridge = int(p.entry_bridge_s * s)
    if kind == "excursion":
        critical = int(p.excursion_critical_s * s)
        return Timing(int(p.excursion_delay_s * s), clear, reopen, critical, bridge)
    if kind == "over_temperature":
        return Timing(int(p.over_temperature_delay_s * s), clear, reopen, None, bridge)
    if kind == "condensation_risk":
        return Timing(int(p.condensation_delay_s * s), clear, reopen, None, bridge)
    if kind == "sensor_fault":
        return Timing(int(p.sensor_delay_s * s), 2 * clear, reopen, None, bridge)
    if kind == "offline":
        return Timing(0, 0, reopen)
    if kind == "pull_down_overdue":
        return Timing(0, clear, reopen)
    return Timing(0, int(p.estimate_clear_s * s), int(p.estimate_reopen_window_s * s))


def run_machine(
    kind: str,
    obs: Observations,
    st: dict[str, Any],
    timing: Timing,
    ledger: Ledger,
    context: Callable[[int], dict[str, Any]],
) -> None:
    """Feed observations to the lifecycle of one (device, kind); ``st`` is carried JSON."""
    last_t = st.get("last_t")
    reopen_ms = timing.reopen_within_ms
    gap_cap = max(timing.clear_after_ms, 10 * MS_MIN)
    touched = False
    for i in range(len(obs.t)):
        t = int(obs.t[i])
        if last_t is not None and t < last_t:
            continue  # already judged (e.g. an offline gap seen live)
        prev_t, last_t = last_t, t
        is_open = bool(st.get("open"))
        on = bool(obs.hold[i] if is_open else obs.active[i])
        ep = st.get("ep")
        if on:
            st["clear"] = None
            if ep is None:
                ep = st["ep"] = {"start": t, "active_ms": 0, "min": None, "max": None, "last_on": t}
                st.pop("detail", None)
            else:
                # the interval up to a sample counts with that sample's state
                if prev_t is not None:
                    ep["active_ms"] += min(t - prev_t, gap_cap)
                ep["last_on"] = t
            v = float(obs.value[i])
            if math.isfinite(v):
                ep["min"] = v if ep["min"] is None else min(ep["min"], v)
                ep["max"] = v if ep["max"] is None else max(ep["max"], v)
            sev = int(obs.severity[i]) or 1
            if timing.critical_after_ms is not None and ep["active_ms"] >= timing.critical_after_ms:
                sev = 2
            if obs.detail is not None:
                st["detail"] = obs.detail[i]
            ep["sev"] = max(int(ep.get("sev", 0)), sev)
            if is_open:
                if ep["sev"] > int(st.get("sev", 1)):
                    st["sev"] = ep["sev"]
                    summ, ev = describe(kind, ep, {**context(t), **st.get("detail", {})}, False)
                    ledger.apply(kind, "escalated", t, ep["sev"], st, summ, ev, timing.windows)
                else:
                    touched = True
            elif ep["active_ms"] >= timing.open_after_ms:
                st["open"] = True
                st["sev"] = ep["sev"]
                summ, ev = describe(kind, ep, {**context(t), **st.get("detail", {})}, False)
                resolved_at = st.get("resolved_at")
                if (
                    st.get("alert_id") is not None
                    and resolved_at is not None
                    and (ep["start"] - resolved_at <= reopen_ms)
                ):
                    ledger.apply(kind, "reopened", t, ep["sev"], st, summ, ev, timing.windows)
                else:
                    ledger.apply(kind, "opened", t, ep["sev"], st, summ, ev, timing.windows)
                touched = False
        else:
            if not is_open:
                if ep is not None and t - int(ep["last_on"]) <= timing.bridge_ms:
                    continue  # a short return inside the limit: the spell goes on
                st["ep"] = None
                continue
            if st.get("clear") is None:
                st["clear"] = t
            if t - int(st["clear"]) >= timing.clear_after_ms:
                assert ep is not None
                # the spell ended when the condition cleared, not when the alert resolved
                ep["end"] = int(st["clear"])
                summ, ev = describe(kind, ep, {**context(t), **st.get("detail", {})}, True)
                ledger.apply(
                    kind, "resolved", t, int(st.get("sev", 1)), st, summ, ev, timing.windows
                )
                st.update(open=False, clear=None, ep=None, resolved_at=t, sev=0)
                touched = False
    st["last_t"] = last_t
    if touched and st.get("open") and st.get("ep") is not None:
        ep = st["ep"]
        summ, ev = describe(
            kind, ep, {**context(int(ep["last_on"])), **st.get("detail", {})}, False
        )
        ledger.apply(kind, "updated", int(ep["last_on"]), int(st["sev"]), st, summ, ev)
