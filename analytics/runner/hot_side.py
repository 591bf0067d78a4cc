"""The hourly hot-side resistance, from the newest fitted parameters, and its tracking."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_25C_K
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.data import Readings, faces_basis, fill_cold_face, flags_of
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import AnalysisSettings, diagnostics_options
from tecfleet.analytics.runner.state import DeviceState, ModuleParams
from tecfleet.analytics.runner.tracks import faces_judged, faces_r25, track

__all__ = [
    "CABINET_BASIS",
    "CABINET_NOTE",
    "cold_face_at_cabinet",
    "hot_side",
    "hourly",
    "stretch_steps",
]

#: The faces' basis of a hot-side figure whose cold face is taken at the cabinet probe.
CABINET_BASIS = "hot-face probe, cold face taken at the cabinet probe"
#: Why such a figure is not served as reliable.
CABINET_NOTE = (
    "cold face taken at the cabinet probe (no cold-face probe, and the module's voltage does "
    "not give it here): the hour's figure is a few per cent off, steadily; its changes are "
    "followed"
)

IntArray = np.ndarray[Any, np.dtype[np.int64]]


def hot_side(
    data: Readings,
    first: int,
    last: int,
    state: DeviceState,
    cfg: AnalysisSettings,
    prior: physics.ModuleParameters | None = None,
) -> dict[int, dg.Estimate | None]:
    """Hot-side resistance of the hourly steps ending at ``first`` .. ``last`` (inclusive).

    Each hour's stretch is the hour itself, or at slow reporting the ``hot_side_intervals``
    usual intervals before its end, in whole hours (overlapping stretches). Where the cold
    face is taken at the cabinet probe (:func:`cold_face_at_cabinet`), the module's rated
    figures (``prior``) serve where known."""
    step = cfg.step_s * 1000
    ends = range(first, last + 1, step)
    params = state.params
    at_cabinet = cold_face_at_cabinet(data.probed, params)
    module = _module_figures(params, prior, at_cabinet)
    if module is None:
        return dict.fromkeys(ends)
    s25, r25, k, c_hot = module
    interval = dg.usual_interval(data.t[data.slice(first - 2 * step, last)])
    span = stretch_steps(interval, cfg, data.summarised)
    w = data.slice(first - span * step, last)
    if at_cabinet:
        tc_w = data.tcab[w]
    else:
        assert params is not None
        pooled = faces_r25(state, last, cfg)
        fill_cold_face(data, w, params.r25 if pooled is None else pooled[0], params.s25, cfg)
        tc_w = data.tc[w]
    ts = data.ts[w]
    tm = 0.5 * (tc_w + data.th[w])
    s = s25 * (1.0 + cfg.beta * (tm - T_25C_K))
    r = r25 * (1.0 + cfg.alpha * (tm - T_25C_K))
    # Samples whose faces are known: every usable one with both probes, else those the
    # module's voltage gave. An open door and its settling count: the air it lets in is a
    # load on the cabinet, not on the hot sink, whose balance Qh from the faces describes
    # whatever the cabinet does (at 5-minute readings its quarter hour cost a busy hour a
    # third of its samples, and a failed fan's first hours their figure).
    flags = flags_of(data, w)
    usable = (flags.usable | flags.door) & np.isfinite(tm)
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
    if not at_cabinet and state.k_trend is not None:
        k = state.k_trend
    followed = _faces_followed(state)
    t, th, ta, tc, i = data.t[w], data.th[w], data.ta[w], tc_w, data.i[w]
    means = None if data.means is None else data.means.part(w)
    if means is not None and at_cabinet:
        means = dataclasses.replace(means, t_cold=means.t_cabinet)

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
    faces = CABINET_BASIS if at_cabinet else faces_basis(data.probed)
    basis = f"hot-sink heat balance: ambient probe, {faces}, {every}"
    if span > 1:
        basis += f" over {span} h"
    note = CABINET_NOTE if at_cabinet else None
    return {
        b: dataclasses.replace(
            est, basis=basis, reliable=est.reliable and note is None, note=est.note or note
        )
        if isinstance(est, dg.Estimate) and n >= opts.hot_side_min_pairs
        else None
        for b, est, n in zip(ends, ests, counts, strict=True)
    }


def cold_face_at_cabinet(probed: tuple[bool, bool], params: ModuleParams | None) -> bool:
    """Whether the hot side's balance takes the cold face at the cabinet probe: on a unit
    with a hot-face probe and none on the cold face whose faces read from the voltage are
    not trusted (``ModuleParams.faces_trusted``; a zero-volt driver gives no open-circuit
    voltage, a module that never rests no anchor).

    The cold face enters Qh = S·I·Th + ½·I²·R - K·ΔT (Goldsmid 2010, ch. 2) only through
    K·ΔT. Read from the voltage, ΔT = (V - I·R)/S moves by I·R/S per unit error of R: at
    3 A through 4 ohm and 0.1 V/K, 1.2 K per 1 %, and such a unit's window R25 wanders by
    ±15 %. Taken at the cabinet, ΔT reads short by the cold sink's rise, a few kelvin that
    move slowly with the heat pumped: a steady bias of a few per cent, which cancels in the
    changes the fan's flag follows."""
    if probed != (False, True):
        return False
    return params is None or not params.faces_trusted


