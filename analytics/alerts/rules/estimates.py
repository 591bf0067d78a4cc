"""What the rules judged on the diagnostics' estimates share: the keys they read, one
series per rule, and the window of estimates a call judges.

Estimates are judged only once the sensor rule has seen the readings behind them, and those
made while a sensor fault put a channel in doubt are held back (recorded on the sensor alert
under ``suppressed``)."""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from tecfleet.analytics.alerts.constants import MS_DAY
from tecfleet.analytics.alerts.observations import FloatArray, IntArray, Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.scope import DeviceScope
from tecfleet.ingest.db import alert_records as records

__all__ = [
    "CAPACITY_KEYS",
    "HOT_KEYS",
    "LEAK_KEYS",
    "TREND_KEYS",
    "WEAR_KEYS",
    "Judge",
    "estimate_evidence",
    "estimate_observer",
    "estimate_series",
    "settle_ms",
]

# Estimate keys of tecfleet.analytics.runner that the trend rules read.
WEAR_KEYS = (
    "module.resistance_25c.change_pct",
    "module.resistance_25c_ohm",
    "module.resistance_25c.baseline",
    "module.resistance_25c.slope_pct_per_30d",
    "module.resistance_25c.slope_pct_per_30d_low",
    "module.days_to_wear_limit",
)
LEAK_KEYS = (
    "cabinet.ua.change_pct",
    "cabinet.ua_w_per_k",
    "cabinet.ua.baseline",
    "cabinet.heat_leak_w",
    "cabinet.ua.flag",
)
HOT_KEYS = (
    "hot_side.resistance.change_pct",
    "hot_side.resistance_k_per_w",
    "hot_side.resistance.baseline",
    "hot_side.resistance.flag",
)
CAPACITY_KEYS = (
    "capacity.margin_w",
    "capacity.holdable",
    "capacity.heat_load_w",
    "capacity.max_cooling_w",
    "capacity.design_ambient_c",
    "capacity.design_ambient_basis",
    "capacity.losing_setpoint",
    "capacity.losing_setpoint_h",
)
#: The keys each kind reads, in the order the kinds are judged.
TREND_KEYS = {
    "module_wear": WEAR_KEYS,
    "heat_leak": LEAK_KEYS,
    "hot_side_cooling": HOT_KEYS,
    "capacity_shortfall": CAPACITY_KEYS,
}

#: A rule on estimates: key -> [(at_ms, value)] and the policy to observations.
Judge = Callable[[Mapping[str, Sequence[tuple[int, float]]], AlertPolicy], Observations]


def estimate_series(
    series: Mapping[str, Sequence[tuple[int, float]]], primary: str
) -> tuple[IntArray, FloatArray, list[dict[str, Any]]] | None:
    """Times [ms] and values of the ``primary`` key, and per time the newest value of every
    key at or before it; None without any ``primary`` value."""
    main = list(series.get(primary, ()))
    if not main:
        return None
    ts = np.array([p[0] for p in main], dtype=np.int64)
    vals = np.array([p[1] for p in main], dtype=np.float64)
    details: list[dict[str, Any]] = []
    for at in ts:
        d: dict[str, Any] = {}
        for key, pts in series.items():
            before = [v for t, v in pts if t <= at]
            if before:
                d[key] = before[-1]
        details.append(d)
    return ts, vals, details


@dataclass
class _Window:
    """The estimates one call judges: newer than ``done_ms`` and not after ``cutoff_ms``."""

    done_ms: int
    newest_ms: int
    cutoff_ms: int
    taints: list[tuple[Any, ...]]
    taint_after_ms: int
    every: dict[str, list[tuple[int, float]]]


def _window(scope: DeviceScope) -> _Window:
    """The scope's estimate window, read once for all the estimate rules; the newest estimate
    judged is kept in the state when every rule has run."""
    found = scope.shared.get("estimates")
    if isinstance(found, _Window):
        return found
    state, policy = scope.state, scope.policy
    est_done = int(state.get("est_done", -1))
    # judge estimates only once the sensor rule has seen the readings behind them
    newest = int(scope.t_all[-1]) if len(scope.t_all) else scope.done_ms
    all_keys = [k for keys in TREND_KEYS.values() for k in keys]
    w = _Window(
        done_ms=est_done,
        newest_ms=est_done,
        cutoff_ms=newest - settle_ms(scope.interval_all, policy),
        taints=[tuple(x) for x in state.get("sensor_taint", [])],
        taint_after_ms=int(policy.sensor_taint_after_s * 1000),
        every=records.read_estimates(
            scope.conn, scope.dev.device_id, all_keys, est_done - 3 * MS_DAY
        ),
    )
    scope.shared["estimates"] = w

    def keep_newest() -> None:
        state["est_done"] = w.newest_ms

    scope.finishers.append(keep_newest)
    return w


def settle_ms(interval: FloatArray, policy: AlertPolicy) -> int:
    """How old the readings behind an estimate must be before it is judged [ms]:
    ``trend_settle_s``, or ``trend_settle_intervals`` of the unit's newest usual interval
    ``interval`` [ms] per reading (``usual_interval_ms``) where that is longer, as the frozen
    window the sensor rule waits for grows with it (``sensor_fault.stuck_window_ms``)."""
    usual = float(interval[-1]) if len(interval) and np.isfinite(interval[-1]) else 0.0
    return int(max(policy.trend_settle_s * 1000.0, policy.trend_settle_intervals * usual))


def _tainted(t: int, spans: Sequence[tuple[Any, ...]], after_ms: int) -> bool:
    return any(a <= t and (b is None or t <= b + after_ms) for a, b in spans)


def estimate_observer(kind: str, judge: Judge) -> Callable[[DeviceScope], Observations | None]:
    """The observation function of an estimate rule: ``judge`` on the kind's series, cut to
    the window, without the estimates a sensor fault put in doubt."""
    keys = TREND_KEYS[kind]

    def observe(scope: DeviceScope) -> Observations | None:
        w = _window(scope)
        series = {k: v for k, v in w.every.items() if k in keys}
        obs = judge(series, scope.policy)
        keep = (obs.t > w.done_ms) & (obs.t <= w.cutoff_ms)
        if len(obs.t) and w.taints:
            bad = np.array(
                [_tainted(int(t), w.taints, w.taint_after_ms) for t in obs.t], dtype=bool
            )
            hidden = keep & bad & obs.active
            if hidden.any():
                # the condition rests on a faulty channel: recorded on the sensor alert only
                sup = scope.state.setdefault("suppressed", {})
                peak = float(np.max(obs.value[hidden]))
                sup[kind] = {"at_ms": int(obs.t[hidden][-1]), "value": round(peak, 3)}
            w.newest_ms = max(w.newest_ms, int(obs.t[keep][-1])) if keep.any() else w.newest_ms
            keep &= ~bad
        if obs.detail is not None:
            obs = Observations(
                obs.t[keep], obs.active[keep], obs.hold[keep], obs.severity[keep], obs.value[keep],
                [d for d, k in zip(obs.detail, keep, strict=True) if k],
            )  # fmt: skip
        if len(obs.t):
            w.newest_ms = max(w.newest_ms, int(obs.t[-1]))
        return obs

    return observe


def estimate_evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence of the estimate rules: the module wear limit [%]."""
    policy = scope.policy
    return lambda _t: {"wear_limit_pct": policy.wear_limit_pct}
