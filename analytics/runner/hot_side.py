"""The hourly hot-side resistance, from the newest fitted parameters, and its tracking."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics._validate import T_25C_K
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.data import Readings, faces_basis, fill_cold_face, flags_of
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import AnalysisSettings, diagnostics_options
from tecfleet.analytics.runner.state import DeviceState
from tecfleet.analytics.runner.tracks import faces_judged, faces_r25, track

__all__ = ["hot_side", "hourly", "stretch_steps"]

IntArray = np.ndarray[Any, np.dtype[np.int64]]


def hot_side(
    data: Readings, first: int, last: int, state: DeviceState, cfg: AnalysisSettings
) -> dict[int, dg.Estimate | None]:
    """Hot-side resistance of the hourly steps ending at ``first`` .. ``last`` (inclusive).

    Each hour's stretch is the hour itself, or at slow reporting the ``hot_side_intervals``
    usual intervals before its end, in whole hours (overlapping stretches)."""
    step = cfg.step_s * 1000
    ends = range(first, last + 1, step)
    params = state.params
    if params is None or params.c_hot is None:
        return dict.fromkeys(ends)
    interval = dg.usual_interval(data.t[data.slice(first - 2 * step, last)])
    span = stretch_steps(interval, cfg, data.summarised)
    w = data.slice(first - span * step, last)
    pooled = faces_r25(state, last, cfg)
    fill_cold_face(data, w, params.r25 if pooled is None else pooled[0], params.s25, cfg)
    ts = data.ts[w]
    tm = 0.5 * (data.tc[w] + data.th[w])
    s = params.s25 * (1.0 + cfg.beta * (tm - T_25C_K))
    r = params.r25 * (1.0 + cfg.alpha * (tm - T_25C_K))
    # Samples whose faces are known: every usable one with both probes, else those the
    # module's voltage gave.
    usable = flags_of(data, w).usable & np.isfinite(tm)
    opts = diagnostics_options(cfg)
    if interval > 0.0:
        per_span = span * cfg.step_s / interval
        opts = dataclasses.replace(
            opts,
            hot_side_min_heat_j=opts.hot_side_min_heat_j * span,
            hot_side_min_pairs=min(
                opts.hot_side_min_pairs, round(cfg.hot_side_min_pair_share * per_span)
            ),
        )
    # Stretch j holds the samples of the ``span`` hours up to the j-th end.
    bounds = np.searchsorted(ts, [first - span * step + j * step for j in range(len(ends) + span)])
    counts = [int(bounds[j + span] - bounds[j]) for j in range(len(ends))]
    k = state.k_trend if state.k_trend is not None else params.k
    c_hot, followed = params.c_hot, _faces_followed(state)
    t, th, ta, tc, i = data.t[w], data.th[w], data.ta[w], data.tc[w], data.i[w]
    means = None if data.means is None else data.means.part(w)

    def ratios(sl: slice, block: IntArray, n: int) -> list[dg.Estimate | PhysicsError]:
        return list(
            dg.hot_side_resistance_ratios(
                t[sl], th[sl], ta[sl], tc[sl], i[sl], s[sl], r[sl], k, usable[sl], block, n,
                c_hot=c_hot, faces_followed=followed, options=opts,
                means=None if means is None else means.part(sl),
            )
        )  # fmt: skip

    if span == 1:
        ests = ratios(slice(None), (ts - (first - step)) // step, len(ends))
    else:
        ests = []
        for j in range(len(ends)):
            sl = slice(int(bounds[j]), int(bounds[j + span]))
            ests += ratios(sl, np.zeros(sl.stop - sl.start, dtype=np.int64), 1)
    every = dg.interval_basis(interval, data.summarised)
    basis = f"hot-sink heat balance: ambient probe, {faces_basis(data.probed)}, {every}"
    if span > 1:
        basis += f" over {span} h"
    return {
        b: dataclasses.replace(est, basis=basis)
        if isinstance(est, dg.Estimate) and n >= opts.hot_side_min_pairs
        else None
        for b, est, n in zip(ends, ests, counts, strict=True)
    }


def stretch_steps(interval_s: float, cfg: AnalysisSettings, summarised: bool = False) -> int:
    """Hourly steps in a stretch of the hot side's resistance at a usual reporting interval
    of ``interval_s`` [s]: one up to ``hot_side_intervals`` intervals an hour, and one where
    the readings carry interval summaries (whose integrals are exact at any interval)."""
    if summarised:
        return 1
    return max(1, math.ceil(cfg.hot_side_intervals * interval_s / cfg.step_s - 1e-9))


def _faces_followed(state: DeviceState) -> bool:
    # Whether the samples follow the sinks, as the last thermal fit found (yes till one did).
    p = state.params
    return True if p is None or p.faces_followed is None else p.faces_followed


def hourly(
    b: int,
    est: dg.Estimate | None,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
    probed: tuple[bool, bool] = (True, True),
) -> None:
    """Store the hour's hot-side resistance ending at ``b`` and follow its changes, where
    the unit's face probes (cold, hot) allow (see :func:`tracks.faces_judged`)."""
    if est is None:
        return
    rows.est("hot_side.resistance_k_per_w", b, est)
    p = state.params
    follow, held = faces_judged(probed, p is not None and bool(p.faces_trusted))
    if not follow:
        return
    rows.basis = est.basis
    try:
        _follow(b, est, rows, state, cfg, held)
    finally:
        rows.basis = None


def _follow(
    b: int,
    est: dg.Estimate,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
    held: str | None,
) -> None:
    # Where the sinks store heat faster than the samples follow, the hour's figure carries a
    # steady bias (see diagnostics.hot_side_resistance_ratios): not reliable, but precise
    # hours are still followed, since a steady bias cancels in the change. One hour there
    # can still read +50 % when the cycle drifts into step with the sampling (simulated
    # units: single hours up to +51 %, never two in a row), so the flag waits for a second,
    # unless the hour reads twice the threshold (a failed fan's 3x does).
    slow = not _faces_followed(state)
    followed = est.reliable or (slow and est.stderr is not None and est.stderr < 0.2 * est.value)
    if not followed or state.k_trend is None:
        return
    track(
        rows, state, "rhot", "hot_side.resistance", b, est.value, cfg.r_hot_flag_pct, 0.03, cfg,
        persist=2 if slow else 1, at_once_pct=2.0 * cfg.r_hot_flag_pct if slow else None,
        held=held,
    )  # fmt: skip
