"""Stage 2 of the thermal fit: the cabinet balance, for UA, the heat capacity and the
internal load.

Over blocks of ``cabinet_block_s`` with Qc = Pc - K·ΔT (Goldsmid 2010, ch. 2) and the lumped
cabinet balance (Incropera et al. 2007, ch. 5)::

    ∫Qc = UA·∫(Ta - Tcab) + q_int·τ - C·δTcab [- Cn·δTn] [+ Σ a_j·∫exp(-(t - t_j)/τ_j)]

with a prior on q_int, held at that prior when the fit would make the internal load
negative (fans and electronics release heat). Blocks of an hour or more average over the
thermostat cycles, so heat exchanged with slowly following contents mostly cancels; where
the module never rests (or runs flat out through a warm spell) a contents node Tn following
Tcab through a first-order lag joins. Warm goods put in give up their heat as a lumped body
does, a release decaying from its start t_j (:func:`release`); up to two join where the
readings show them. Left out: single blocks the model cannot explain, runs of blocks with
warm goods put in, blocks whose on/off cycle is locked to the sampling, and the hours of a
warm spell with cooling lost and ``recovery_s`` after it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.signal import lfilter

from .._validate import FloatArray
from ..errors import EstimationError, InsufficientDataError
from .estimates import BoolArray
from .integrals import SampleGrid, Segments
from .least_squares import median_mad, prior_rows, robust_sd, robust_weighted, segment_sums
from .options import DiagnosticsOptions

__all__ = [
    "CabinetFit",
    "after_warm_spells",
    "cooling_lost",
    "fit_cabinet",
    "lag_one_autocorrelation",
    "release",
    "strobed_blocks",
    "warm_goods_runs",
]

#: Fewest usable blocks for the cabinet balance [-].
MIN_BLOCKS = 3
#: A run of warm goods starts at a cabinet residual above this many robust scales [-] ...
WARM_GOODS_START = 1.5
#: ... and lasts while it stays above this many [-]. Against simulated fleets with known truth
#: these thresholds, not 2 and 0.5, kept warm goods out of UA's trend over 90-day seasons
#: (units flagged 2 of 36, not 4) and brought 7-day UA within 20 % on 96 % of units, not 94 %.
WARM_GOODS_SETTLE = 0.0
#: Refits leaving out runs of warm goods, at most [-].
WARM_GOODS_PASSES = 3
#: Time constants tried for the heat warm goods give up [s]: contents of 5-40 kJ/K behind
#: 1-4 W/K to the air take 20 minutes to 11 hours (common practice, no source).
RELEASE_TAUS_S = (1800.0, 3600.0, 7200.0, 14_400.0, 28_800.0)
#: Releases of warm goods fitted in one window, at most [-].
RELEASES_MAX = 2
#: Least fall of the Bayesian information criterion for a release to join the balance, its
#: start and time constant counted as parameters beside its size [-]: "very strong" evidence
#: (R. E. Kass and A. E. Raftery, "Bayes factors", J. Am. Stat. Assoc. 90, 1995; from
#: memory). On simulated days of 1-minute readings no release lowered it at all without
#: goods put in; with them, the best lowered it by 8-67 (under 10 only where the day ended
#: before the second load's decay showed).
RELEASE_MIN_BIC_DROP = 10.0


@dataclass(frozen=True)
class CabinetFit:
    """The cabinet balance's solution.

    Attributes
    ----------
    params : (UA [W/K], q_internal [W], C [J/K], Cn [J/K] where the contents node joined).
    cov : Their covariance, grown for the residuals' lag-one autocorrelation.
    resp : Their first-order response to a change of Qc by -∫ΔT (per W/K of K), by S·I·Tc
        and -½·I²·R (per unit relative error of S, of R), and by τ (per W).
    q_own : The internal load fitted with ``q_internal_prior`` alone [W].
    k_cab : The K in the balance [W/K].
    held_cab : That K was held or settled, not this window's fitted one [-].
    """

    params: FloatArray
    cov: FloatArray
    resp: FloatArray
    q_own: float
    k_cab: float
    held_cab: bool


def strobed_blocks(
    on: BoolArray, block: NDArray[np.int64], max_lag: int = 6, min_match: float = 0.95
) -> BoolArray:
    """Blocks whose on/off pattern repeats exactly every few samples while it switches.

    The thermostat cycle is then locked to a multiple of the sampling interval and the samples
    see the same few phases of every cycle, so block means of the cycling heat flows are
    biased (stroboscopic aliasing; C. E. Shannon, Proc. IRE 37, 10, 1949, on sampling).
    Per block: largest fraction of sample pairs ``lag`` apart (2..``max_lag``) that agree,
    against ``min_match`` [-]; ``block`` is the block of each sample pair [-].
    """
    n_blk = int(block.max()) + 1 if block.size else 0
    sw = segment_sums(block, n_blk, (on[1:] != on[:-1]).astype(np.float64))
    best = np.zeros(n_blk)
    if not np.any(sw >= 10.0):
        return np.zeros(n_blk, dtype=bool)
    for lag in range(2, max_lag + 1):
        if on.size <= lag:
            break
        same = (on[lag:] == on[:-lag]).astype(np.float64)
        b = block[lag - 1 :]
        frac = segment_sums(b, n_blk, same) / np.maximum(
            segment_sums(b, n_blk, np.ones_like(same)), 1.0
        )
        best = np.maximum(best, frac)
    # A cycle seen fewer than ~5 times in the block is not enough to call it locked.
    return np.asarray((best >= min_match) & (sw >= 10.0), dtype=bool)


def warm_goods_runs(
    res: FloatArray, start: float = WARM_GOODS_START, settle: float = WARM_GOODS_SETTLE
) -> BoolArray:
    """Blocks in a run of warm goods: from a residual above ``start`` robust scales while it
    stays above ``settle`` [-].

    Warm goods put in release their heat over hours. Only upward runs: nothing inside the
    cabinet takes heat out except the module. The excess is often only two or three scales at
    its peak, split between two blocks when the goods go in mid-hour, and its tail lasts hours
    below one scale, yet summed over those hours it moves UA by tens of per cent; so the run
    starts low and lasts while the excess stays positive. A chance run costs the fit a few
    ordinary hours (common practice, no source; measured thresholds at
    :data:`WARM_GOODS_SETTLE`).
    """
    out = np.zeros(res.size, dtype=bool)
    if res.size == 0:
        return out
    med, mad = median_mad(res)
    sd = 1.4826 * mad
    if not sd > 0.0:
        return out
    z = ((res - med) / sd).tolist()
    running = False
    for j, zj in enumerate(z):
        running = zj > start or (running and zj > settle)
        out[j] = running
    return out


def lag_one_autocorrelation(res: FloatArray, cap: float = 0.9) -> float:
    """Lag-one autocorrelation of residuals in time order, from 0 (none, or negative) to
    ``cap`` [-]."""
    if res.size < 4:
        return 0.0
    r = res - float(np.mean(res))
    den = float(r @ r)
    if not den > 0.0:
        return 0.0
    return min(max(float(r[1:] @ r[:-1]) / den, 0.0), cap)


def _bic_term(n: int, sd: float) -> float:
    # n·ln(σ²) of the information criterion; a perfect fit counts as a very small σ.
    return 2.0 * n * math.log(sd if math.isfinite(sd) and sd > 1e-12 else 1e-12)


def _first_order_lag(t: FloatArray, x: FloatArray, tau: float) -> FloatArray:
    # x through a first-order lag of time constant tau (contents following the air through a
    # conductance), on the median sampling interval, started at x's mean over its first tau.
    h = float(np.median(np.diff(t))) if t.size > 1 else tau
    a = math.exp(-h / tau)
    start = float(np.mean(x[t <= t[0] + tau]))
    out, _ = lfilter([1.0 - a], [1.0, -a], x, zi=[a * start])
    return np.asarray(out, dtype=np.float64)


def after_warm_spells(
    t: FloatArray,
    tcab: FloatArray,
    rise_k: float,
    min_s: float,
    recovery_s: float,
    on: BoolArray,
    saturated_share: float,
) -> tuple[BoolArray, bool]:
    """Samples from the start of a warm spell until ``recovery_s`` [s] after it ends, and
    whether the window held a spell with the cooling at its limit.

    A warm spell is the cabinet air ``tcab`` more than ``rise_k`` [K] above its usual low for
    ``min_s`` [s] or longer: a power cut, cooling that failed. The contents warmed with the
    air and give that heat back for hours, a load the cabinet balance does not describe. A
    spell through which the module was on for at least ``saturated_share`` [-] of the
    samples is the cooling at its limit, not lost: it is not left out (a hot day would
    otherwise leave only a few hours of the window, and a UA fitted to those hours alone came
    out tens of per cent high against simulated fleets with known truth).
    """
    out = np.zeros(t.size, dtype=bool)
    sat = False
    ok = np.isfinite(tcab)
    if ok.sum() < 10:
        return out, sat
    low, usual = np.percentile(tcab[ok], [10, 50])
    warm = ok & (tcab > float(low) + rise_k)
    if not warm.any():
        return out, sat
    # A spell begins where the air last stood at its usual level before it (the first part
    # of the rise already stores heat in the contents).
    settled = np.flatnonzero(ok & (tcab <= float(usual)))
    edges = np.diff(np.concatenate([[0], warm.astype(np.int8), [0]]))
    for a, b in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1), strict=True):
        if t[b - 1] - t[a] >= min_s:
            if float(np.mean(on[a:b])) >= saturated_share:
                sat = True
                continue
            before = settled[settled < a]
            a0 = int(before[-1]) if before.size else 0
            out |= (t >= t[a0]) & (t <= t[b - 1] + recovery_s)
    return out, sat


def cooling_lost(
    t: FloatArray, tcab: FloatArray, on: BoolArray, options: DiagnosticsOptions
) -> BoolArray:
    """Samples of a warm spell with the cooling lost, however short, without recovery
    (:func:`after_warm_spells`): the cabinet air ``tcab`` [K] more than ``warm_spell_k``
    above its usual low while the module (``on``) was not running flat out. A power cut
    stops the fans with the module, so the cold and hot sides' paths there are not the ones
    the balances fit; once the supply is back they are the usual ones again. ``t`` [s]."""
    lost, _ = after_warm_spells(
        t, tcab, options.warm_spell_k, 0.0, 0.0, on, options.saturated_share
    )
    return lost


def _blocks(
    grid: SampleGrid, tcab: FloatArray, on: BoolArray, base: BoolArray, opts: DiagnosticsOptions
) -> tuple[Segments, bool]:
    # The cabinet's blocks: every usable pair counts (switching does not matter for whole-hour
    # sums), except in blocks where the on/off cycle is commensurate with the sampling and in
    # the aftermath of a warm spell with cooling lost. Also: whether a warm spell at the
    # cooling's limit was seen.
    t = grid.t
    blk = np.floor((t[:-1] - t[0]) / opts.cabinet_block_s).astype(np.int64)
    strobed = strobed_blocks(on, blk)
    recovering, saturated = after_warm_spells(
        t, tcab, opts.warm_spell_k, opts.warm_spell_min_s, opts.recovery_s, on,
        opts.saturated_share,
    )  # fmt: skip
    segs = grid.segments(opts.cabinet_block_s, base & ~strobed[blk] & ~recovering[:-1])
    if segs.n_good < MIN_BLOCKS:
        why = (
            "cabinet still giving up heat stored during a warm spell (power cut, failed cooling)"
            if recovering.any()
            else "too few complete hours for the cabinet balance (door openings, gaps or faults)"
        )
        raise InsufficientDataError(
            f"{segs.n_good} usable {opts.cabinet_block_s / 3600:.1f}-hour blocks, need 3", why
        )
    return segs, saturated


def _with_contents_node(
    grid: SampleGrid,
    tcab: FloatArray,
    bsums: Segments,
    x_cab: FloatArray,
    y_cab: FloatArray,
    fit: tuple[FloatArray, FloatArray],
    taus: tuple[float, ...],
    q_prior: tuple[float, float],
) -> tuple[FloatArray, FloatArray, FloatArray]:
    # Where the module never rests (proportional drive) the air moves with the load and the
    # contents follow it hours late; the part of their stored heat in step with Ta - Tcab
    # would pull UA low. There a contents node behind a first-order lag joins the balance,
    # its time constant from ``taus``, kept when it lowers the Bayesian information
    # criterion (Schwarz, Ann. Statist. 6(2), 1978), the time constant counted as a
    # parameter, and when both heat capacities come out positive. Returns the design and
    # the fit (parameters, covariance) chosen.
    q0, q_sd = q_prior
    p2, cov2 = fit
    n_cab = y_cab.size
    best = _bic_term(n_cab, robust_sd(y_cab - x_cab @ p2))
    x_best = x_cab
    for tau in taus:
        x_n = np.column_stack([x_cab, -bsums.sums(np.diff(_first_order_lag(grid.t, tcab, tau)))])
        p_n, cov_n, _, _ = robust_weighted(
            [(x_n, y_cab)], 1, q0, q_sd, (0, 1), hold_when_weak=False
        )
        score = _bic_term(n_cab, robust_sd(y_cab - x_n @ p_n)) + 2.0 * math.log(n_cab)
        if p_n[2] > 0.0 and p_n[3] > 0.0 and score < best:
            best, x_best, p2, cov2 = score, x_n, p_n, cov_n
    return x_best, p2, cov2


def release(t: FloatArray, start: float, tau: float) -> FloatArray:
    """Heat given up by warm goods put in at ``start`` [s], per watt at its start: a lumped
    body's excess decaying through its conductance to the air, exp(-(t - start)/τ) from
    ``start`` on (Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., 2007,
    ch. 5, eq. (5.6)), zero before it. ``t`` the sample times [s], ``tau`` the time constant
    [s]; returns the share of the initial rate at each sample [-]."""
    lag = np.asarray(t, dtype=np.float64) - start
    return np.where(lag >= 0.0, np.exp(-np.maximum(lag, 0.0) / tau), 0.0)


def _rss(x: FloatArray, y: FloatArray) -> tuple[float, float]:
    # Residual sum of squares of the least-squares fit of y on the columns of x, and the
    # coefficient of the last column.
    coef = np.linalg.lstsq(x, y, rcond=None)[0]
    res = y - x @ coef
    return float(res @ res), float(coef[-1])


def _with_releases(
    grid: SampleGrid,
    segs: Segments,
    x_cab: FloatArray,
    y_cab: FloatArray,
    block_s: float,
    q_prior: tuple[float, float],
) -> FloatArray:
    # The design with up to RELEASES_MAX releases of warm goods' heat (:func:`release`), each
    # the start (a block's) and time constant that lower the information criterion most,
    # kept where they lower it by RELEASE_MIN_BIC_DROP or more. Within a window, warm goods
    # put in on a warm afternoon go in step with Ta - Tcab, and a balance without them takes
    # their heat into UA: simulated days read UA up to 45 % high; a release's sharp start and
    # decay tells them apart.
    n = y_cab.size
    if n < x_cab.shape[1] + 6:
        return x_cab
    t = grid.t
    starts = t[0] + block_s * np.arange(max(int((t[-1] - t[0]) // block_s), 0))
    # The internal load's prior as rows of the design, weighted by the residuals' scale, so
    # that a release is chosen for the balance it will be fitted in, not one free to trade
    # UA against a constant load.
    q0, q_sd = q_prior
    n_par = x_cab.shape[1]
    means, sds = [0.0] * n_par, [math.inf] * n_par
    means[1], sds[1] = q0, q_sd
    rows_x, rows_y = prior_rows(math.sqrt(_rss(x_cab, y_cab)[0] / n), means, sds)
    x_cab, y_cab = np.vstack([x_cab, rows_x]), np.concatenate([y_cab, rows_y])
    # A release must show its decay, two time constants of it, before the window ends: a step
    # that lasts (a leak) is not one.
    cols = [
        np.append(col, np.zeros(n_par))
        for tau in RELEASE_TAUS_S
        for s0 in starts
        if t[-1] - s0 >= 2.0 * tau
        for col in [segs.sums(grid.trap(release(t, float(s0), tau)))]
        if np.any(col > 0.0)
    ]
    penalty = 3.0 * math.log(n)
    for _ in range(RELEASES_MAX):
        rss0 = _rss(x_cab, y_cab)[0]
        if not rss0 > 0.0:
            break
        best, best_col = 0.0, None
        for col in cols:
            rss, size = _rss(np.column_stack([x_cab, col]), y_cab)
            # Only heat given up: nothing in the cabinet takes heat out but the module.
            drop = n * math.log(rss0 / max(rss, 1e-300)) - penalty
            if size > 0.0 and drop > best:
                best, best_col = drop, col
        if best_col is None or best < RELEASE_MIN_BIC_DROP:
            break
        x_cab = np.column_stack([x_cab, best_col])
    return x_cab[:n]


def _without_warm_goods(
    x_cab: FloatArray, y_cab: FloatArray, p2: FloatArray, q_prior: tuple[float, float]
) -> tuple[BoolArray, FloatArray]:
    # Blocks in runs of warm goods (:func:`warm_goods_runs`), found again after each refit
    # without them, and the internal load of the last refit [W].
    q0, q_sd = q_prior
    warm = np.zeros(y_cab.size, dtype=bool)
    for _ in range(WARM_GOODS_PASSES):
        found = warm_goods_runs(y_cab - x_cab @ p2)
        if np.array_equal(found, warm) or int((~found).sum()) < max(3, x_cab.shape[1] + 2):
            break
        warm = found
        p2, _cov2, _, _ = robust_weighted(
            [(x_cab[~warm], y_cab[~warm])], 1, q0, q_sd, (0, 1), hold_when_weak=False
        )
    return warm, p2


def fit_cabinet(
    grid: SampleGrid,
    base: BoolArray,
    temps: tuple[FloatArray, FloatArray, FloatArray],
    heat: tuple[FloatArray, FloatArray],
    drive: tuple[FloatArray, FloatArray, FloatArray, BoolArray],
    k_fit: tuple[float, bool, bool, bool],
    k_settled: float | None,
    q_settled: tuple[float, float] | None,
    options: DiagnosticsOptions,
) -> CabinetFit:
    """Solve the cabinet balance for UA, the internal load and the heat capacity (module
    docstring).

    The internal load's prior is ``q_internal_prior`` while the blocks, the contents node and
    the runs of warm goods are chosen; the final fit, on those blocks, uses the unit's settled
    load ``q_settled`` where given, and gives its first-order response to what moves Qc.
    Neighbouring blocks share what the model leaves out, so the covariance grows by
    (1 + ρ)/(1 - ρ), ρ the residuals' lag-one autocorrelation, as for the effective sample
    size of a first-order autoregressive series (H. von Storch and F. W. Zwiers, Statistical
    Analysis in Climate Research, 1999; from memory).

    Parameters
    ----------
    grid : Sample times and intervals.
    base : Sample pairs that may be integrated across [-].
    temps : (Tcab, Tc, Ta) per sample [K].
    heat : (Pc [W], ΔT [K]) per sample.
    drive : (I [A], S [V/K], R [ohm], on [-]) per sample.
    k_fit : (this window's K [W/K], K was held, the faces were not followed, the module
        rested) from the sink balances.
    k_settled : The unit's settled K, used instead of this window's where given [W/K].
    q_settled : The unit's settled internal load and its standard error ([W], [W]).
    options : The cabinet fields of :class:`.DiagnosticsOptions`.

    Returns
    -------
    The fit.

    Raises
    ------
    InsufficientDataError : too few usable blocks.
    EstimationError : UA not positive.
    """
    tcab, tc, ta = temps
    pc, dtv = heat
    i, s, r, on = drive
    k, forced, slow_faces, rests = k_fit
    held_cab = forced or k_settled is not None
    k_cab = k if k_settled is None or slow_faces else k_settled
    qc = pc - k_cab * dtv
    segs, saturated = _blocks(grid, tcab, on, base, options)
    bsums, trap = segs.sums, grid.trap
    x_cab = np.column_stack([bsums(trap(ta - tcab)), bsums(grid.h), -bsums(np.diff(tcab))])
    y_cab = bsums(trap(qc))
    q0, q_sd = options.q_internal_prior
    p2, cov2, _, _ = robust_weighted([(x_cab, y_cab)], 1, q0, q_sd, (0, 1), hold_when_weak=False)
    # With a thermostat the air stays within its band and the contents with it, except while
    # the module runs flat out and the air still warms (a saturated warm spell): then the
    # contents node is tried too.
    taus = () if rests and not saturated else options.contents_tau_s
    x_cab, p2, cov2 = _with_contents_node(
        grid, tcab, segs, x_cab, y_cab, (p2, cov2), taus, (q0, q_sd)
    )
    # Releases only where the module rests: where it never does, the contents node carries
    # the contents' heat, and a release beside it traded UA with it (simulated proportional
    # units: UA -17 % and +26 %, from within 15 %). Not from slow instants either
    # (``releases_max_interval_s``).
    x_rel = x_cab
    if not taus and options.warm_goods_releases:
        x_rel = _with_releases(grid, segs, x_cab, y_cab, options.cabinet_block_s, (q0, q_sd))
    if x_rel.shape[1] > x_cab.shape[1]:
        x_cab = x_rel
        p2, cov2, _, _ = robust_weighted(
            [(x_cab, y_cab)], 1, q0, q_sd, (0, 1), hold_when_weak=False
        )
    warm, p2 = _without_warm_goods(x_cab, y_cab, p2, (q0, q_sd))
    q_own = float(p2[1])
    if q_settled is not None:
        q0, q_sd = q_settled
    # Responses to: K's own uncertainty; the errors of S and R; a steady shift of Qc (the
    # probe offsets in Ta - Tcab: a shift of UA·τ). Part of a steady shift goes to the
    # internal load.
    cab_shifts = np.array(
        [-bsums(trap(dtv)), bsums(trap(s * i * tc)), -bsums(trap(0.5 * i * i * r)), bsums(grid.h)]
    )
    p2, cov2, _, resp_cab = robust_weighted(
        [(x_cab[~warm], y_cab[~warm])], 1, q0, q_sd, (0, 1), hold_when_weak=False,
        shifts=cab_shifts[:, ~warm],
    )  # fmt: skip
    res_cab = y_cab[~warm] - x_cab[~warm] @ p2
    rho = lag_one_autocorrelation(res_cab)
    cov2 = cov2 * ((1.0 + rho) / (1.0 - rho))
    ua = float(p2[0])
    if ua <= 0.0:
        raise EstimationError(f"non-physical cabinet fit: UA={ua:.3g} W/K")
    return CabinetFit(p2, cov2, resp_cab, q_own, k_cab, held_cab)
