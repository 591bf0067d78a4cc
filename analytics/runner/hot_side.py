"""The hourly hot-side resistance, from the newest fitted parameters, and its tracking."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from tecfleet.analytics import diagnostics as dg
from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_25C_K, FloatArray
from tecfleet.analytics.errors import PhysicsError
from tecfleet.analytics.runner.data import Readings, faces_basis, fill_cold_face, flags_of
from tecfleet.analytics.runner.rows import EstimateRows
from tecfleet.analytics.runner.settings import AnalysisSettings, diagnostics_options
from tecfleet.analytics.runner.state import DeviceState, ModuleParams
from tecfleet.analytics.runner.tracks import faces_judged, faces_r25, track

__all__ = [
    "CABINET_BASIS",
    "CABINET_NOTE",
    "VOLTAGE_BASIS",
    "VOLTAGE_NOTE",
    "cold_face_at_cabinet",
    "faces_source",
    "follow_source",
    "hot_side",
    "hourly",
    "stretch_steps",
]

#: Where the hot side's balance takes its faces from (:func:`faces_source`): the probes
#: (with a cold face read from the voltage where only the hot one is probed), the hot probe
#: with the cold face at the cabinet probe, or both faces from the module's voltage.
PROBES, CABINET, VOLTAGE = "probes", "cabinet", "voltage"
#: The faces' basis of a hot-side figure whose cold face is taken at the cabinet probe.
CABINET_BASIS = "hot-face probe, cold face taken at the cabinet probe"
#: Why such a figure is not served as reliable.
CABINET_NOTE = (
    "cold face taken at the cabinet probe (no cold-face probe, and the module's voltage does "
    "not give it here): the hour's figure is a few per cent off, steadily; its changes are "
    "followed"
)
#: The faces' basis of a hot-side figure of a unit with no face probe.
VOLTAGE_BASIS = (
    "no face probes: both faces from the module's voltage, placed by an assumed share of the sinks"
)
#: Why such a figure is not served as reliable.
VOLTAGE_NOTE = (
    "no face probed: the faces are read from the module's voltage and placed between cabinet "
    "and ambient by an assumed ratio of the sinks' resistances, so the hour's figure is off "
    "by a steady factor; its changes are followed"
)

IntArray = np.ndarray[Any, np.dtype[np.int64]]


def hot_side(
    data: Readings,
    first: int,
    last: int,
    state: DeviceState,
    cfg: AnalysisSettings,
    prior: physics.ModuleParameters | None = None,
    source: str | None = None,
) -> dict[int, dg.Estimate | None]:
    """Hot-side resistance of the hourly steps ending at ``first`` .. ``last`` (inclusive).

    Each hour's stretch is the hour itself, or at slow reporting the ``hot_side_intervals``
    usual intervals before its end, in whole hours (overlapping stretches). The faces come
    from ``source``, by default where :func:`faces_source` says; off the probes, the
    module's rated figures (``prior``) serve where known."""
    step = cfg.step_s * 1000
    ends = range(first, last + 1, step)
    source = source or faces_source(data.probed, state.params)
    module = _module_figures(state, prior, source, last, cfg)
    if module is None:
        return dict.fromkeys(ends)
    s25, r25, k, c_hot = module
    interval = dg.usual_interval(data.t[data.slice(first - 2 * step, last)])
    span = stretch_steps(interval, cfg, data.summarised)
    w = data.slice(first - span * step, last)
    th, tc = _faces(data, w, source, state, (s25, r25, k), last, cfg)
    ts = data.ts[w]
    tm = 0.5 * (tc + th)
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
    if source == PROBES and state.k_trend is not None:
        k = state.k_trend
    followed = _faces_followed(state)
    t, ta, i = data.t[w], data.ta[w], data.i[w]
    means = None if data.means is None else data.means.part(w)
    if means is not None and source == CABINET:
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
    faces = {CABINET: CABINET_BASIS, VOLTAGE: VOLTAGE_BASIS}.get(source)
    basis = f"hot-sink heat balance: ambient probe, {faces or faces_basis(data.probed)}, {every}"
    if span > 1:
        basis += f" over {span} h"
    note = {CABINET: CABINET_NOTE, VOLTAGE: VOLTAGE_NOTE}.get(source)
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


def faces_source(probed: tuple[bool, bool], params: ModuleParams | None) -> str:
    """Where the hot side's balance of a unit with these face probes (cold, hot) takes its
    faces: :data:`VOLTAGE` with neither probed (:func:`diagnostics.unanchored_faces`),
    :data:`CABINET` where :func:`cold_face_at_cabinet`, else :data:`PROBES`."""
    if probed == (False, False):
        return VOLTAGE
    return CABINET if cold_face_at_cabinet(probed, params) else PROBES


