"""Sensor faults: implausible values, frozen channels, spikes, dropouts, a cold side warmer
than the cabinet while cooling, and a cabinet probe that moved against the heat balance.

While a fault puts a channel in doubt, the estimates made from it are suspect: the spans are
kept in the state (``sensor_taint``) for the trend rules."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
import pandas as pd
from pandas.api.indexers import BaseIndexer

from tecfleet.analytics.alerts.coverage import set_limit
from tecfleet.analytics.alerts.kinds import channel_fault
from tecfleet.analytics.alerts.observations import BoolArray, FloatArray, Observations
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.rules.probe_drift import (
    PROBE_DRIFT_ISSUE,
    drift_since,
    probe_baselines,
    probe_offsets,
)
from tecfleet.analytics.alerts.scope import DeviceScope, usual_interval_ms

__all__ = [
    "WARM_COLD_SIDE",
    "evidence",
    "observe",
    "sensor_fault_observations",
    "stuck_window_ms",
    "track_taint",
]

_TEMPS = ("t_cabinet", "t_cold", "t_hot", "t_ambient")
#: The channels that must move when the module's current steps: the hot face gives off the
#: pumped heat and the electrical power, both of which rise with the current.
_DRIVEN = ("t_hot",)
_PLAUSIBLE = {
    # Plausible ranges of a cooler's sensors (common practice, no source).
    "t_cabinet": (-40.0, 60.0),
    "t_cold": (-50.0, 100.0),
    "t_hot": (-40.0, 120.0),
    "t_ambient": (-40.0, 60.0),
    "current": (-0.1, 60.0),
    "rh": (0.0, 100.0),
}

#: The check of a cold side warmer than the cabinet, and why it is out of reach without a
#: cold-face probe (the device's limited checks, see tecfleet.analytics.alerts.coverage).
WARM_COLD_SIDE = "cold_side_warmer_than_cabinet"
_WARM_NOT_PROBED = (
    "Not judged: the cold face is not probed, so a cold side warmer than the cabinet while "
    "the module cools, which no working cooler shows, cannot be seen."
)

#: (issue label, per-row mask) in the order the issues are listed in the evidence.
_Checks = list[tuple[str, BoolArray]]


def sensor_fault_observations(
    frame: pd.DataFrame,
    first: int,
    policy: AlertPolicy,
    i_ref: float | None,
    interval: FloatArray | None = None,
    probe_offset: FloatArray | None = None,
) -> Observations:
    """Sensor faults on rows ``first:`` of ``frame`` (rows before are look-back only).

    Out-of-range values, a temperature channel frozen over its window
    (:func:`stuck_window_ms`) while another moves by ``stuck_other_move_k`` [K] (a channel
    the unit has no probe for, NaN, is neither judged nor counted as moving), isolated
    spikes of ``spike_k`` [K] (``spike_count`` in an hour, judged one sample late), more
    than ``dropout_fraction`` of the expected samples missing in the last hour, and the cold
    side warmer than the cabinet by ``impossible_margin_k`` [K] while the module has been
    driven at ``impossible_current_fraction`` of ``i_ref`` [A] for ``impossible_on_s``.
    ``interval`` is ``usual_interval_ms`` of the frame's times, when the caller has it.
    ``probe_offset`` [K] per row (:func:`cabinet_probe_offset`) flags the cabinet probe when
    it has moved by ``drift_warning_k`` against the cold side's heat balance. An open alert is
    held while a channel found stuck stays frozen, even if the others have stopped moving.
    """
    n = len(frame)
    if n == 0 or first >= n:
        return Observations.empty()
    t = frame["ts_ms"].to_numpy(np.int64)
    idx = pd.to_datetime(t, unit="ms")
    checks: _Checks = []
    for col, (lo, hi) in _PLAUSIBLE.items():
        x = frame[col].to_numpy(np.float64)
        checks.append((f"{col} out of range", np.isfinite(x) & ((x < lo) | (x > hi))))
    if interval is None:
        interval = usual_interval_ms(t)
    frozen_since_stuck = _stuck_checks(frame, t, interval, policy, checks)
    checks.append(("spikes", _spikes(frame, idx, policy)))
    checks.append(("dropouts", _dropouts(t, idx, interval, policy)))
    if i_ref is not None and i_ref > 0:
        warm = _impossible(frame, t, idx, i_ref, policy)
        checks.append(("cold side warmer than cabinet while cooling", warm))
    if probe_offset is not None:
        with np.errstate(invalid="ignore"):
            moved = np.abs(probe_offset) >= policy.drift_warning_k
        checks.append((PROBE_DRIFT_ISSUE, moved))
    masks = np.vstack([m[first:] for _, m in checks])
    labels = [label for label, _ in checks]
    count = masks.sum(axis=0)
    active = count > 0
    detail: list[dict[str, Any]] = [{"issues": []} for _ in range(n - first)]
    for i in np.flatnonzero(active):
        detail[i] = {"issues": [labels[k] for k in np.flatnonzero(masks[:, i])]}
    return Observations(
        t[first:],
        active,
        active | frozen_since_stuck[first:],
        np.where(active, 1, 0).astype(np.int8),
        count.astype(np.float64),
        detail,
    )


def stuck_window_ms(interval: FloatArray, policy: AlertPolicy) -> FloatArray:
    """The window a channel must stay frozen over to be stuck, per reading [ms]:
    ``stuck_window_s``, or ``stuck_window_intervals`` of the unit's usual interval
    ``interval`` [ms] (``usual_interval_ms``) where that is longer, so that a slow-reporting
    unit still shows ``stuck_min_samples`` equal readings. At one-minute reporting the
    hour is the longer."""
    return _hour_or_intervals(policy.stuck_window_intervals, interval, policy)


def _hour_or_intervals(count: float, interval: FloatArray, policy: AlertPolicy) -> FloatArray:
    # The longer of ``stuck_window_s`` and ``count`` usual intervals, per reading [ms] (the
    # hour where the interval is not known yet).
    scaled = np.nan_to_num(count * interval, nan=0.0)
    return np.asarray(np.maximum(policy.stuck_window_s * 1000.0, scaled), np.float64)


class _Trailing(BaseIndexer):  # type: ignore[misc]  # pandas ships no type hints
    """Rolling windows (t − window, t] of each reading, the window per reading: ``t_ms``
    and ``window_ms`` [ms] are passed as keywords (pandas keeps them as attributes)."""

    t_ms: Any
    window_ms: Any

    def get_window_bounds(
        self,
        num_values: int = 0,
        min_periods: int | None = None,
        center: bool | None = None,
        closed: str | None = None,
        step: int | None = None,
    ) -> tuple[Any, Any]:
        start = np.searchsorted(self.t_ms, self.t_ms - self.window_ms, side="right")
        return start.astype(np.int64), np.arange(1, num_values + 1, dtype=np.int64)


def driven_window_ms(interval: FloatArray, policy: AlertPolicy) -> FloatArray:
    """The window the hot face's probe must stay frozen over while the module's current
    steps, per reading [ms]: ``stuck_window_s``, or ``stuck_driven_intervals`` of the unit's usual
    interval ``interval`` [ms] where that is longer. At one-minute reporting the hour, as
    :func:`stuck_window_ms`."""
    return _hour_or_intervals(policy.stuck_driven_intervals, interval, policy)


def _frozen_spans(
    frame: pd.DataFrame, t: Any, window: FloatArray, min_samples: int
) -> tuple[BoolArray, dict[str, FloatArray]]:
    """The rows whose trailing ``window`` [ms] is covered and holds ``min_samples``, and per
    temperature channel the span of its readings over that window per row [K]."""
    trailing = _Trailing(t_ms=t, window_ms=window)
    counts = pd.Series(np.ones(len(frame))).rolling(trailing).sum().to_numpy()
    spans = {}
    for col in _TEMPS:
        s = pd.Series(frame[col].to_numpy(np.float64)).rolling(trailing)
        spans[col] = np.asarray((s.max() - s.min()).to_numpy(), np.float64)
    return np.asarray(((t - t[0]) >= window) & (counts >= min_samples), bool), spans


def _steps(frame: pd.DataFrame, t: Any, window: FloatArray, policy: AlertPolicy) -> Any:
    """Steps of the module's current of ``stuck_driven_step_a`` [A] or more between
    consecutive readings of the trailing ``window`` [ms], per row."""
    cur = frame["current"].to_numpy(np.float64)
    with np.errstate(invalid="ignore"):
        step = np.abs(np.diff(cur)) >= policy.stuck_driven_step_a
    count = np.concatenate([[0], np.cumsum(step)])
    first = np.searchsorted(t, t - window, side="right")
    return count - count[first]


def _stuck_checks(
    frame: pd.DataFrame, t: Any, interval: FloatArray, policy: AlertPolicy, checks: _Checks
) -> BoolArray:
    """Append one "stuck" check per temperature channel; return the rows where a channel
    found stuck is still frozen.

    A channel is stuck when frozen over :func:`stuck_window_ms` while another moves, or, for
    the hot face, frozen over :func:`driven_window_ms` while the module's current stepped by
    ``stuck_driven_step_a`` ``stuck_driven_steps`` times: the hot face gives off
    Qh = S·I·Th + ½·I²·R − K·(Th − Tc) (Ioffe 1957; Goldsmid 2010, ch. 2), which an amp
    changes by watts, kelvin through the sink. The cold face sits between a cabinet that
    warms (a door opened, the cause of the step) and a module that cools it, which can
    cancel; the cabinet air and the room may rest within a probe step across thermostat
    cycles: those are judged on the other channels only."""
    long_ok, long = _frozen_spans(
        frame, t, stuck_window_ms(interval, policy), policy.stuck_min_samples
    )
    driven_window = driven_window_ms(interval, policy)
    short_ok, short = _frozen_spans(frame, t, driven_window, policy.stuck_driven_min_samples)
    stepped = _steps(frame, t, driven_window, policy) >= policy.stuck_driven_steps
    frozen_since_stuck = np.zeros(len(frame), dtype=bool)
    for col in _TEMPS:
        # fmax skips a face the unit has no probe for (NaN), where max would spread it.
        others = np.fmax.reduce(np.vstack([long[c] for c in _TEMPS if c != col]), axis=0)
        frozen = long_ok & (long[col] <= 1e-9)
        stuck = frozen & (others >= policy.stuck_other_move_k)
        frozen_now = frozen | (short_ok & (short[col] <= 1e-9))
        if col in _DRIVEN:
            stuck |= frozen_now & stepped
        checks.append((f"{col} stuck", stuck))
        # A channel found stuck stays in doubt while it stays frozen, also when the others
        # then rest too (a quiet night): no resolve and reopen on the same frozen probe.
        run = np.cumsum(~frozen_now)
        held = pd.Series(stuck).groupby(run).cummax().to_numpy(dtype=bool)
        frozen_since_stuck |= frozen_now & held
    return frozen_since_stuck


def _spikes(frame: pd.DataFrame, idx: pd.DatetimeIndex, policy: AlertPolicy) -> BoolArray:
    """Rows with ``spike_count`` or more spikes of the slow channels in the last hour."""
    n = len(frame)
    spikes = np.zeros(n, dtype=np.float64)
    # Only the slow channels: the module faces really do jump within a minute when the
    # drive switches on or off.
    for col in ("t_cabinet", "t_ambient"):
        x = frame[col].to_numpy(np.float64)
        if n < 3:
            break
        up = x[1:-1] - x[:-2]
        down = x[1:-1] - x[2:]
        spike = (np.abs(up) > policy.spike_k) & (np.abs(down) > policy.spike_k)
        spike &= np.sign(up) == np.sign(down)
        spikes[2:] += spike  # judged when the sample after the spike arrives
    spike_hour = pd.Series(spikes, index=idx).rolling("3600s").sum().to_numpy()
    return np.asarray(spike_hour >= policy.spike_count)


def _dropouts(
    t: Any, idx: pd.DatetimeIndex, interval: FloatArray, policy: AlertPolicy
) -> BoolArray:
    """Rows whose last hour misses more than ``dropout_fraction`` of the expected samples,
    short of a gap that the offline rule judges."""
    expected = 3_600_000 / interval
    present = pd.Series(1.0, index=idx).rolling("3600s").sum().to_numpy()
    hour_covered = (t - t[0]) >= 3_600_000
    with np.errstate(invalid="ignore"):
        missing = 1.0 - present / expected
    # a gap long enough to be "offline" is that rule's business, not a dropout
    longest = pd.Series(np.diff(t, prepend=t[0]).astype(np.float64), index=idx)
    longest_hour = longest.rolling("3600s").max().to_numpy()
    offline_gap = np.maximum(policy.offline_factor * interval, policy.offline_min_s * 1000)
    with np.errstate(invalid="ignore"):
        dropped = (
            hour_covered
            & np.isfinite(missing)
            & (missing > policy.dropout_fraction)
            & ~(longest_hour > offline_gap)
        )
    return np.asarray(dropped)


def _impossible(
    frame: pd.DataFrame, t: Any, idx: pd.DatetimeIndex, i_ref: float, policy: AlertPolicy
) -> BoolArray:
    """Rows where the cold side is warmer than the cabinet although the module has been
    driven hard for ``impossible_on_s``."""
    cur = pd.Series(frame["current"].to_numpy(np.float64), index=idx)
    on_min = cur.rolling(f"{int(policy.impossible_on_s)}s").min().to_numpy()
    on_cov = (t - t[0]) >= policy.impossible_on_s * 1000
    hard = on_cov & (on_min >= policy.impossible_current_fraction * i_ref)
    warm = frame["t_cold"].to_numpy(np.float64) > (
        frame["t_cabinet"].to_numpy(np.float64) + policy.impossible_margin_k
    )
    return np.asarray(hard & warm)


def _i_ref(module: Mapping[str, Any] | None) -> float | None:
    # Only the registered rating: a "largest current seen" would depend on how much history
    # a call happens to load, and evaluation has to be reproducible.
    if module and module.get("i_max_a"):
        return float(module["i_max_a"])
    return None


def observe(scope: DeviceScope) -> Observations | None:
    """The rule on the new readings (None without any), with the cabinet probe's change
    and since when it moved in the evidence of the rows that flag it. Where the newest
    reading has no cold face, the device's limited checks say that the cold side warmer than
    the cabinet is not judged."""
    if not len(scope.t_new):
        return None
    policy, first = scope.policy, scope.first
    probed = bool(np.isfinite(scope.new_column("t_cold")[-1]))
    set_limit(scope.state, WARM_COLD_SIDE, None, None if probed else _WARM_NOT_PROBED)
    fits = probe_baselines(scope)
    offsets = None
    for fit in fits:
        # each fit judges its own stretch (NaN elsewhere): the newer one where they meet
        off = probe_offsets(scope.frame, fit, policy, scope.interval_all)
        offsets = off if offsets is None else np.where(np.isnan(off), offsets, off)
    sf = sensor_fault_observations(
        scope.frame, first, policy, _i_ref(scope.dev.module), scope.interval_all, offsets
    )
    if offsets is not None and sf.detail is not None:
        since = drift_since(scope.t_new, offsets[first:], scope.state, policy.drift_warning_k / 4)
        for i in np.flatnonzero(sf.active):
            if PROBE_DRIFT_ISSUE in sf.detail[i]["issues"]:
                t = int(scope.t_new[i])
                sf.detail[i]["cabinet_probe_offset_k"] = round(float(offsets[first + i]), 2)
                sf.detail[i]["cabinet_probe_offset_since_ms"] = int(since[i]) or None
                sf.detail[i]["cabinet_probe_baseline"] = next(
                    f for f in reversed(fits) if int(f["to_ms"]) <= t
                )
    return sf


def evidence(scope: DeviceScope) -> Callable[[int], dict[str, Any]]:
    """Evidence: the estimate alerts held back so far because of the sensor fault, and from
    the end of the maintenance that replaced a probe the cabinet probe's fit reads, that end
    (see ``probe_drift.probe_baselines``)."""
    state = scope.state

    def context(t: int) -> dict[str, Any]:
        out: dict[str, Any] = {"suppressed": dict(state.get("suppressed", {}))}
        replaced = state.get("probe_replaced_ms")
        if replaced is not None and t >= int(replaced):
            out["cabinet_probe_replaced_ms"] = int(replaced)
        return out

    return context


def track_taint(scope: DeviceScope) -> None:
    """Keep the spans [start, end] [ms] in which a sensor fault put a channel in doubt.

    A span starts a stuck window (:func:`stuck_window_ms`) before the fault's spell (a
    frozen channel shows only after that window) and stays open while the spell lasts; it
    ends when the spell does.
    Spells of spikes or dropouts alone do not count.
    """
    state, policy = scope.state, scope.policy
    sf: Mapping[str, Any] = state.get("kinds", {}).get("sensor_fault", {})
    spans: list[list[int | None]] = state.setdefault("sensor_taint", [])
    ep = sf.get("ep")
    issues = (sf.get("detail") or {}).get("issues", [])
    is_open = bool(spans) and spans[-1][1] is None
    if ep is not None and channel_fault(issues):
        if not is_open:
            window = stuck_window_ms(scope.interval_all[-1:], policy)
            spans.append([int(ep["start"]) - int(window[0]), None])
    elif ep is None and is_open:
        spans[-1][1] = int(sf.get("last_t") or 0)
    del spans[:-20]  # a bounded history is enough for the taint horizon
