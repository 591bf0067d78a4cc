"""Stage 1 of the thermal fit: the cold and hot sink balances, which share the module's K.

Over segments of ``segment_s``, with Pc = S·I·Tc - ½·I²·R and Ph = S·I·Th + ½·I²·R
(Goldsmid 2010, ch. 2) and the lumped sink balances (Incropera et al. 2007, ch. 5)::

    ∫Pc = g_c·∫(Tcab - Tc) + K·∫ΔT - Cc·δTc + a_c·τ   (cold sink)
    ∫Ph = g_h·∫(Th - Ta)   + K·∫ΔT + Ch·δTh + a_h·τ   (hot sink)

solved together by weighted least squares with a prior on K. a_c and a_h are the constant
heat flows that constant probe offsets make in each balance (g·δ + K·δΔT), with priors of
zero ± ``probe_offset_k`` times the path's conductance; the storage terms carry no offset,
so the switching transients tell them from K. Two operating points (on/off, or two currents)
make K identifiable; at one, it leans on the prior (and the offsets are left out).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import FloatArray
from ..errors import EstimationError, InsufficientDataError
from .estimates import BoolArray
from .integrals import SampleGrid, Segments
from .least_squares import robust_weighted
from .options import DiagnosticsOptions
from .probe_offsets import balance_offset_sds

__all__ = ["SinkFit", "fit_sinks", "sink_taus", "slowest_sink"]

#: Columns of the sink unknowns: k, c_cold, g_cold, g_hot, c_hot (then a_c, a_h).
SINK_PARAMS = ("k", "c_cold", "g_cold", "g_hot", "c_hot")
#: Columns that must come out positive: K and the two conductances.
_POSITIVE = (0, 2, 3)


@dataclass(frozen=True)
class SinkFit:
    """The sink balances' solution and what decided how K was found.

    Attributes
    ----------
    params : (K [W/K], c_cold [J/K], g_cold [W/K], g_hot [W/K], c_hot [J/K], a_c, a_h [W]).
    cov : Their covariance.
    resp : Their first-order response to a unit relative error of S, then of R.
    forced : K was held at its prior or the unit's settled value [-].
    k_sd_scatter : K's standard error from the fit without offset terms [W/K].
    rests : The module rested for at least ``min_rest_share`` of the usable samples [-].
    one_point : A single operating point: K held [-].
    slow_faces : The sinks store heat over a good part of a sampling interval while the
        module switches often: K held at its prior [-].
    tau_slow : The slow sink's time constant behind ``slow_faces`` [s].
    h_typ : Median sampling interval [s].
    taus_own : This window's sink time constants and their errors, or None [s].
    segments : The sink segments used.
    """

    params: FloatArray
    cov: FloatArray
    resp: FloatArray
    forced: bool
    k_sd_scatter: float
    rests: bool
    one_point: bool
    slow_faces: bool
    tau_slow: float | None
    h_typ: float
    taus_own: tuple[float, float, float, float] | None
    segments: Segments


def sink_taus(p1: FloatArray, cov1: FloatArray) -> tuple[float, float, float, float]:
    """(τ_cold, its error, τ_hot, its error) [s] from the sink fit's (K, c_cold, g_cold,
    g_hot, c_hot): τ = c/g, its error that of c over g (g is far better determined). A sink
    whose conductance did not come out positive tells nothing: 0 with an error of 1e9 s."""
    out: list[float] = []
    for jc, jg in ((1, 2), (4, 3)):
        g = float(p1[jg])
        sd_c = math.sqrt(max(float(cov1[jc, jc]), 0.0))
        out += [float(p1[jc]) / g, sd_c / g] if g > 0.0 else [0.0, 1e9]
    return out[0], out[1], out[2], out[3]


def slowest_sink(
    taus: tuple[float, float, float, float], limit: float, sigmas: float
) -> float | None:
    """The larger time constant [s] of the sinks whose own is beyond ``limit`` [s] and stands
    ``sigmas`` standard errors clear of zero; None where neither is."""
    slow = [tau for tau, sd in (taus[:2], taus[2:]) if tau > limit and tau > sigmas * sd]
    return max(slow) if slow else None


def _one_operating_point(
    grid: SampleGrid,
    segs: Segments,
    i: FloatArray,
    off_share: FloatArray,
    usable: BoolArray,
    options: DiagnosticsOptions,
) -> tuple[bool, bool]:
    # (rests, one_point). K separates from the sinks only between distinct operating points.
    # A module that never rests and whose current hardly moves offers none: what the fit
    # would find then is the probes' resolution and offsets, so K is held at its prior.
    seg_i = segs.sums(grid.trap(i)) / np.maximum(segs.sums(grid.h), 1e-9)
    rests = float(np.mean(off_share[usable])) >= options.min_rest_share if usable.any() else True
    i_mid = float(np.median(seg_i))
    one_point = not rests and float(np.ptp(seg_i)) < options.min_current_spread * max(i_mid, 1e-9)
    return rests, one_point


def _faces(
    grid: SampleGrid,
    p1: FloatArray,
    cov1: FloatArray,
    on: BoolArray,
    usable: BoolArray,
    switching_ok: bool,
    sink_taus_settled: tuple[float, float, float, float] | None,
    options: DiagnosticsOptions,
) -> tuple[tuple[float, float, float, float] | None, float | None, bool, float]:
    # (taus_own, tau_slow, slow_faces, h_typ). Only a module that switches often (a
    # thermostat's cycle of minutes) puts K's weight on the transients after each switch;
    # where it seldom does, the sinks' heat capacities are hardly determined, and trade off
    # with what else the balances leave out.
    t, h = grid.t, grid.h
    h_typ = float(np.median(h)) if h.size else 0.0
    n_switch = int(np.count_nonzero(on[1:][usable[1:]] != on[:-1][usable[1:]]))
    switching = switching_ok and n_switch >= options.min_switches_per_h * (t[-1] - t[0]) / 3600
    taus_own = sink_taus(p1, cov1) if switching else None
    taus = taus_own if sink_taus_settled is None else sink_taus_settled
    tau_slow = (
        slowest_sink(taus, options.max_sink_tau_share * h_typ, options.sink_c_sigmas)
        if switching and taus is not None
        else None
    )
    # ...and the bias builds up with the share of the time the faces spend within a time
    # constant of a switch.
    span = float(t[-1] - t[0]) if t.size > 1 else 0.0
    slow_faces = tau_slow is not None and n_switch * tau_slow > options.max_transient_share * span
    return taus_own, tau_slow, slow_faces, h_typ


def _balances(
    grid: SampleGrid,
    segs: Segments,
    heat: tuple[FloatArray, FloatArray, FloatArray],
    temps: tuple[FloatArray, FloatArray, FloatArray, FloatArray],
) -> list[tuple[FloatArray, FloatArray]]:
    # The two balances' designs (columns k, c_cold, g_cold, g_hot, c_hot) and left-hand
    # sides ∫Pc, ∫Ph per segment.
    pc, ph, dtv = heat
    tcab, tc, th, ta = temps
    sums, trap = segs.sums, grid.trap
    i_pc, i_ph, i_dt = sums(trap(pc)), sums(trap(ph)), sums(trap(dtv))
    i_cold, i_hot = sums(trap(tcab - tc)), sums(trap(th - ta))
    d_c, d_h = sums(np.diff(tc)), sums(np.diff(th))
    z = np.zeros_like(i_pc)
    x_cold = np.column_stack([i_dt, -d_c, i_cold, z, z])
    x_hot = np.column_stack([i_dt, z, z, i_hot, d_h])
    return [(x_cold, i_pc), (x_hot, i_ph)]


def fit_sinks(
    grid: SampleGrid,
    pair: BoolArray,
    heat: tuple[FloatArray, FloatArray, FloatArray],
    temps: tuple[FloatArray, FloatArray, FloatArray, FloatArray],
    i: FloatArray,
    s: FloatArray,
    r: FloatArray,
    usable: BoolArray,
    k_prior: float,
    k_prior_rel: float,
    k_settled: float | None,
    sink_taus_settled: tuple[float, float, float, float] | None,
    options: DiagnosticsOptions,
    offset_cov: FloatArray | None = None,
    off_share: FloatArray | None = None,
) -> SinkFit:
    """Solve the cold and hot sink balances together for K and the sinks (module docstring).

    Parameters
    ----------
    grid : Sample times and intervals.
    pair : Sample pairs that may be integrated across [-].
    heat : (Pc [W], Ph [W], ΔT [K]) per sample.
    temps : (Tcab, Tc, Th, Ta) per sample [K].
    i : Module current [A].
    s, r : Module S [V/K] and R [ohm] at each sample's mean temperature.
    usable : Samples that may be used [-].
    k_prior, k_prior_rel : Prior K [W/K] and its relative standard deviation [-].
    k_settled : The unit's settled K, where K is held at a single operating point [W/K].
    sink_taus_settled : The unit's settled sink time constants and errors [s].
    options : The sink fields of :class:`.DiagnosticsOptions`.
    offset_cov : Covariance of the probes' offsets left after the temperatures were corrected
        by their estimate (cabinet, cold, hot, relative to the ambient probe), which sets the
        offset terms' priors (:func:`.probe_offsets.balance_offset_sds`); None: each path's
        difference ± ``probe_offset_k`` [K²].
    off_share : Share of each sample's interval with the module off, where the readings say
        (interval summaries); None: off where the current is at most ``on_current`` [-].

    Returns
    -------
    The fit, with K held where the readings cannot separate it.

    Raises
    ------
    InsufficientDataError : too few complete segments.
    EstimationError : K or a sink conductance not positive.
    """
    tc, th = temps[1], temps[2]
    segment_s, min_segments = options.segment_s, options.min_segments
    segs = grid.segments(segment_s, pair)
    if segs.n_good < min_segments:
        raise InsufficientDataError(
            f"{segs.n_good} usable {segment_s / 60:.0f}-minute segments, need {min_segments}",
            "too few complete stretches of readings (door openings, gaps or faults)",
        )
    sums, trap = segs.sums, grid.trap
    blocks = _balances(grid, segs, heat, temps)
    z = np.zeros_like(blocks[0][1])
    on = i > options.on_current
    off = (~on).astype(np.float64) if off_share is None else off_share
    rests, one_point = _one_operating_point(grid, segs, i, off, usable, options)
    k0 = k_settled if one_point and k_settled is not None else k_prior
    p1, cov1, forced, _ = robust_weighted(
        blocks, 0, k0, k_prior_rel * k_prior, _POSITIVE, hold=one_point
    )
    k_sd = float(np.sqrt(max(cov1[0, 0], 0.0)))  # from the readings' scatter alone
    # Constant probe offsets shift the small sink differences (a few kelvin at rest) and
    # through them K. Each balance gets a constant heat flow for them, g·δ + K·δΔT, with a
    # prior of zero ± ``probe_offset_k`` times that path's conductance (or what the offsets'
    # estimate leaves, ``offset_cov``); the switching transients, whose storage terms carry
    # no offset, separate it from K. K's spread beyond its scatter-only one is then what the
    # offsets leave unresolved.
    # At a single operating point they cannot be told from the sinks' conductances: left out.
    dur = sums(grid.h)
    k1, g_c1, g_h1 = float(p1[0]), float(p1[2]), float(p1[3])
    sd_ac, sd_ah = (
        (
            options.probe_offset_k * math.hypot(g_c1, k1),
            options.probe_offset_k * math.hypot(g_h1, k1),
        )
        if offset_cov is None
        else balance_offset_sds(offset_cov, k1, g_c1, g_h1)
    )
    offsets = {} if one_point else {5: (0.0, sd_ac), 6: (0.0, sd_ah)}  # a_c, a_h
    offset_cols = [(dur, z), (z, dur)] if offsets else [(), ()]
    # Relative errors of S and R move both balances' heat flows: S·I·T in each, ∓½·I²·R.
    s_it_c, s_it_h, joule = (
        sums(trap(s * i * tc)),
        sums(trap(s * i * th)),
        sums(trap(0.5 * i * i * r)),
    )

    def solve(k_at: float, hold: bool) -> tuple[FloatArray, FloatArray, bool, FloatArray]:
        return robust_weighted(
            [(np.column_stack([x, *c]), y) for (x, y), c in zip(blocks, offset_cols, strict=True)],
            0, k_at, k_prior_rel * k_prior, _POSITIVE, hold=hold, others=offsets,
            shifts=np.array([np.concatenate([s_it_c, s_it_h]), np.concatenate([-joule, joule])]),
        )  # fmt: skip

    p1, cov1, forced, resp = solve(k0, one_point or forced)
    taus_own, tau_slow, slow_faces, h_typ = _faces(
        grid, p1, cov1, on, usable, rests and not one_point, sink_taus_settled, options
    )
    if slow_faces and not forced:
        # Held at the prior: a settled K would come from windows whose faces seemed followed.
        p1, cov1, forced, resp = solve(k_prior, True)
    k, _c_cold, g_cold, g_hot = (float(v) for v in p1[:4])
    if k <= 0.0 or g_cold <= 0.0 or g_hot <= 0.0:
        raise EstimationError(
            f"non-physical sink fit: K={k:.3g} W/K, 1/r_cold={g_cold:.3g} W/K, "
            f"1/r_hot={g_hot:.3g} W/K"
        )
    return SinkFit(
        p1, cov1, resp, forced, k_sd, rests, one_point, slow_faces, tau_slow, h_typ, taus_own,
        segs,
    )  # fmt: skip