def _module_figures(
    state: DeviceState,
    prior: physics.ModuleParameters | None,
    source: str,
    last: int,
    cfg: AnalysisSettings,
) -> tuple[float, float, float, float] | None:
    # S25 [V/K], R25 [ohm], K [W/K] and the hot sink's heat capacity [J/K] for the balance;
    # None where there are none. Off the probes the rated figures come first: the window's
    # own wander there, and a steady error of them cancels in the changes. Both faces from
    # the voltage need the R25 of the unit's recent windows (``tracks.faces_r25``), as its
    # windows read them.
    params = state.params
    c_hot = params.c_hot if params is not None and params.c_hot is not None else 0.0
    if source == VOLTAGE:
        pooled = faces_r25(state, last, cfg)
        if prior is None or pooled is None:
            return None
        return prior.seebeck, pooled[0], prior.conductance, c_hot
    if source == CABINET and prior is not None:
        return prior.seebeck, prior.resistance, prior.conductance, c_hot
    if params is None or (params.c_hot is None and source != CABINET):
        return None
    return params.s25, params.r25, params.k, c_hot


def _faces(
    data: Readings,
    w: slice,
    source: str,
    state: DeviceState,
    module: tuple[float, float, float],
    last: int,
    cfg: AnalysisSettings,
) -> tuple[FloatArray, FloatArray]:
    # (Th, Tc) of the readings in ``w`` [K], from ``source``, with the module's (S25, R25, K).
    if source == CABINET:
        return data.th[w], data.tcab[w]
    if source == VOLTAGE:
        s25, r25, k = module
        return dg.unanchored_faces(
            data.i[w], data.v[w], data.tcab[w], data.ta[w], r25=r25, s25=s25, k=k,
            alpha=cfg.alpha, beta=cfg.beta, options=diagnostics_options(cfg),
        )  # fmt: skip
    params = state.params
    assert params is not None
    pooled = faces_r25(state, last, cfg)
    fill_cold_face(data, w, params.r25 if pooled is None else pooled[0], params.s25, cfg)
    return data.th[w], data.tc[w]


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
    followed: dg.Estimate | None = None,
) -> None:
    """Store the hour's hot-side resistance ending at ``b`` and follow its changes, where
    the unit's face probes (cold, hot) allow (see :func:`tracks.faces_judged`).

    A unit with a hot-face probe and none on the cold face follows the hour read with the
    cold face at the cabinet probe (``followed``, from :func:`follow_source`), whatever its
    served hour rests on: the figures with the cold face from the voltage and at the
    cabinet differ by a steady part (simulated units: 25 %), and one track must not mix
    them."""
    if est is not None:
        rows.est("hot_side.resistance_k_per_w", b, est)
    source = follow_source(probed, state.params)
    if source == CABINET:
        follow, held, est = True, None, followed
    else:
        p = state.params
        follow, held = faces_judged(probed, p is not None and bool(p.faces_trusted))
    if not follow or est is None:
        return
    rows.basis = est.basis
    try:
        _follow(b, est, rows, state, cfg, held, source)
    finally:
        rows.basis = None


def follow_source(probed: tuple[bool, bool], params: ModuleParams | None) -> str:
    """Where the followed hours of the hot side take their faces: at the cabinet probe on
    every unit with only the hot face probed, else as :func:`faces_source`."""
    return CABINET if probed == (False, True) else faces_source(probed, params)


def _follow(
    b: int,
    est: dg.Estimate,
    rows: EstimateRows,
    state: DeviceState,
    cfg: AnalysisSettings,
    held: str | None,
    source: str = PROBES,
) -> None:
    # Where the sinks store heat faster than the samples follow, the hour's figure carries a
    # steady bias (see diagnostics.hot_side_resistance_ratios): not reliable, but precise
    # hours are still followed, since a steady bias cancels in the change. One hour there
    # can still read +50 % when the cycle drifts into step with the sampling (simulated
    # units: single hours up to +51 %, never two in a row), so the flag waits for a second,
    # unless the hour reads twice the threshold (a failed fan's 3x does). So too with faces
    # off the probes, whose bias moves with the heat pumped. With both faces from the
    # voltage that bias follows the weather for hours together, so only twice the threshold
    # raises the flag: on simulated healthy units over 90-day seasons (sinks of 500/1500 J/K)
    # a hot spell held the hours at +43 to +52 % for half a day, while a failed fan's 3x read
    # +175 to +283 % in its first full hour (development seeds 201-203).
    slow = not _faces_followed(state) or source != PROBES
    persist = 2 if slow else 1
    flag_pct = cfg.r_hot_flag_pct * (2.0 if source == VOLTAGE else 1.0)
    if state.rhot_from != (None if source == PROBES else source):
        state.restart_track("rhot")
        state.rhot_from = None if source == PROBES else source
    followed = est.reliable or (slow and est.stderr is not None and est.stderr < 0.2 * est.value)
    # The trend K keeps the balance's K fixed along the track; off the probes the balance
    # takes the rated K throughout.
    if not followed or (state.k_trend is None and source == PROBES):
        return
    track(
        rows, state, "rhot", "hot_side.resistance", b, est.value, flag_pct, 0.03, cfg,
        persist=persist, at_once_pct=2.0 * cfg.r_hot_flag_pct if slow else None,
        held=held,
    )  # fmt: skip
