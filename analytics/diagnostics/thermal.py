"""The thermal fit: K and the sinks, then UA, C and the internal load, from integral energy
balances.

Model (sign conventions of :mod:`..physics`; Ioffe 1957, Goldsmid 2010 ch. 2, Rowe 1995)::

    Qc = S·I·Tc - ½·I²·R - K·ΔT                   heat drawn at the cold face
    Qh = S·I·Th + ½·I²·R - K·ΔT                   heat released at the hot face

and the lumped energy balances of the cabinet air, the cold sink and the hot sink
(Incropera et al. 2007, ch. 5, lumped capacitance)::

    C·dTcab/dt  = UA·(Ta - Tcab) - Qc - Cc·dTc/dt        cabinet (Qc seen through the cold sink)
    Cc·dTc/dt   = (Tcab - Tc)/r_cold - Qc                 cold sink
    Ch·dTh/dt   = Qh - (Th - Ta)/r_hot                    hot sink

used in integral form over short segments (:mod:`.integrals`). Stage 1, :mod:`.sinks`;
stage 2, :mod:`.cabinet`; the stated errors, :mod:`.error_budget`.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from .._validate import FloatArray
from ..errors import InsufficientDataError
from .cabinet import CabinetFit, cooling_lost, fit_cabinet
from .error_budget import cabinet_stderrs, sink_k_errors
from .estimates import BoolArray
from .integrals import SampleGrid
from .intervals import IntervalMeans, closing_pairs, scaled_for_interval, usual_interval
from .options import DEFAULT_OPTIONS, DiagnosticsOptions
from .sinks import SinkFit, fit_sinks

__all__ = ["THERMAL_PARAMS", "ThermalFit", "fit_thermal"]

#: Names of the thermal parameters in :class:`ThermalFit`.
THERMAL_PARAMS = ("ua", "k", "c", "q_internal", "c_cold", "g_cold", "g_hot", "c_hot")


@dataclass(frozen=True)
class ThermalFit:
    """Cabinet, sink and module thermal parameters from the integral energy balances.

    Attributes
    ----------
    ua : Cabinet heat-loss conductance [W/K].
    k : Module thermal conductance [W/K].
    c : Effective heat capacity of the cabinet air (and what follows it within the hour) [J/K].
    q_internal : Heat released inside the cabinet [W].
    c_cold, c_hot : Heat capacities of the cold and hot sinks [J/K].
    g_cold, g_hot : Conductances cabinet air to cold face and hot face to ambient [W/K].
    stderrs : Standard error of each parameter, by name (K's includes what probe offsets
        left unresolved and the errors of S and R could do to it); also ``ua_probe``, the
        part of UA's uncertainty that is the same in every window (probe offsets, S and R,
        K when held), not included in ``ua`` because it cancels in UA's changes.
    n : Segments used in the sink balances [-].
    n_samples : Samples behind them [-].
    k_from_data : True when the readings, not the prior, determine K.
    rested : True when the module was at rest for at least ``min_rest_share`` of the usable
        samples; False for a module that never rests (one family of operating points).
    ua_reliable : False when the cabinet balance is poorly determined.
    c_reliable : False when the heat capacity is poorly determined.
    note : Remarks on identifiability.
    q_internal_own : The internal load fitted with ``q_internal_prior`` alone, before a
        settled value of the unit's own joins (see :func:`fit_thermal`): what a history of
        the unit's internal load should be made of [W].
    k_cabinet : The K in the cabinet balance (``k_settled`` when given, else ``k``) [W/K].
    ua_per_k : UA's first-order response to that K, ∂UA/∂K [-]: UA for another K is
        ``ua + ua_per_k·(K' - k_cabinet)``.
    faces_followed : False when the sinks store heat over a good part of a sampling
        interval while the module switches (see ``max_sink_tau_share``): K was held, and
        the sinks' conductances rest on transients the samples do not follow.
    sink_taus : This window's own sink time constants (heat capacity over conductance) and
        their standard errors, (cold, its error, hot, its error); None where the module did
        not switch often (``min_switches_per_h``) [s].
    interval_s : The readings' usual interval the balances rest on (segments, blocks and
        the largest gap integrated across scale with it: :mod:`.intervals`) [s].
    """

    ua: float
    k: float
    c: float
    q_internal: float
    c_cold: float
    g_cold: float
    g_hot: float
    c_hot: float
    stderrs: dict[str, float]
    n: int
    n_samples: int
    k_from_data: bool
    rested: bool
    ua_reliable: bool
    c_reliable: bool
    note: str | None
    q_internal_own: float = math.nan
    k_cabinet: float = math.nan
    ua_per_k: float = 0.0
    faces_followed: bool = True
    sink_taus: tuple[float, float, float, float] | None = None
    interval_s: float = 60.0

    def stderr(self, name: str) -> float:
        """Standard error of one parameter (a name from ``THERMAL_PARAMS``)."""
        return self.stderrs[name]


def _pairs(
    t: FloatArray, on: BoolArray, usable: BoolArray, options: DiagnosticsOptions
) -> tuple[BoolArray, BoolArray]:
    # (base, pair): sample pairs that may be integrated across, and of those the ones the sink
    # balances use (clear of ``switch_guard_s`` after a switch).
    h = np.diff(t)
    switch_guard_s = options.switch_guard_s
    switched = np.concatenate([[False], on[1:] != on[:-1]])
    last_switch = np.maximum.accumulate(np.where(switched, t, -np.inf))
    settled = (
        (t - last_switch >= switch_guard_s)[:-1] & ~switched[1:]
        if switch_guard_s > 0.0
        else np.ones(h.size, dtype=bool)
    )
    base = usable[:-1] & usable[1:] & (h <= options.max_gap_s) & (h > 0)
    return base, base & settled


Flows = tuple[
    tuple[FloatArray, FloatArray, FloatArray, FloatArray],
    FloatArray,
    FloatArray,
    FloatArray,
    FloatArray | None,
    BoolArray | None,
]


def _flows(
    t: FloatArray,
    temps: tuple[FloatArray, FloatArray, FloatArray, FloatArray],
    i: FloatArray,
    s: FloatArray,
    r: FloatArray,
    means: IntervalMeans | None,
    options: DiagnosticsOptions,
) -> Flows:
    # ((Tcab, Tc, Th, Ta), I, Pc, Ph, off share, closing pairs) per sample: the instants, or
    # where a summary closes the pair before a sample, its interval means (see fit_thermal).
    tcab, tc, th, ta = temps
    pc = s * i * tc - 0.5 * i * i * r
    ph = s * i * th + 0.5 * i * i * r
    if means is None:
        return temps, i, pc, ph, None, None
    closing = closing_pairs(t, means)
    m = np.concatenate([[False], closing])
    tcab, tc, th, ta, i = (
        np.where(m, mean, inst)
        for mean, inst in (
            (means.t_cabinet, tcab), (means.t_cold, tc), (means.t_hot, th),
            (means.t_ambient, ta), (means.current, i),
        )
    )  # fmt: skip
    pc = np.where(m, s * i * tc - 0.5 * means.current_sq * r, pc)
    ph = np.where(m, pc + means.power, ph)
    # A module that rests within its intervals rests: its summaries say for how long.
    off_share = np.where(m, 1.0 - means.on_share, (i <= options.on_current).astype(float))
    return (tcab, tc, th, ta), i, pc, ph, off_share, closing


def fit_thermal(
    time_s: FloatArray,
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    t_ambient: FloatArray,
    current: FloatArray,
    seebeck: FloatArray,
    resistance: FloatArray,
    usable: BoolArray,
    k_prior: float,
    k_prior_rel: float,
    *,
    k_settled: float | None = None,
    q_settled: tuple[float, float] | None = None,
    sr_rel_cov: FloatArray | None = None,
    sink_taus_settled: tuple[float, float, float, float] | None = None,
    offset_cov: FloatArray | None = None,
    means: IntervalMeans | None = None,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> ThermalFit:
    """Fit K and the sinks, then UA, C and the internal load, to integral energy balances.

    Stage 1, :func:`.sinks.fit_sinks`: the cold and hot sink balances over segments of
    ``segment_s``, with a prior K = ``k_prior`` ± ``k_prior_rel`` and constant heat flows for
    the probe offsets, without a power cut (:func:`.cabinet.cooling_lost`: no second
    operating point through stopped fans); K held at a single operating point and where the
    sinks store heat faster than the samples follow. Stage 2, :func:`.cabinet.fit_cabinet`:
    the cabinet balance over blocks of ``cabinet_block_s``, ∫Qc = UA·∫(Ta - Tcab) +
    q_int·τ - C·δTcab with Qc = S·I·Tc - ½·I²·R - K·ΔT (Goldsmid 2010, ch. 2).
    Lumped-capacitance balances: Incropera et al. (2007), ch. 5. Stated errors:
    :mod:`.error_budget`.

    Parameters
    ----------
    time_s : Sample times [s].
    t_cabinet, t_cold, t_hot, t_ambient : Temperatures [K].
    current : Module current [A].
    seebeck : Seebeck coefficient at each sample's mean module temperature [V/K].
    resistance : Resistance at each sample's mean module temperature [ohm].
    usable : Samples that may be used [-].
    k_prior : Prior module conductance [W/K].
    k_prior_rel : Relative standard deviation of that prior [-].
    k_settled : The unit's settled K, e.g. the median of its own K from windows that had two
        operating points. K is held there at a single operating point (instead of at
        ``k_prior``), so that its error stays the same across both kinds of window and
        cancels in UA's changes; and the cabinet balance uses it instead of this window's
        K: K belongs to the module, and how hard the cabinet makes it work (a leak keeps it
        running) should not move the UA found beside it [W/K].
    q_settled : The unit's settled internal load and its standard error, e.g. the median
        of its own earlier ``q_internal_own`` values. Fans and electronics inside do not
        change from day to day, while one day's balance trades UA against a constant load
        where the ambient hardly moves: once the blocks, contents term and warm-goods runs
        are chosen with ``q_internal_prior``, the cabinet is fitted once more with this prior
        instead ([W], [W]).
    sr_rel_cov : Covariance of the relative errors of ``seebeck`` and ``resistance`` (in
        that order), carried into the errors of K and UA to first order; None: none [-].
    sink_taus_settled : The unit's settled sink time constants and their errors, as in
        :attr:`ThermalFit.sink_taus` (e.g. pooled from its earlier windows): when given, they
        decide instead of this window's own, which scatter from window to window; sinks do
        not change [s].
    offset_cov : Covariance of the probes' offsets left after the temperatures were
        corrected by their estimate (cabinet, cold, hot, relative to the ambient probe:
        :class:`.probe_offsets.ProbeOffsets`); it sets the sink balances' offset priors and
        the cabinet's lead offset. None: every difference of two probes ± ``probe_offset_k``
        [K²].
    means : The readings' interval summaries: a pair a summary closes is integrated from its
        means (Pc = S·Ī·T̄c - ½·R·mean(I²), Ph = Pc + mean(P); diagnostics README, 6b).
    options : The thermal fit's thresholds, priors and window shares (see
        :class:`.DiagnosticsOptions`: shared, sink and cabinet fields).

    Returns
    -------
    The fit.

    Raises
    ------
    InsufficientDataError : too few usable segments or blocks.
    EstimationError : the fit gives non-physical values.
    """
    t = np.asarray(time_s, dtype=np.float64)
    tcab, tc, th, ta = (
        np.asarray(a, dtype=np.float64) for a in (t_cabinet, t_cold, t_hot, t_ambient)
    )
    i = np.asarray(current, dtype=np.float64)
    s = np.asarray(seebeck, dtype=np.float64)
    r = np.asarray(resistance, dtype=np.float64)
    if t.size < 2:
        raise InsufficientDataError("fewer than two samples", "no readings in this window")
    interval = usual_interval(t)  # slow reporting: longer segments and blocks (.intervals)
    summarised = means is not None and bool(closing_pairs(t, means).mean() >= 0.5)
    options = scaled_for_interval(options, interval, summarised)
    temps = (tcab, tc, th, ta)
    (tcab, tc, th, ta), i, pc, ph, off_share, closing = _flows(t, temps, i, s, r, means, options)
    dtv = th - tc
    grid = SampleGrid.of(t, closing)
    on = i > options.on_current
    base = _pairs(t, on, usable, options)[0]
    sink_usable = usable & ~cooling_lost(t, tcab, on, options)  # fans stand still in a cut
    pair = _pairs(t, on, sink_usable, options)[1]
    sk = fit_sinks(
        grid, pair, (pc, ph, dtv), (tcab, tc, th, ta), i, s, r, sink_usable, k_prior,
        k_prior_rel, k_settled, sink_taus_settled, options, offset_cov, off_share,
    )  # fmt: skip
    k = float(sk.params[0])
    k_sd, k_probe, k_from_data = sink_k_errors(
        sk.k_sd_scatter, sk.cov, sk.forced, k_prior, k_prior_rel
    )
    cab = fit_cabinet(
        grid, base, (tcab, tc, ta), (pc, dtv), (i, s, r, on),
        (k, sk.forced, sk.slow_faces, sk.rests), k_settled, q_settled, options,
    )  # fmt: skip
    stderrs = cabinet_stderrs(
        sk.cov, cab.cov, cab.resp, sk.resp[:, 0], float(cab.params[0]), k_sd, k_probe,
        cab.held_cab, sr_rel_cov,
        options.probe_offset_k if offset_cov is None else math.sqrt(float(offset_cov[0, 0])),
    )  # fmt: skip
    return dataclasses.replace(
        _result(sk, cab, stderrs, pair, k_from_data, options), interval_s=interval
    )


def _result(
    sk: SinkFit,
    cab: CabinetFit,
    stderrs: dict[str, float],
    pair: BoolArray,
    k_from_data: bool,
    options: DiagnosticsOptions,
) -> ThermalFit:
    # The fit as served: parameters, their errors, reliability and remarks.
    k, c_cold, g_cold, g_hot, c_hot = (float(v) for v in sk.params[:5])
    ua, q_int, c = (float(v) for v in cab.params[:3])
    ua_rel = stderrs["ua"] / ua
    ua_ok = ua_rel < options.ua_max_rel_stderr
    c_ok = c > 0.0 and stderrs["c"] < options.c_max_rel_stderr * c
    notes = []
    if sk.slow_faces:
        notes.append(
            f"sinks store heat over {sk.tau_slow:.0f} s against {sk.h_typ:.0f}-s samples: "
            "the switching transients cannot be followed, module conductance held"
        )
    elif not k_from_data:
        notes.append("module conductance weakly identifiable: value leans on its prior")
    if not ua_ok:
        notes.append(f"cabinet UA poorly determined (±{100 * ua_rel:.0f} %)")
    segs = sk.segments
    return ThermalFit(
        ua=ua,
        k=k,
        c=c,
        q_internal=q_int,
        c_cold=c_cold,
        g_cold=g_cold,
        g_hot=g_hot,
        c_hot=c_hot,
        stderrs=stderrs,
        n=segs.n_good,
        n_samples=int(pair[segs.good[segs.seg_all]].sum()),
        k_from_data=k_from_data,
        rested=sk.rests,
        ua_reliable=bool(ua_ok),
        c_reliable=bool(c_ok),
        note="; ".join(notes) or None,
        q_internal_own=cab.q_own,
        k_cabinet=cab.k_cab,
        ua_per_k=float(cab.resp[0, 0]),
        faces_followed=not sk.slow_faces,
        sink_taus=sk.taus_own,
    )
