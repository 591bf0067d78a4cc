"""Constant offsets between the temperature probes, from rests and the open-circuit voltage.

Each probe reads T + b_j with a constant offset b_j (j: cabinet, cold face, hot face, ambient)
and the voltage reading V + b_v. Heat flows see only differences of the b_j, so the offsets
are reported relative to the ambient probe, δ_j = b_j - b_a. Two kinds of evidence:

* **Rest.** A module without current has its faces and its cabinet relax towards the
  ambient; once they agree with it every read difference T_j - T_a is b_j - b_a, and a
  floating module's voltage, with no ΔT across it, is b_v. Lumped bodies relax as
  θ(t) = θ0·exp(-t/τ) (Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed.,
  2007, ch. 5, eq. (5.6)): the contents slowly, over hours, the air and the faces following
  them and the ambient by fixed shares. So a read difference is its offset plus a
  combination of the cabinet's and the ambient's drifts, and regressed on those drifts over
  a rest of half a day its intercept is the offset, without waiting for full agreement.
* **Open-circuit voltage.** Where the driver lets the module float, its voltage while off
  is V_oc = S·ΔT (the Seebeck effect: H. J. Goldsmid, *Introduction to Thermoelectricity*,
  2010, ch. 2), so ΔT_read - V_read/S = (b_h - b_c) - b_v/S on every off sample: the
  hot-minus-cold offset, up to the voltage reading's offset over S.

Both are linear in (b_cab, b_c, b_h, b_a, b_v). With independent Gaussian priors (each probe
±``probe_offset_k``/√2, so that a difference of two has ``probe_offset_k``; the voltage
±``voltage_offset``) the posterior is the generalised least-squares solution in information
form, precision = prior precision + Σ aᵀa/σ² (C. M. Bishop, *Pattern Recognition and
Machine Learning*, 2006, eqs. (3.50)-(3.51); from memory). Evidence of separate rests and
windows adds in that form.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._validate import FloatArray
from ..errors import InsufficientDataError
from .estimates import BoolArray
from .options import DEFAULT_OPTIONS, DiagnosticsOptions

__all__ = [
    "PAIRS",
    "PROBES",
    "OffsetEvidence",
    "ProbeOffsets",
    "RestMoment",
    "balance_offset_sds",
    "difference_sd",
    "largest_difference_sd",
    "open_circuit_evidence",
    "probe_offsets",
    "rest_evidence",
    "rest_moments",
]

#: The probes whose offsets are reported, relative to the ambient probe, in this order.
PROBES = ("cabinet", "cold", "hot")
# Unknowns: offsets of the cabinet, cold, hot and ambient probes [K], of the voltage [V].
_N = 5
_V = 4
# The reported offsets (relative to the ambient probe) from the unknowns.
_RELATIVE = np.array(
    [[1.0, 0.0, 0.0, -1.0, 0.0], [0.0, 1.0, 0.0, -1.0, 0.0], [0.0, 0.0, 1.0, -1.0, 0.0]]
)


@dataclass(frozen=True)
class OffsetEvidence:
    """What readings say about the offsets, in information form.

    Attributes
    ----------
    info : Σ aᵀa/σ² over the observations, (5, 5), unknowns (b_cab, b_c, b_h, b_a [K],
        b_v [V]) [1/K², ...].
    vec : Σ aᵀy/σ² [1/K, ...].
    n_rest : Rest moments behind it [-].
    n_open : Off samples of a floating module behind it [-].
    """

    info: FloatArray
    vec: FloatArray
    n_rest: int = 0
    n_open: int = 0

    @classmethod
    def nothing(cls) -> OffsetEvidence:
        """No evidence."""
        return cls(np.zeros((_N, _N)), np.zeros(_N))

    def __add__(self, other: OffsetEvidence) -> OffsetEvidence:
        return OffsetEvidence(
            self.info + other.info,
            self.vec + other.vec,
            self.n_rest + other.n_rest,
            self.n_open + other.n_open,
        )

    def observe(self, a: FloatArray, y: float, sd: float) -> OffsetEvidence:
        """This evidence and one observation y = a·b ± sd [units of y]."""
        w = 1.0 / sd**2
        return OffsetEvidence(
            self.info + w * np.outer(a, a), self.vec + w * a * y, self.n_rest, self.n_open
        )


@dataclass(frozen=True)
class RestMoment:
    """One rest: the read differences of the probes from the ambient probe at its most
    settled block, and the voltage read then.

    Attributes
    ----------
    start_s, end_s : When the module last carried current before it (the first sample if it
        never did in the readings given), and the end of its block [s].
    diff : Mean T_j - T_a of the cabinet, cold and hot probes; NaN for a probe not read [K].
    diff_sd : Their standard errors, the difference still to relax included [K].
    volt : Mean voltage read, NaN where the driver does not float [V].
    volt_sd : Its standard error [V].
    """

    start_s: float
    end_s: float
    diff: FloatArray
    diff_sd: FloatArray
    volt: float
    volt_sd: float


@dataclass(frozen=True)
class ProbeOffsets:
    """The probes' offsets relative to the ambient probe.

    Attributes
    ----------
    offsets : δ of the cabinet, cold-face and hot-face probes (``PROBES``) [K].
    cov : Their covariance [K²].
    n_rest : Rest moments behind them [-].
    n_open : Off samples of a floating module behind them [-].
    basis : What they rest on, in words.
    """

    offsets: FloatArray
    cov: FloatArray
    n_rest: int
    n_open: int
    basis: str

    @property
    def stderrs(self) -> FloatArray:
        """Standard errors of ``offsets`` [K]."""
        return np.sqrt(np.maximum(np.diag(self.cov), 0.0))

    def difference_sd(self, a: str, b: str) -> float:
        """Standard uncertainty of the offset of probe ``a`` minus that of ``b`` (names from
        ``PROBES`` or "ambient") [K]."""
        return difference_sd(self.cov, a, b)


#: The differences of probes the heat balances use: the cold path, the hot path, the module
#: and the cabinet's lead to the ambient.
PAIRS = (("cabinet", "cold"), ("hot", "ambient"), ("hot", "cold"), ("ambient", "cabinet"))


def difference_sd(cov: FloatArray, a: str, b: str) -> float:
    """Standard uncertainty of the offset of probe ``a`` minus that of ``b`` (names from
    ``PROBES`` or "ambient"), from the offsets' covariance ``cov`` (``PROBES`` order, relative
    to the ambient probe) [K]."""
    w = np.zeros(3)
    for name, sign in ((a, 1.0), (b, -1.0)):
        if name != "ambient":
            w[PROBES.index(name)] += sign
    return math.sqrt(max(float(w @ cov @ w), 0.0))


def largest_difference_sd(cov: FloatArray) -> float:
    """The largest standard uncertainty among the differences in ``PAIRS`` [K]."""
    return max(difference_sd(cov, a, b) for a, b in PAIRS)


def balance_offset_sds(
    cov: FloatArray, k: float, g_cold: float, g_hot: float
) -> tuple[float, float]:
    """Standard uncertainties of the constant heat flows the offsets make in the cold and hot
    sink balances [W].

    Reads differ from the truth by the offsets, so the cold balance's g_c·(Tcab - Tc) +
    K·(Th - Tc) is off by g_c·δ_cab - (g_c + K)·δ_c + K·δ_h and the hot one's g_h·(Th - Ta)
    + K·(Th - Tc) by -K·δ_c + (g_h + K)·δ_h; their variances are wᵀ·cov·w (JCGM 100:2008,
    GUM, eq. (13)).

    Parameters
    ----------
    cov : Covariance of the offsets (``PROBES`` order, relative to the ambient probe) [K²].
    k : Module conductance [W/K].
    g_cold, g_hot : Conductances of the cold and hot paths [W/K].
    """
    w_c = np.array([g_cold, -(g_cold + k), k])
    w_h = np.array([0.0, -k, g_hot + k])
    return (
        math.sqrt(max(float(w_c @ cov @ w_c), 0.0)),
        math.sqrt(max(float(w_h @ cov @ w_h), 0.0)),
    )


def _sub_blocks(
    t: FloatArray, temps: FloatArray, sub_s: float
) -> tuple[FloatArray, FloatArray, FloatArray]:
    # Per sub-block of ``sub_s``: the least-squares slopes of the cabinet and the ambient
    # [K/s], the mean read differences of the cabinet, cold and hot probes from the ambient
    # probe [K] (NaN where a probe is not read), and the block's mean time [s].
    k = ((t - t[0]) // sub_s).astype(np.int64)
    slopes, diffs, mids = [], [], []
    for j in range(int(k[-1]) + 1):
        blk = k == j
        tb = t[blk]
        if tb.size < 10 or tb[-1] - tb[0] < 0.75 * sub_s:
            continue
        mids.append(float(tb.mean()))
        tb = tb - tb.mean()
        slopes.append([float(np.polyfit(tb, temps[blk, q], 1)[0]) for q in (0, 3)])
        diffs.append(np.mean(temps[blk, :3] - temps[blk, 3:4], axis=0))
    return np.array(slopes).reshape(-1, 2), np.array(diffs).reshape(-1, 3), np.array(mids)


def _relaxed(
    t: FloatArray, temps: FloatArray, volt: FloatArray | None, options: DiagnosticsOptions
) -> tuple[FloatArray, FloatArray, float, float] | None:
    # (diff, diff_sd, volt, volt_sd) of one rest stretch, None where it tells nothing.
    # ``temps``: (n, 4) cabinet, cold, hot, ambient. At rest the contents relax to the
    # ambient as a lumped body, Cn·dTn/dt = G·(Ta - Tn), the air and the unpowered faces
    # sit between them and the ambient by fixed shares of conductance, so every read
    # difference from the ambient probe is its offset plus a combination of the cabinet's and
    # the ambient's drifts: T_j - T_a = δ_j + β_j·dTcab/dt + γ_j·dTa/dt. The intercept, at no
    # drift, is the offset; a probe whose intercept the rest does not pin to
    # ``rest_settle_k`` (or that reads beyond ``rest_spread_k``) is left out.
    x, d, mid = _sub_blocks(t, temps, options.rest_sub_s)
    if x.shape[0] < options.rest_min_sub:
        return None
    design = np.column_stack([np.ones(x.shape[0]), x])
    # A drift that did not vary (a steady ambient) leaves its column empty: pseudo-inverse.
    xtx_inv = np.linalg.pinv(design.T @ design)
    diff, sd = np.full(3, math.nan), np.full(3, math.nan)
    for j in range(3):
        y = d[:, j]
        if not np.all(np.isfinite(y)):
            continue
        coef = xtx_inv @ design.T @ y
        res = y - design @ coef
        sigma = math.sqrt(float(res @ res) / max(y.size - design.shape[1], 1))
        se = sigma * math.sqrt(float(xtx_inv[0, 0]))
        if se <= options.rest_settle_k and abs(float(coef[0])) <= options.rest_spread_k:
            diff[j], sd[j] = float(coef[0]), math.hypot(se, options.rest_floor_k)
    if not np.isfinite(diff).any():
        return None
    if volt is None:
        return diff, sd, math.nan, math.nan
    v = volt[np.isfinite(volt)]
    if v.size < 10:
        return diff, sd, math.nan, math.nan
    # A floating module's voltage at rest is S·ΔT with ΔT a share of the cabinet's lag: its
    # drift-free intercept is the reading's offset. The reading's step limits it: step/√12.
    ok = np.isfinite(volt)
    vx = [np.interp(t[ok], mid, x[:, q]) for q in (0, 1)]
    dv = np.column_stack([np.ones(int(ok.sum())), *vx])
    cv = np.linalg.lstsq(dv, volt[ok], rcond=None)[0]
    v_sd = math.hypot(float(np.std(volt[ok] - dv @ cv, ddof=3)) / math.sqrt(v.size),
                      options.voltage_step / 12**0.5)  # fmt: skip
    return diff, sd, float(cv[0]), v_sd


def rest_moments(
    time_s: FloatArray,
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    t_ambient: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    usable: BoolArray,
    *,
    floating: bool,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> list[RestMoment]:
    """The rests in the readings: one per stretch without current that tells an offset.

    A stretch's usable samples from ``rest_min_s`` after the module last carried current
    (the first sample counts as that where it never did) are cut into sub-blocks of
    ``rest_sub_s``; at least ``rest_min_sub`` of them are needed. Each probe's mean difference
    from the ambient probe is regressed on the sub-blocks' drifts of the cabinet and the
    ambient, and the intercept, at no drift, taken as its offset where its standard error is
    within ``rest_settle_k`` (lumped bodies relaxing to the ambient, Incropera et al. 2007,
    ch. 5, eq. (5.6); see ``_relaxed``).

    Parameters
    ----------
    time_s : Sample times [s].
    t_cabinet, t_cold, t_hot, t_ambient : Temperatures [K] (NaN where a probe is not read).
    current : Module current [A].
    voltage : Module voltage [V].
    usable : Samples that may be used [-] (a probe's NaN is skipped whatever this says).
    floating : Whether the driver leaves the module floating while off [-].
    options : ``on_current`` [A], ``max_gap_s`` [s] and the ``rest_*`` fields.

    Returns
    -------
    The rest moments, oldest first (empty where the module never rested long enough).
    """
    t = np.asarray(time_s, dtype=np.float64)
    i = np.asarray(current, dtype=np.float64)
    temps = np.column_stack(
        [np.asarray(a, dtype=np.float64) for a in (t_cabinet, t_cold, t_hot, t_ambient)]
    )
    if t.size == 0:
        return []
    on = ~(i <= options.on_current)  # a missing current counts as on
    last_on = np.maximum.accumulate(np.where(on, t, -np.inf))
    start = np.where(np.isfinite(last_on), last_on, t[0])
    rest = usable & ~on & (t - start >= options.rest_min_s) & np.isfinite(temps[:, 3])
    volts = np.asarray(voltage, dtype=np.float64)
    out: list[RestMoment] = []
    # One moment per stretch without current (door openings and gaps within it left out).
    for s0 in np.unique(start[rest]):
        sel = rest & (start == s0)
        got = _relaxed(t[sel], temps[sel], volts[sel] if floating else None, options)
        if got is not None:
            out.append(RestMoment(float(s0), float(t[sel][-1]), *got))
    return out


def rest_evidence(moments: list[RestMoment]) -> OffsetEvidence:
    """The evidence of rest moments: each probe's difference from the ambient probe, and a
    floating module's voltage (no ΔT across it at rest)."""
    ev = OffsetEvidence.nothing()
    for m in moments:
        for j in range(3):
            if math.isfinite(float(m.diff[j])):
                a = np.zeros(_N)
                a[j], a[3] = 1.0, -1.0
                ev = ev.observe(a, float(m.diff[j]), float(m.diff_sd[j]))
        if math.isfinite(m.volt):
            a = np.zeros(_N)
            a[_V] = 1.0
            ev = ev.observe(a, m.volt, m.volt_sd)
    return OffsetEvidence(ev.info, ev.vec, len(moments), 0)


def open_circuit_evidence(
    t_cold: FloatArray,
    t_hot: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    seebeck: FloatArray,
    seebeck_rel_se: float,
    usable: BoolArray,
    *,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> OffsetEvidence:
    """The hot-minus-cold offset from a floating module's open-circuit voltage.

    Off samples give ΔT_read - V_read/S = (b_h - b_c) - b_v/S (V_oc = S·ΔT, Goldsmid 2010,
    ch. 2). Their mean's error is its scatter over √n (floored at the voltage step's
    over S) and what an error of S does to it, (δS/S)·mean(V/S), the same on every sample.

    Parameters
    ----------
    t_cold, t_hot : Face temperatures [K] (NaN where not read).
    current : Module current [A].
    voltage : Module voltage [V]; call only where the driver floats.
    seebeck : S at each sample's mean module temperature [V/K].
    seebeck_rel_se : Relative standard error of that S [-].
    usable : Samples that may be used [-].
    options : ``on_current`` [A], ``min_on`` [-] (fewest off samples), ``voltage_step`` [V].

    Returns
    -------
    The evidence (none where fewer than ``min_on`` off samples have both faces read).
    """
    tc, th, i, v, s = (
        np.asarray(a, dtype=np.float64) for a in (t_cold, t_hot, current, voltage, seebeck)
    )
    off = usable & (i <= options.on_current) & np.isfinite(tc + th + v + s) & (s > 0.0)
    n = int(off.sum())
    if n < options.min_on:
        return OffsetEvidence.nothing()
    dt_true = v[off] / s[off]
    y = (th[off] - tc[off]) - dt_true
    s_mean = float(np.mean(s[off]))
    scatter = math.hypot(float(np.std(y, ddof=1)), options.voltage_step / s_mean) / math.sqrt(n)
    sd = math.hypot(scatter, seebeck_rel_se * float(np.mean(dt_true)))
    a = np.zeros(_N)
    a[1], a[2], a[_V] = -1.0, 1.0, -1.0 / s_mean
    ev = OffsetEvidence.nothing().observe(a, float(np.mean(y)), sd)
    return OffsetEvidence(ev.info, ev.vec, 0, n)


def probe_offsets(
    evidence: OffsetEvidence, *, options: DiagnosticsOptions = DEFAULT_OPTIONS
) -> ProbeOffsets:
    """The probes' offsets relative to the ambient probe, from ``evidence`` and the priors.

    Posterior of the linear Gaussian model (module docstring): precision P = P0 + info,
    mean P⁻¹·vec (prior means zero), offsets A·mean and covariance A·P⁻¹·Aᵀ with A taking
    each probe's offset less the ambient probe's; then ``offset_floor_k`` is added to every
    difference of two probes (each probe, the ambient one included, gets half its square):
    the offsets hold at the temperatures where they were found.

    Parameters
    ----------
    evidence : From :func:`rest_evidence` and :func:`open_circuit_evidence`, summed.
    options : ``probe_offset_k`` [K] and ``voltage_offset`` [V], the priors;
        ``offset_floor_k`` [K].

    Returns
    -------
    The offsets, their covariance, the counts and the basis.

    Raises
    ------
    InsufficientDataError : no rest and no open-circuit voltage seen (the priors stay).
    """
    if evidence.n_rest == 0 and evidence.n_open == 0:
        raise InsufficientDataError(
            "no rest moment and no open-circuit voltage",
            "module never rested long enough, nor floated while off: probe offsets unknown",
        )
    sd_probe = options.probe_offset_k / math.sqrt(2.0)
    prior = np.diag([1.0 / sd_probe**2] * 4 + [1.0 / options.voltage_offset**2])
    cov_b = np.linalg.inv(prior + evidence.info)
    mean_b = cov_b @ evidence.vec
    floor = np.zeros((_N, _N))
    floor[:4, :4] = 0.5 * options.offset_floor_k**2 * np.eye(4)
    cov_b = cov_b + floor
    parts = []
    if evidence.n_rest:
        parts.append(f"{evidence.n_rest} rest moment{'s' if evidence.n_rest > 1 else ''}")
    if evidence.n_open:
        parts.append(f"open-circuit voltage ({evidence.n_open} off samples)")
    return ProbeOffsets(
        offsets=np.asarray(_RELATIVE @ mean_b, dtype=np.float64),
        cov=np.asarray(_RELATIVE @ cov_b @ _RELATIVE.T, dtype=np.float64),
        n_rest=evidence.n_rest,
        n_open=evidence.n_open,
        basis=" and ".join(parts) + "; relative to the ambient probe",
    )
