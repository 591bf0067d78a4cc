"""The hot side's thermal resistance (sink plus fan) over short stretches of readings.

r_hot = ∫(Th - Ta) dt / (∫Qh dt - Ch·δTh), the hot sink's energy balance integrated over a
stretch (Incropera et al. 2007, ch. 5), with Qh = S·I·Th + ½·I²·R - K·ΔT (Goldsmid 2010,
ch. 2). Integrating over whole on/off cycles cancels most of the heat stored in the sink, so
the estimate works on short windows (tens of minutes) and reacts quickly to a blocked fin or
a failed fan.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .._validate import FloatArray
from ..errors import InsufficientDataError
from .cabinet import strobed_blocks
from .estimates import BoolArray, Estimate
from .intervals import IntervalMeans, closing_pairs, scaled_for_interval, usual_interval
from .least_squares import segment_sums
from .options import DEFAULT_OPTIONS, DiagnosticsOptions

__all__ = ["hot_side_resistance_ratio", "hot_side_resistance_ratios"]


@dataclass(frozen=True)
class _Ratios:
    # Per stretch: the ratio and its error, and what went into them.
    value: FloatArray  # [K/W], NaN where not ok
    se: FloatArray  # [K/W]
    heat: FloatArray  # heat rejected [J]
    mean_rise: FloatArray  # [K]
    n: NDArray[np.int64]  # sample pairs [-]
    ok: BoolArray  # enough pairs and heat [-]


def _ratios(
    t: FloatArray,
    th: FloatArray,
    ta: FloatArray,
    tc: FloatArray,
    i: FloatArray,
    seebeck: FloatArray,
    resistance: FloatArray,
    conductance: float,
    usable: BoolArray,
    blk: NDArray[np.int64],
    n_blocks: int,
    c_hot: float,
    options: DiagnosticsOptions,
    means: IntervalMeans | None = None,
) -> _Ratios:
    qh = seebeck * i * th + 0.5 * i * i * resistance - conductance * (th - tc)
    rise = th - ta
    h = np.diff(t)
    pair = usable[:-1] & usable[1:] & (h <= options.max_gap_s) & (h > 0) & (blk[:-1] == blk[1:])
    seg = blk[:-1][pair]
    q_all = 0.5 * (qh[:-1] + qh[1:]) * h
    r_all = 0.5 * (rise[:-1] + rise[1:]) * h
    if means is not None:
        # Pairs a summary closes: its means times the interval (Qh from the means as in
        # .thermal.fit_thermal; the sink's storage term keeps the instants).
        closing = closing_pairs(t, means)
        qh_m = (
            seebeck * means.current * means.t_hot
            + 0.5 * means.current_sq * resistance
            - conductance * (means.t_hot - means.t_cold)
        )
        q_all = np.where(closing, qh_m[1:] * h, q_all)
        r_all = np.where(closing, (means.t_hot - means.t_ambient)[1:] * h, r_all)
    q_int, r_int = q_all[pair], r_all[pair]

    def sums(f: FloatArray) -> FloatArray:
        return segment_sums(seg, n_blocks, f)

    q_sum, r_sum, h_sum = sums(q_int), sums(r_int), sums(h[pair])
    heat = q_sum - c_hot * sums(np.diff(th)[pair])
    n = np.bincount(seg, minlength=n_blocks)
    ok = (n >= options.hot_side_min_pairs) & (heat >= options.hot_side_min_heat_j)
    value = np.where(ok, r_sum / np.where(ok, heat, 1.0), np.nan)
    # Spread of the pair-level mismatch against the fitted ratio, summed as independent errors.
    mismatch = r_int - value[seg] * q_int
    se_noise = np.sqrt(sums(mismatch**2)) / np.where(ok, heat, 1.0)
    # A constant probe offset does not average out: it shifts the mean rise itself.
    mean_rise = r_sum / np.where(h_sum > 0.0, h_sum, 1.0)
    se_offset = np.abs(value) * options.probe_offset_k / np.maximum(np.abs(mean_rise), 1e-9)
    se = np.hypot(se_noise, se_offset)
    return _Ratios(value, se, heat, mean_rise, n, ok)


def hot_side_resistance_ratios(
    time_s: FloatArray,
    t_hot: FloatArray,
    t_ambient: FloatArray,
    t_cold: FloatArray,
    current: FloatArray,
    seebeck: FloatArray,
    resistance: FloatArray,
    conductance: float,
    usable: BoolArray,
    block: NDArray[np.int64],
    n_blocks: int,
    *,
    c_hot: float = 0.0,
    faces_followed: bool = True,
    means: IntervalMeans | None = None,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> list[Estimate | InsufficientDataError]:
    """Hot-side resistance r_hot = ∫(Th - Ta) dt / (∫Qh dt - Ch·δTh) over many stretches.

    Each sample belongs to the stretch ``block`` (0 .. ``n_blocks`` - 1, non-decreasing in
    time); only consecutive samples of the same stretch form a pair. Per-stretch integrals are
    ``numpy.bincount`` sums, so one call costs about as much as one stretch. Standard error
    from the spread of the per-pair ratio, treating pairs as independent, plus a probe offset
    on the rise (which dominates when the sink runs only a few kelvin above ambient).

    Parameters
    ----------
    time_s : Sample times [s].
    t_hot, t_ambient, t_cold : Temperatures [K].
    current : Module current [A].
    seebeck, resistance : Module S [V/K] and R [ohm] at each sample's mean temperature.
    conductance : Module thermal conductance K [W/K].
    usable : Samples that may be used [-].
    block : Stretch of each sample [-].
    n_blocks : Number of stretches [-].
    c_hot : Heat capacity of the hot sink, when known [J/K].
    faces_followed : False when the hot sink stores heat over a good part of a sampling
        interval while the module switches every few minutes
        (:attr:`.ThermalFit.faces_followed`): the rise then lags the heat within each cycle
        and the trapezoid rule does not follow it, so no stretch is called reliable (on
        simulated units one read 22 % low, hour after hour, a steady bias that cancels in
        its changes), and a stretch whose on/off cycle is locked to the sampling (the samples
        see the same few phases of every cycle; such hours read up to twice the true value)
        gives none [-].
    means : The readings' interval summaries, where they carry them: a pair a summary closes
        is integrated from its means (:func:`.intervals.closing_pairs`); None: instants.
    options : ``max_gap_s`` [s], ``hot_side_min_heat_j`` [J], ``hot_side_min_pairs`` [-],
        ``probe_offset_k`` [K],
        ``hot_side_max_rel_stderr`` [-], ``on_current`` [A], ``locked_match`` [-].

    Returns
    -------
    Per stretch, r_hot [K/W], or the error saying why there is none.
    """
    t = np.asarray(time_s, dtype=np.float64)
    th = np.asarray(t_hot, dtype=np.float64)
    i = np.asarray(current, dtype=np.float64)
    blk = np.asarray(block, dtype=np.int64)
    options = scaled_for_interval(options, usual_interval(t), means is not None)
    q = _ratios(
        t, th, t_ambient, t_cold, i, seebeck, resistance, conductance, usable, blk, n_blocks,
        c_hot, options, means,
    )  # fmt: skip
    locked = np.zeros(n_blocks, dtype=bool)
    if not faces_followed and blk.size > 1 and means is None:
        # Partly locked hours bias it too: a lower share of matching pairs than the
        # cabinet balance's 0.95 (one simulated hour at 0.9 read +51 %).
        found = strobed_blocks(i > options.on_current, blk[:-1], min_match=options.locked_match)
        locked[: min(found.size, n_blocks)] = found[:n_blocks]
    out: list[Estimate | InsufficientDataError] = []
    for j in range(n_blocks):
        if not q.ok[j]:
            out.append(
                InsufficientDataError(
                    f"{q.heat[j]:.3g} J rejected over {q.n[j]} sample pairs",
                    "module hardly ran: no heat to measure",
                )
            )
            continue
        if locked[j]:
            out.append(
                InsufficientDataError(
                    "on/off cycle locked to the sampling",
                    "the samples see the same phases of every cycle while the sink stores heat",
                )
            )
            continue
        precise = bool(q.se[j] < options.hot_side_max_rel_stderr * abs(q.value[j]))
        reliable = precise and faces_followed
        note = (
            None
            if reliable
            else f"hot sink only {q.mean_rise[j]:.1f} K above ambient: probe offsets dominate"
            if not precise
            else "sink stores heat within a sampling interval: the hour's figure can be some "
            "tens of per cent off (the 24-hour fit is not); its changes are followed"
        )
        out.append(Estimate(float(q.value[j]), float(q.se[j]), int(q.n[j]), reliable, note))
    return out


def hot_side_resistance_ratio(
    time_s: FloatArray,
    t_hot: FloatArray,
    t_ambient: FloatArray,
    t_cold: FloatArray,
    current: FloatArray,
    seebeck: FloatArray,
    resistance: FloatArray,
    conductance: float,
    usable: BoolArray,
    *,
    c_hot: float = 0.0,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> Estimate:
    """Hot-side (sink plus fan) thermal resistance over one short stretch of readings.

    :func:`hot_side_resistance_ratios` with the whole stretch as one (module docstring for
    the balance and its sources).

    Parameters
    ----------
    time_s ... usable : As in :func:`hot_side_resistance_ratios`.
    c_hot : Heat capacity of the hot sink, when known [J/K].
    options : As in :func:`hot_side_resistance_ratios`.

    Returns
    -------
    r_hot [K/W].

    Raises
    ------
    InsufficientDataError : too little heat rejected to measure it.
    """
    ests = hot_side_resistance_ratios(
        time_s, t_hot, t_ambient, t_cold, current, seebeck, resistance, conductance, usable,
        np.zeros(np.size(time_s), dtype=np.int64), 1, c_hot=c_hot, options=options,
    )  # fmt: skip
    est = ests[0]
    if isinstance(est, InsufficientDataError):
        raise est
    return est
