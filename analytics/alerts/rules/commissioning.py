"""Commissioning: a unit pulling down to its band for the first time, or again after a
maintenance window that left it warm, is not in an excursion; one that takes too long gets
its own alert (``pull_down_overdue``).

A unit is commissioning from its first reading (a new unit, registered or not) until its
cabinet is first inside its band, and again from the end of a maintenance window after which
its cabinet reads above the band. Inside a maintenance window the excursion clock is held:
the unit is in someone's hands. The phase is carried in the device's alert state under
``state["commissioning"]``: when it began [ms], why, when the cabinet first reached its band
[ms] and the pull-down time [s].
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.observations import BoolArray, IntArray, Observations
from tecfleet.analytics.alerts.scope import DeviceScope
from tecfleet.ingest.db import alert_records as records

__all__ = ["Phase", "evidence", "observe", "phase"]


@dataclass(frozen=True)
class Phase:
    """Per new reading: commissioning, inside a maintenance window, and when the current
    commissioning began [ms] (-1 where none)."""

    commissioning: BoolArray
    maintenance: BoolArray
    since_ms: IntArray

    @property
    def excursion_held(self) -> BoolArray:
        """Readings on which no excursion is judged."""
        return self.commissioning | self.maintenance


def _starts(scope: DeviceScope, t: IntArray, warm: BoolArray) -> list[tuple[int, int, str]]:
    """(row, start [ms], reason) of each commissioning that begins in the new readings."""
    starts: list[tuple[int, int, str]] = []
    if scope.done_ms < 0 and "commissioning" not in scope.state:
        starts.append((0, int(t[0]), "first_reading"))
    for _start, end in scope.shared["maintenance_windows"]:
        j = int(np.searchsorted(t, end, side="left"))
        if j < len(t) and end > scope.done_ms and warm[j]:
            starts.append((j, int(end), "maintenance"))
    return sorted(starts)


def phase(scope: DeviceScope) -> Phase:
    """The commissioning phase over the scope's new readings (worked out once per scope; the
    carried state is brought up to date)."""
    found = scope.shared.get("commissioning")
    if isinstance(found, Phase):
        return found
    t = scope.t_new
    n = len(t)
    tc = scope.new_column("t_cabinet")
    band = scope.band
    in_band = (tc >= band.low_c) & (tc <= band.high_c)
    windows = records.active_maintenance(scope.conn, scope.dev.device_id, scope.dev.site)
    scope.shared["maintenance_windows"] = windows
    maintenance = np.zeros(n, bool)
    for start, end in windows:
        maintenance |= (t >= start) & (t < end)
    commissioning = np.zeros(n, bool)
    since = np.full(n, -1, np.int64)
    com: dict[str, Any] = scope.state.get("commissioning") or {}
    # a commissioning carried over from earlier calls goes on from the first new reading
    pending = [(0, int(com["since_ms"]), str(com["reason"]))] if _ongoing(com) and n else []
    for row, start, reason in pending + _starts(scope, t, tc > band.high_c):
        reached = np.flatnonzero(in_band[row:])
        end = row + int(reached[0]) if reached.size else n
        commissioning[row:end] = True
        since[row:end] = start
        com = {"since_ms": start, "reason": reason, "in_band_ms": None, "pull_down_s": None}
        if reached.size:
            com["in_band_ms"] = int(t[end])
            com["pull_down_s"] = round((int(t[end]) - start) / 1000.0, 1)
    if com:
        scope.state["commissioning"] = com
    found = Phase(commissioning, maintenance, since)
    scope.shared["commissioning"] = found
    return found


def _ongoing(com: dict[str, Any]) -> bool:
    return bool(com) and com.get("in_band_ms") is None


def observe(scope: DeviceScope) -> Observations | None:
    """Pull-down overdue: still commissioning ``pull_down_limit_s`` after it began. The value
    is the cabinet temperature [°C] (the spell's lowest is how far it got)."""
    if not len(scope.t_new):
        return None
    ph = phase(scope)
    elapsed = scope.t_new - ph.since_ms
    limit_ms = int(scope.policy.pull_down_limit_s * 1000)
    active = ph.commissioning & (elapsed > limit_ms)
    sev = np.where(active, 1, 0).astype(np.int8)
    return Observations(scope.t_new, active, active.copy(), sev, scope.new_column("t_cabinet"))


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence at time t [ms]: the band, when commissioning began and why, the time allowed
    for the pull-down [s] and the cabinet's latest temperature [°C]."""
    band, policy, frame, t_all = scope.band, scope.policy, scope.frame, scope.t_all
    com = scope.state.get("commissioning") or {}

    def context(t: int) -> dict[str, Any]:
        k = int(np.searchsorted(t_all, t, side="right")) - 1
        return {
            "low_limit_c": band.low_c, "high_limit_c": band.high_c,
            "limits_source": band.source,
            "commissioning_since_ms": com.get("since_ms"),
            "commissioning_reason": com.get("reason"),
            "pull_down_limit_s": policy.pull_down_limit_s,
            "in_band_ms": com.get("in_band_ms"), "pull_down_s": com.get("pull_down_s"),
            "elapsed_s": round((t - int(com.get("since_ms", t))) / 1000.0, 1),
            "t_cabinet_c": float(frame["t_cabinet"].iloc[k]) if k >= 0 else None,
        }  # fmt: skip

    return context
