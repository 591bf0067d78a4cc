"""Electrical fit: module resistance R and Seebeck coefficient S from V = I·R + S·ΔT.

Module equation: Goldsmid (2010), ch. 2; temperature coefficients as in
:func:`..physics.resistance_at_temperature`. At a switch-off the ohmic part I·R disappears at
once while S·ΔT remains, which separates them (T. C. Harman, "Special techniques for
measurement of thermoelectric properties", J. Appl. Phys. 29, 1373, 1958).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import physics
from .._validate import T_25C_K, FloatArray
from ..errors import EstimationError, InsufficientDataError
from .error_budget import electrical_offsets
from .estimates import BoolArray
from .least_squares import ridge, trimmed_lstsq
from .options import DEFAULT_OPTIONS, DiagnosticsOptions
from .seebeck_pool import window_sums

__all__ = [
    "ElectricalFit",
    "detect_floating_driver",
    "fit_electrical",
    "fit_held",
    "floating_from_voltage",
    "harman_steps",
]

#: Smallest plausible module Seebeck coefficient [V/K]: a few couples at ~400 µV/K each.
#: Open-circuit readings below this are taken as a driver that shorts or grounds the module
#: while off (common practice, no source).
MIN_FLOATING_SEEBECK = 2e-3


def detect_floating_driver(
    voltage_off: FloatArray,
    delta_t_off: FloatArray,
    *,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> bool:
    """Whether a module left off shows its open-circuit (Seebeck) voltage.

    A floating module shows V = S·ΔT (Harman 1958); a driver that shorts or grounds it shows
    about 0. Decided on the median of V/ΔT over off samples with |ΔT| >
    ``min_ratio_delta_t_k``, against the smallest plausible module S (a few couples; common
    practice, no source).

    Parameters
    ----------
    voltage_off : Voltage of samples with the module off [V].
    delta_t_off : Th - Tc of the same samples [K].
    options : ``min_ratio_delta_t_k``, the smallest |ΔT| that gives a usable ratio [K].

    Returns
    -------
    True when the off voltage follows S·ΔT.
    """
    v = np.asarray(voltage_off, dtype=np.float64)
    dt = np.asarray(delta_t_off, dtype=np.float64)
    sel = np.abs(dt) > options.min_ratio_delta_t_k
    if sel.sum() < 5:
        return False
    return bool(np.median(v[sel] / dt[sel]) > MIN_FLOATING_SEEBECK)


def floating_from_voltage(
    voltage_off: FloatArray, *, options: DiagnosticsOptions = DEFAULT_OPTIONS
) -> bool:
    """Whether a module left off floats, judged on its voltage alone (no face temperatures).

    A floating module shows V = S·ΔT (Harman 1958), which stays well away from zero while its
    faces differ; a driver that shorts or grounds it reads within the offset of the voltage
    reading. Decided on the median |V| over at least five off samples.

    Parameters
    ----------
    voltage_off : Voltage of samples with the module off [V].
    options : ``floating_min_voltage``, the median |V| above which it floats [V].

    Returns
    -------
    True when the off voltage is that of an open module.
    """
    v = np.abs(np.asarray(voltage_off, dtype=np.float64))
    v = v[np.isfinite(v)]
    if v.size < 5:
        return False
    return bool(np.median(v) > options.floating_min_voltage)


@dataclass(frozen=True)
class ElectricalFit:
    """Module resistance and Seebeck coefficient fitted to V = I·R + S·ΔT.

    Attributes
    ----------
    r25 : Resistance at 25 °C mean module temperature [ohm].
    s25 : Seebeck coefficient at 25 °C mean module temperature [V/K].
    cov : Covariance of (r25, s25) [ohm², ohm·V/K, (V/K)²].
    n_on : On samples used [-].
    n_off : Open-circuit (off, floating) samples used [-].
    residual_v : Residual standard deviation [V].
    reliable : False when the readings could not separate R from S.
    note : Why not, or how the values were obtained.
    r_reliable : R alone is well determined (with S held at its rated value when the
        readings cannot separate them).
    s25_offset_free, s25_offset_free_se : S25 and its standard error fitted with a constant
        voltage offset S·δ + b for the probes' ΔT offset δ and the voltage reading's b [V/K].
        The module's own S; ``s25`` is the S that pairs with ΔT as the probes read it, which
        the heat balances built on those same probes want (their errors then largely cancel
        in the heat taken from the cabinet). Equal to ``s25`` where R and S are not separable.
    r_at_zero_s, r_lever : R25 at a given S25 is ``r_at_zero_s - r_lever·S25``: the fit with S
        held there (see :meth:`r25_at`) [ohm], [K/A].
    r_sd_fixed_s : Standard error of R25 from the readings' scatter alone with S held [ohm].
    current_ok : The current is large enough that its reading's offset does not dominate R.
    sums : The kept rows' normal-equation sums for pooling S over windows
        (:func:`.seebeck_pool.window_sums`) [-].
    """

    r25: float
    s25: float
    cov: FloatArray
    n_on: int
    n_off: int
    residual_v: float
    reliable: bool
    note: str | None
    r_reliable: bool = True
    s25_offset_free: float = math.nan
    s25_offset_free_se: float = math.nan
    r_at_zero_s: float = math.nan
    r_lever: float = math.nan
    r_sd_fixed_s: float = math.nan
    current_ok: bool = True
    sums: tuple[float, ...] = ()

    def r25_at(self, s25: float) -> float:
        """R25 fitted with S25 held at ``s25`` [V/K]: least squares in R alone, so an error
        δS of ``s25`` moves it by -``r_lever``·δS [ohm]."""
        return self.r_at_zero_s - self.r_lever * s25


def neighbour_means(x: FloatArray, on: BoolArray) -> FloatArray:
    """Each row's instrument: the mean of the previous and the next row in the same state.

    A reading's own noise is in its row alone, while the neighbours share its slow part: as
    instruments they remove the bias that noise in the regressors gives least squares
    (errors in variables; Durbin, "Errors in variables", Rev. Int. Stat. Inst. 22, 23, 1954).
    A row alone in its state gets its only neighbour, or itself.

    Parameters
    ----------
    x : Rows of regressors, time-ordered [any].
    on : Whether each row has current (the two states) [-].

    Returns
    -------
    The instruments, shaped as ``x`` [as ``x``].
    """
    z = np.array(x, dtype=np.float64)
    for state in (True, False):
        idx = np.flatnonzero(on == state)
        if idx.size < 2:
            continue
        prev = np.concatenate([idx[1:2], idx[:-1]])
        nxt = np.concatenate([idx[1:], idx[-2:-1]])
        z[idx] = 0.5 * (x[prev] + x[nxt])
    return z


@dataclass(frozen=True)
class _Design:
    # The rows of V = R25·I·f_r + S25·ΔT·f_s kept after one trimmed pass, and what the data
    # alone say about them.
    x: FloatArray  # columns I·f_r [A], ΔT·f_s [K]
    y: FloatArray  # V [V]
    f_r: FloatArray
    f_s: FloatArray
    coef: FloatArray  # (R25, S25) from the data alone
    sigma: float  # residual standard deviation [V]
    xtx: FloatArray
    data_ok: bool  # both pinned to within max_rel_stderr by the data
    note: str | None
    z: FloatArray  # instruments of the columns of x: neighbours in the same state


def _design(
    i: FloatArray,
    v: FloatArray,
    dt: FloatArray,
    tm: FloatArray,
    on: BoolArray,
    off: BoolArray,
    alpha: float,
    beta: float,
    options: DiagnosticsOptions,
) -> _Design:
    rows = on | off
    n_off = int(off.sum())
    min_on = options.min_on
    f_r, f_s = (1.0 + alpha * tm)[rows], (1.0 + beta * tm)[rows]
    x = np.column_stack([i[rows] * f_r, dt[rows] * f_s])
    y = v[rows]
    z = neighbour_means(x, on[rows])
    coef, keep = trimmed_lstsq(x, y)
    x, y, z = x[keep], y[keep], z[keep]
    f_r, f_s = f_r[keep], f_s[keep]
    if int(np.sum(x[:, 0] != 0.0)) < min_on // 2:
        raise InsufficientDataError(
            "most on samples disagree with V = I·R + S·ΔT", "voltage readings inconsistent"
        )
    res = y - x @ coef
    dof = max(y.size - 2, 1)
    sigma = max(float(np.sqrt(res @ res / dof)), 1e-6)
    xtx = x.T @ x
    data_ok = np.linalg.cond(xtx) < 1e12
    rel_se = np.array([np.inf, np.inf])
    if data_ok:
        cov_data = sigma**2 * np.linalg.inv(xtx)
        rel_se = np.sqrt(np.diag(cov_data)) / np.maximum(np.abs(coef), 1e-12)
        data_ok = bool(np.all(rel_se < options.electrical_max_rel_stderr)) and bool(
            np.all(coef > 0.0)
        )
    note: str | None = None
    if not data_ok:
        if n_off == 0 and np.ptp(i[on]) < 0.05 * float(np.mean(i[on])):
            note = "constant current and no open-circuit voltage: R and S not separable"
        else:
            note = "readings do not vary enough to separate R and S"
    return _Design(x, y, f_r, f_s, coef, sigma, xtx, bool(data_ok), note, z)


def _with_prior(
    d: _Design, prior: tuple[float, float, float] | None, max_rel_stderr: float
) -> tuple[FloatArray, FloatArray, bool, str | None]:
    # (R25, S25), their covariance, whether R is pinned, and the note, with the ratings' prior
    # where there is one.
    x, y, sigma, note = d.x, d.y, d.sigma, d.note
    r_ok = d.data_ok
    if prior is not None and not d.data_ok:
        # S barely varies between units of one type and does not wear; hold it at the rated
        # value and fit R alone, carrying the prior's spread on S into R's error.
        _r0, s0, rel = prior
        x0, x1 = x[:, 0], x[:, 1]
        r_fit = float(x0 @ (y - s0 * x1) / (x0 @ x0))
        lever = float(x0 @ x1 / (x0 @ x0))
        var_s = (rel * s0) ** 2
        var_r = sigma**2 / float(x0 @ x0) + lever**2 * var_s
        coef = np.array([r_fit, s0])
        cov = np.array([[var_r, -lever * var_s], [-lever * var_s, var_s]])
        r_ok = math.sqrt(var_r) < 5.0 * max_rel_stderr * abs(r_fit)
        note = f"{note}; S held at the registered ratings"
    elif prior is not None:
        r0, s0, rel = prior
        coef, cov = ridge(x, y, sigma, [r0, s0], [rel * r0, rel * s0])
    elif d.data_ok:
        coef = d.coef
        cov = np.asarray(sigma**2 * np.linalg.inv(d.xtx), dtype=np.float64)
    else:
        raise InsufficientDataError(f"R and S not identifiable: {note}", note)
    if not np.all(coef > 0.0):
        raise EstimationError(f"fitted R25/S25 not positive: {coef}")
    return coef, cov, bool(r_ok), note


def _offset_free_seebeck(
    d: _Design,
    coef: FloatArray,
    cov: FloatArray,
    s_current: float,
    prior: tuple[float, float, float] | None,
    dt_sd: float,
    options: DiagnosticsOptions,
) -> tuple[float, float]:
    # S25 and its error with one more unknown, the constant S·δ + b, with a prior of zero ±
    # its size beside the ratings' priors; the spread of ΔT while the module is off, or across
    # currents, tells it from S. Where R and S are not separable, the S of the fit.
    s_free, s_free_se = float(coef[1]), math.sqrt(max(float(cov[1, 1]), 0.0))
    if d.data_ok:
        c_sd = math.hypot(float(coef[1]) * dt_sd, options.voltage_offset)
        means, sds = [0.0, 0.0, 0.0], [math.inf, math.inf, c_sd]
        if prior is not None:
            means[:2], sds[:2] = [prior[0], prior[1]], [prior[2] * prior[0], prior[2] * prior[1]]
        sol, cov3 = ridge(np.column_stack([d.x, np.ones(d.y.size)]), d.y, d.sigma, means, sds)
        s_free = float(sol[1])
        s_free_se = math.hypot(math.sqrt(max(float(cov3[1, 1]), 0.0)), s_current)
    return s_free, s_free_se


def fit_electrical(
    current: FloatArray,
    voltage: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    usable: BoolArray,
    *,
    floating: bool,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    prior: tuple[float, float, float] | None = None,
    dt_offset_sd: float | None = None,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> ElectricalFit:
    """Fit R25 and S25 to V = R25·I·(1 + α·(Tm - 25 °C)) + S25·ΔT·(1 + β·(Tm - 25 °C)).

    Ordinary least squares over on samples plus, when the driver floats, off samples
    (V_oc = S·ΔT, I = 0). Module equation: Goldsmid (2010), ch. 2; temperature coefficients
    as in :func:`..physics.resistance_at_temperature`.

    With a ``prior`` (R25, S25, relative standard deviation), e.g. from the registered ratings,
    the fit is regularised towards it (Bayesian ridge: prior rows appended to the design); when
    the readings cannot separate R and S, S is held at the prior and R fitted alone. The
    fit is marked unreliable when the data alone cannot pin R25 or S25 to within
    ``electrical_max_rel_stderr`` (constant current with no open-circuit voltage, too few
    samples). The offsets of the current reading and of the probes' ΔT are carried into the
    covariance to first order (:func:`.error_budget.electrical_offsets`); R is marked
    unreliable where the current's offset over its rms value exceeds twice
    ``electrical_max_rel_stderr``.

    Parameters
    ----------
    current : Module current [A].
    voltage : Module voltage [V].
    t_cold, t_hot : Face temperatures [K].
    usable : Samples that may be used [-].
    floating : Whether off samples show the open-circuit voltage [-].
    alpha : Temperature coefficient of R [1/K].
    beta : Temperature coefficient of S [1/K].
    prior : (R25 [ohm], S25 [V/K], relative standard deviation [-]), optional.
    dt_offset_sd : Standard uncertainty of the ΔT offset left after the face temperatures
        were corrected by the probes' estimated offsets, the prior of the offset-free S's
        constant term; None: ``probe_offset_k`` [K].
    options : ``on_current`` [A], ``min_on`` [-], ``electrical_max_rel_stderr`` [-],
        ``current_offset`` [A], ``probe_offset_k`` [K], ``voltage_offset`` [V].

    Returns
    -------
    The fit.

    Raises
    ------
    InsufficientDataError : too few samples, or R and S not separable and no prior.
    """
    max_rel_stderr = options.electrical_max_rel_stderr
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    tc = np.asarray(t_cold, dtype=np.float64)
    th = np.asarray(t_hot, dtype=np.float64)
    dt = th - tc
    tm = 0.5 * (tc + th) - T_25C_K
    on = usable & (i > options.on_current)
    off = usable & (i <= options.on_current) & (np.abs(dt) > 1.0) if floating else np.zeros_like(on)
    n_on, n_off = int(on.sum()), int(off.sum())
    if n_on < options.min_on:
        raise InsufficientDataError(
            f"{n_on} usable on samples, need {options.min_on}", "module hardly ran in this window"
        )
    d = _design(i, v, dt, tm, on, off, alpha, beta, options)
    # R with S held anywhere: off rows carry no current and drop out of these sums.
    x00 = float(d.xtx[0, 0])
    r_at_zero_s, r_lever = float(d.x[:, 0] @ d.y) / x00, float(d.xtx[0, 1]) / x00
    coef, cov, r_ok, note = _with_prior(d, prior, max_rel_stderr)
    dt_sd = options.probe_offset_k if dt_offset_sd is None else dt_offset_sd
    # The stated errors keep the offset prior: narrowed to the estimate's, R25's covered its
    # true error on 85 % of simulated units (constant biases, known truth), not 98 %.
    cov, s_current = electrical_offsets(
        d.x, d.xtx, coef, cov, d.f_r, d.f_s, d.data_ok, options.current_offset,
        options.probe_offset_k,
    )  # fmt: skip
    s_free, s_free_se = _offset_free_seebeck(d, coef, cov, s_current, prior, dt_sd, options)
    i_rms = float(np.sqrt(np.mean(i[on] ** 2)))
    rel_i = options.current_offset / max(i_rms, 1e-12)
    current_ok = rel_i <= 2.0 * max_rel_stderr
    if not current_ok and r_ok:
        r_ok = False
        low = f"current only {i_rms:.2f} A rms: its reading's offset dominates R"
        note = low if note is None else f"{note}; {low}"
    return ElectricalFit(
        r25=float(coef[0]),
        s25=float(coef[1]),
        cov=np.asarray(cov, dtype=np.float64),
        n_on=n_on,
        n_off=n_off,
        residual_v=d.sigma,
        reliable=d.data_ok,
        note=note,
        r_reliable=bool(r_ok),
        s25_offset_free=s_free,
        s25_offset_free_se=s_free_se,
        r_at_zero_s=r_at_zero_s,
        r_lever=r_lever,
        r_sd_fixed_s=d.sigma / math.sqrt(x00),
        current_ok=current_ok,
        sums=tuple(window_sums(d.x, d.y, d.f_s, d.z)),
    )


def harman_steps(
    time_s: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    usable: BoolArray,
    *,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> tuple[FloatArray, FloatArray]:
    """Seebeck coefficient and resistance from each switch-off (Harman's method).

    At a switch-off the ohmic voltage I·R vanishes at once while the Seebeck voltage S·ΔT
    remains (T. C. Harman, J. Appl. Phys. 29, 1373, 1958). With the first off sample
    S = V_off/ΔT_off, and the last on sample then gives R = (V_on - S·ΔT_on)/I_on. Unlike
    Harman's adiabatic bench set-up, ΔT is measured on both sides of the step, so the decay of
    ΔT between samples does not bias S. Needs a driver that leaves the module floating.

    Parameters
    ----------
    time_s : Sample times [s].
    current : Module current [A].
    voltage : Module voltage [V].
    t_cold, t_hot : Face temperatures [K].
    usable : Samples that may be used [-].
    options : ``on_current`` [A]; ``max_gap_s``, the largest time between the two samples of
        a step [s]; ``min_ratio_delta_t_k``, the smallest ΔT after the step that gives a
        usable ratio [K].

    Returns
    -------
    (S per step [V/K], R per step at the mean module temperature of the step [ohm]).
    """
    t = np.asarray(time_s, dtype=np.float64)
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    dt = np.asarray(t_hot, dtype=np.float64) - np.asarray(t_cold, dtype=np.float64)
    on = i > options.on_current
    k = np.flatnonzero(
        on[:-1]
        & ~on[1:]
        & usable[:-1]
        & usable[1:]
        & (np.diff(t) <= options.max_gap_s)
        & (np.abs(dt[1:]) > options.min_ratio_delta_t_k)
    )
    s = v[k + 1] / dt[k + 1]
    r = (v[k] - s * dt[k]) / i[k]
    return s, r


def fit_held(
    r25: float, r25_se: float, s25: float, s25_se: float, n_on: int, *, r_reliable: bool, note: str
) -> ElectricalFit:
    """An electrical result whose R25 and S25 come from elsewhere, with their errors.

    Where the face temperatures are themselves read from the module's voltage
    (:mod:`.module_thermometer`), fitting V = I·R + S·ΔT to them would return the R and S
    they were read with, to rounding: the fit is not repeated. S is not from the data, so the
    result is not called separable (``reliable`` False); R is as reliable as its source says.

    Parameters
    ----------
    r25, r25_se : R25 and its standard error [ohm].
    s25, s25_se : S25 and its standard error [V/K].
    n_on : Samples behind R25 [-].
    r_reliable : Whether R25 is well determined [-].
    note : What the values rest on [-].

    Returns
    -------
    The result, R and S uncorrelated.
    """
    cov = np.diag([r25_se**2, s25_se**2]).astype(np.float64)
    return ElectricalFit(
        r25=r25, s25=s25, cov=cov, n_on=n_on, n_off=0, residual_v=math.nan, reliable=False,
        note=note, r_reliable=r_reliable, s25_offset_free=s25, s25_offset_free_se=s25_se,
    )  # fmt: skip
