"""The cabinet probe against the cold side's heat balance: a commissioning fit per unit, and
the probe's change since then, which a drifting probe moves and a healthy unit does not."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from tecfleet.analytics import physics
from tecfleet.analytics.alerts.constants import MS_HOUR, T0
from tecfleet.analytics.alerts.observations import BoolArray, FloatArray, IntArray
from tecfleet.analytics.alerts.policy import AlertPolicy
from tecfleet.analytics.alerts.scope import DeviceScope, load_readings
from tecfleet.analytics.diagnostics.cabinet_probe import (
    cold_side_heat_balance,
    fit_cold_side_baseline,
    floating_cold_face,
)
from tecfleet.analytics.diagnostics.electrical import floating_from_voltage
from tecfleet.analytics.diagnostics.intervals import usual_interval
from tecfleet.ingest import db
from tecfleet.ingest.db import alert_records as records

__all__ = [
    "PROBE_DRIFT_ISSUE",
    "REFIT_AFTER",
    "cabinet_probe_offset",
    "cold_side",
    "cold_side_heat_balance",
    "drift_since",
    "fit_cold_side_baseline",
    "probe_baselines",
    "probe_offsets",
    "running_samples_needed",
]

#: The sensor-fault issue a moved cabinet probe raises.
PROBE_DRIFT_ISSUE = "t_cabinet off the cold side's heat balance"


def cabinet_probe_offset(
    t_ms: IntArray,
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    qc: FloatArray,
    running: BoolArray,
    baseline: tuple[float, float],
    window_s: float,
    min_samples: float | FloatArray,
) -> FloatArray:
    """Change of the cabinet probe's reading against the cold side's heat balance [K].

    Per sample: the median, over the running samples of the last ``window_s``, of
    (t_cabinet − t_cold − r_cold·Qc) minus the commissioning ``offset``; NaN with fewer than
    ``min_samples`` running samples (one figure, or one per sample of ``t_ms``), and carried
    over idle stretches of up to two hours.
    A drifting cabinet probe moves it by its drift; the faces and the module equations do not.
    """
    n = len(t_ms)
    out = np.full(n, np.nan)
    offset, r_cold = baseline
    on = np.flatnonzero(running & np.isfinite(t_cabinet) & np.isfinite(t_cold) & np.isfinite(qc))
    if on.size == 0:
        return out
    resid = t_cabinet[on] - t_cold[on] - r_cold * qc[on] - offset
    rolling = pd.Series(resid, index=pd.to_datetime(t_ms[on], unit="ms")).rolling(
        f"{int(window_s)}s", min_periods=1
    )
    med = np.array(rolling.median(), np.float64)
    needed = np.broadcast_to(np.maximum(np.asarray(min_samples, np.float64), 1.0), t_ms.shape)
    med[rolling.count().to_numpy(np.float64) < needed[on]] = np.nan
    # each sample takes the newest running sample's value at or before it, if recent
    k = np.searchsorted(t_ms[on], t_ms, side="right") - 1
    has = k >= 0
    kk = np.where(has, k, 0)
    recent = has & (t_ms - t_ms[on][kk] <= 2 * MS_HOUR)
    out[recent] = med[kk[recent]]
    return out


def running_samples_needed(
    count: float, interval_ms: FloatArray | float, floor: float
) -> FloatArray:
    """Running samples a drift figure needs at the usual interval ``interval_ms`` [ms]:
    ``count`` [-] at one-minute reporting or faster; at a slower interval as many as span the
    same running time (count · 60 s / interval), and at least ``floor`` [-]. A unit reporting
    every 15 minutes has a fifteenth of the samples in any window, each one as good."""
    usual = np.nan_to_num(np.asarray(interval_ms, np.float64), nan=60_000.0)
    scaled = count * 60_000.0 / np.maximum(usual, 60_000.0)
    return np.asarray(np.maximum(np.rint(scaled), min(floor, count)), np.float64)


def _module_constants(module: Mapping[str, Any] | None) -> tuple[float, float] | None:
    """Seebeck coefficient [V/K] and thermal conductance [W/K] of the registered module(s),
    from the ratings (see tecfleet.analytics.physics.parameters_from_ratings)."""
    if not module:
        return None
    try:
        params = physics.parameters_from_ratings(
            float(module["i_max_a"]),
            float(module["v_max_v"]),
            float(module["dt_max_k"]),
            float(module.get("t_hot_rated_c") or 27.0) + T0,
            q_max=None if module.get("q_max_w") is None else float(module["q_max_w"]),
            n_couples=None if module.get("couples") is None else int(module["couples"]),
        )
        params = physics.modules_in_series(params, int(module.get("count") or 1))
    except (KeyError, TypeError, ValueError):
        return None
    return float(params.seebeck), float(params.conductance)


def cold_side(
    frame: pd.DataFrame, seebeck: float, conductance: float, min_current_a: float
) -> tuple[FloatArray, FloatArray, BoolArray]:
    """The cold face's temperature [°C] and heat [W] per row of ``frame``, and the rows the
    cold side's balance is judged on. With a cold-face probe: the probe and the driven
    module's equations, on rows above ``min_current_a`` [A]. Without one, where the driver
    lets the module float: the face read from the open-circuit voltage on rows without
    current (:func:`tecfleet.analytics.diagnostics.cabinet_probe.floating_cold_face`); no
    row is judged where it neither has the probe nor floats. ``seebeck`` [V/K] and
    ``conductance`` [W/K] of the module, from its ratings."""
    cur = frame["current"].to_numpy(np.float64)
    v = frame["voltage"].to_numpy(np.float64)
    t_hot = frame["t_hot"].to_numpy(np.float64)
    t_cold = frame["t_cold"].to_numpy(np.float64)
    if np.isfinite(t_cold).any():
        qc = cold_side_heat_balance(cur, t_cold, t_hot, v, seebeck, conductance)
        return t_cold, qc, cur > min_current_a
    off = np.abs(cur) <= min_current_a
    if not floating_from_voltage(v[off & np.isfinite(v)]):
        return t_cold, np.full(len(frame), np.nan), np.zeros(len(frame), bool)
    t_cold, qc = floating_cold_face(t_hot, v, seebeck, conductance)
    return t_cold, qc, off & np.isfinite(t_cold)


#: Replaced parts after which the commissioning fit is made again: the probes it reads (the
#: cold face's where there is one, else the hot face's through the open-circuit voltage).
REFIT_AFTER = ("cabinet_probe", "cold_probe", "hot_probe")


def probe_baselines(scope: DeviceScope) -> list[dict[str, Any]]:
    """The commissioning fits of the cabinet probe against the cold side's heat balance that
    judge this call's readings, oldest first: the fit over the first ``drift_baseline_s`` of
    the unit's readings, and one over the same time from the end of each maintenance window
    that replaced a probe of :data:`REFIT_AFTER` (up to the newest reading), each judging the
    readings up to the next one's start (``until_ms``). The newest fit made is kept in the
    state, and ``state["probe_replaced_ms"]`` keeps the newest such end reached. A fit not
    yet made (too little history since its start) ends the list."""
    state = scope.state
    kept = state.get("probe_baseline")
    if kept is None:
        first_ms = db.first_reading_ms(scope.conn, scope.dev.device_id)
        if first_ms is None:
            return []
        starts = [int(first_ms)]
    else:
        starts = [int(kept["from_ms"])]
    starts += [end for end in _probe_replacements(scope) if end > starts[0]]
    fits: list[dict[str, Any]] = []
    for k, start in enumerate(starts):
        if k:
            state["probe_replaced_ms"] = start
        made = kept if k == 0 and kept is not None else _made_baseline(scope, start)
        if made is None:
            break
        if "r_cold" in made:
            fits.append({**made, "until_ms": starts[k + 1]} if k + 1 < len(starts) else made)
    return fits


def _probe_replacements(scope: DeviceScope) -> list[int]:
    # Ends of the maintenance windows up to the newest reading that replaced a probe the fit
    # reads [ms], oldest first.
    newest_ms = int(scope.t_all[-1])
    return [
        end
        for end, parts in records.replacements(scope.conn, scope.dev.device_id)
        if end <= newest_ms and set(parts) & set(REFIT_AFTER)
    ]


def _made_baseline(scope: DeviceScope, first_ms: int) -> dict[str, Any] | None:
    # The fit over the ``drift_baseline_s`` from ``first_ms`` [ms], kept in the state once
    # that time has passed (without ``r_cold`` where it could not be made); None till then.
    conn, dev, state, policy = scope.conn, scope.dev, scope.state, scope.policy
    if not dev.module:
        return None
    end_ms = int(first_ms) + int(policy.drift_baseline_s * 1000)
    if int(scope.t_all[-1]) < end_ms:
        return None  # not enough history yet
    consts = _module_constants(dev.module)
    if consts is None:
        state["probe_baseline"] = {"from_ms": int(first_ms), "to_ms": end_ms}
        return dict(state["probe_baseline"])
    base = load_readings(conn, dev.device_id, int(first_ms) - 1, end_ms)
    needed = running_samples_needed(
        policy.drift_baseline_min_samples,
        1000.0 * usual_interval(base["ts_ms"].to_numpy(np.float64) / 1000.0),
        policy.drift_min_samples_floor,
    )
    t_cold, qc, running = cold_side(base, *consts, policy.drift_min_current_a)
    fit = fit_cold_side_baseline(
        base["t_cabinet"].to_numpy(np.float64), t_cold, qc, running, int(needed)
    )
    if fit is None:
        state["probe_baseline"] = {"from_ms": int(first_ms), "to_ms": end_ms}
        return dict(state["probe_baseline"])
    across = (base["t_hot"].to_numpy(np.float64) - t_cold)[running]
    state["probe_baseline"] = {
        "from_ms": int(first_ms), "to_ms": end_ms, "offset_k": fit[0], "r_cold": fit[1],
        "seebeck": consts[0], "conductance": consts[1],
        "dt_max_k": float(np.nanmax(across)) if np.isfinite(across).any() else None,
    }  # fmt: skip
    return dict(state["probe_baseline"])


def probe_offsets(
    frame: pd.DataFrame, baseline: Mapping[str, Any], policy: AlertPolicy, interval: FloatArray
) -> FloatArray:
    """Per row of ``frame``, the cabinet probe's change against its commissioning heat
    balance [K]; NaN before the commissioning window ended. ``interval`` is the usual
    interval per row [ms] (``usual_interval_ms``), which sets the running samples a figure
    needs (:func:`running_samples_needed`). Samples whose hot-to-cold difference exceeds the
    commissioning's largest by ``drift_dt_margin_k`` [K] are not judged: the balance from
    the module's ratings holds where it was fitted, and a failed fan or a pull-down after a
    power cut drives the module far beyond it."""
    t = frame["ts_ms"].to_numpy(np.int64)
    t_cold, qc, running = cold_side(
        frame, float(baseline["seebeck"]), float(baseline["conductance"]),
        policy.drift_min_current_a,
    )  # fmt: skip
    if baseline.get("dt_max_k") is not None:
        across = frame["t_hot"].to_numpy(np.float64) - t_cold
        with np.errstate(invalid="ignore"):
            running &= ~(across > float(baseline["dt_max_k"]) + policy.drift_dt_margin_k)
    off = cabinet_probe_offset(
        t, frame["t_cabinet"].to_numpy(np.float64), t_cold, qc,
        running, (float(baseline["offset_k"]), float(baseline["r_cold"])),
        policy.drift_window_s,
        running_samples_needed(policy.drift_min_samples, interval, policy.drift_min_samples_floor),
    )  # fmt: skip
    off[t < int(baseline["to_ms"])] = np.nan
    if baseline.get("until_ms") is not None:
        off[t >= int(baseline["until_ms"])] = np.nan  # a replaced probe's fit
    return off


def drift_since(
    t_new: IntArray, offset_new: FloatArray, state: dict[str, Any], quarter_k: float
) -> IntArray:
    """Start [ms] of the run of rows whose probe change is at least ``quarter_k`` [K] that
    each row belongs to (0 outside one); rows without an estimate (NaN) neither start nor
    end a run. The run open at the end is kept in ``state``."""
    if offset_new.size == 0:
        return np.zeros(0, np.int64)
    carried = state.get("probe_drift_since")
    known = np.isfinite(offset_new)
    with np.errstate(invalid="ignore"):
        det = np.where(known, (np.abs(offset_new) >= quarter_k).astype(np.int64), -1)
    pos = np.maximum.accumulate(np.where(known, np.arange(det.size), -1))
    q = np.where(pos >= 0, det[np.maximum(pos, 0)] == 1, carried is not None)
    prev = np.concatenate([[False], q[:-1]])
    starts = np.where(q & ~prev, t_new, 0).astype(np.int64)
    if q[0] and carried is not None:
        starts[0] = int(carried)
    run = np.maximum.accumulate(starts)
    run = np.where(q, run, 0)
    state["probe_drift_since"] = int(run[-1]) if q[-1] else None
    return run