def _module_figures(
    params: ModuleParams | None, prior: physics.ModuleParameters | None, at_cabinet: bool
) -> tuple[float, float, float, float] | None:
    # S25 [V/K], R25 [ohm], K [W/K] and the hot sink's heat capacity [J/K] for the balance;
    # None where there are none. On the cabinet basis the rated figures come first: the
    # window's own wander there, and a steady error of them cancels in the changes.
    if at_cabinet and prior is not None:
        c_hot = params.c_hot if params is not None and params.c_hot is not None else 0.0
        return prior.seebeck, prior.resistance, prior.conductance, c_hot
    if params is None or (params.c_hot is None and not at_cabinet):
        return None
    return params.s25, params.r25, params.k, params.c_hot or 0.0


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
    the unit's face probes (cold, hot) allow (see :func:`tracks.faces_judged`); always
    where the cold face is taken at the cabinet probe (:func:`cold_face_at_cabinet`)."""
    if est is None:
        return
    rows.est("hot_side.resistance_k_per_w", b, est)
    p = state.params
    at_cabinet = cold_face_at_cabinet(probed, p)
    follow, held = (
        (True, None)
        if at_cabinet
        else faces_judged(probed, p is not None and bool(p.faces_trusted))
    )
    if not follow:
        return
    rows.basis = est.basis
    try:
        _follow(b, est, rows, state, cfg, held, at_cabinet)
    finally:
        rows.basis = None


def _follow(
    b: int,
    est: dg.Estimate,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
    held: str | None,
    at_cabinet: bool = False,
) -> None:
    # Where the sinks store heat faster than the samples follow, the hour's figure carries a
    # steady bias (see diagnostics.hot_side_resistance_ratios): not reliable, but precise
    # hours are still followed, since a steady bias cancels in the change. One hour there
    # can still read +50 % when the cycle drifts into step with the sampling (simulated
    # units: single hours up to +51 %, never two in a row), so the flag waits for a second,
    # unless the hour reads twice the threshold (a failed fan's 3x does). So too with the
    # cold face taken at the cabinet probe, whose bias moves with the heat pumped.
    slow = not _faces_followed(state) or at_cabinet
    followed = est.reliable or (slow and est.stderr is not None and est.stderr < 0.2 * est.value)
    # The trend K keeps the balance's K fixed along the track; the cabinet basis takes the
    # rated K throughout.
    if not followed or (state.k_trend is None and not at_cabinet):
        return
    track(
        rows, state, "rhot", "hot_side.resistance", b, est.value, cfg.r_hot_flag_pct, 0.03, cfg,
        persist=2 if slow else 1, at_once_pct=2.0 * cfg.r_hot_flag_pct if slow else None,
        held=held,
    )  # fmt: skip
