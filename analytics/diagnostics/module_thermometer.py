"""The module as its own thermometer: ΔT across the faces from its voltage, where probes lack.

Module equation (H. J. Goldsmid, *Introduction to Thermoelectricity*, Springer, 2010, ch. 2;
D. M. Rowe (ed.), *CRC Handbook of Thermoelectrics*, CRC Press, 1995)::

    V = S(Tm)·ΔT + I·R(Tm)        driven
    V = S(Tm)·ΔT                  floating (open circuit, the Seebeck voltage)

with R(Tm) = R25·(1 + α·(Tm - 25 °C)), S(Tm) = S25·(1 + β·(Tm - 25 °C)) as in
:func:`..physics.resistance_at_temperature`. At a switch-off the ohmic part I·R vanishes at
once while S·ΔT remains (T. C. Harman, "Special techniques for measurement of thermoelectric
properties", J. Appl. Phys. 29, 1373, 1958): R = (V_on - V_off)/I_on needs no face probe,
provided ΔT is the same on both sides of the step. It is, where the faces carry heat
capacity (their sinks) and so change over tens of seconds; V_off is extrapolated back to the
step to remove the decay between samples. Where the faces jump with the current (no heat
capacity to speak of) the step measures S·(ΔT_on - ΔT_off) as well, and no R comes of it.

With R known, ΔT = (V - I·R)/S while driven and V_oc/S while floating, S from the registered
ratings (S barely varies between units of one type and does not wear). With a driver that
shorts or grounds the module while off and no face probes, one equation V = I·R + S·ΔT holds
two unknowns at every sample: R and S are not separable (:class:`NotSeparableError`).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import TypeAlias

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import minimize, minimize_scalar

from .. import physics
from .._validate import T_25C_K, FloatArray
from ..errors import InsufficientDataError
from .cabinet import cooling_lost
from .electrical import neighbour_means
from .estimates import BoolArray
from .options import DEFAULT_OPTIONS, DiagnosticsOptions

__all__ = [
    "FaceReconstruction",
    "NotSeparableError",
    "StepResistance",
    "balance_resistance",
    "delta_t_from_hot_face",
    "floating_without_faces",
    "reconstruct_delta_t",
    "reconstruct_faces",
    "step_resistance",
    "unanchored_faces",
    "unanchored_mean_temperature",
]


class NotSeparableError(InsufficientDataError):
    """R25 and S cannot be told apart from these readings (no open-circuit voltage and no
    face probes): V = I·R + S·ΔT is one equation in two unknowns at every sample."""


def floating_without_faces(
    voltage_off: FloatArray, *, options: DiagnosticsOptions = DEFAULT_OPTIONS
) -> bool:
    """Whether a module left off shows a voltage, judged without face probes.

    A floating module shows V_oc = S·ΔT, tenths of a volt for the few kelvin an idle module
    holds (Harman 1958); a driver that shorts or grounds it reads zero within the converter's
    step.

    Parameters
    ----------
    voltage_off : Voltage of usable samples with the module off [V].
    options : ``min_floating_voltage`` [V].

    Returns
    -------
    True when most off samples show more than ``min_floating_voltage``.
    """
    v = np.abs(np.asarray(voltage_off, dtype=np.float64))
    v = v[np.isfinite(v)]
    if v.size < 5:
        return False
    return bool(np.median(v) > options.min_floating_voltage)


@dataclass(frozen=True)
class StepResistance:
    """Module resistance from switch-off steps, without face probes.

    Attributes
    ----------
    r25 : Median of the steps' R referred to 25 °C [ohm].
    r25_se : Its standard error: the steps' scatter, the extrapolation to the unknown switch
        instant, the mean module temperature's uncertainty through α, and the current
        reading's offset [ohm].
    n_steps : Steps used [-].
    reliable : ``r25_se`` within ``step_r_max_rel_stderr`` of ``r25``.
    note : Why not reliable, else None.
    drift_per_day : R25's relative change per day across the window, where the cold face's
        balance gave it (0 from the steps) [1/day].
    decay_ratio : Without face probes, how many times faster the open-circuit voltage fell
        after the switch-offs than the cabinet's and ambient's drift explains (the faces held
        heat across the steps); None where a hot probe judged that [-].
    change_se : The part of ``r25_se`` left in R25's changes against the unit's own
        earlier windows, the steps' scatter: the decay's curvature, Tm's offset and the
        current reading's offset are much the same in every window; None: all of it [ohm].
    """

    r25: float
    r25_se: float
    n_steps: int
    reliable: bool
    note: str | None
    drift_per_day: float = 0.0
    decay_ratio: float | None = None
    change_se: float | None = None


IntArray: TypeAlias = NDArray[np.intp]


def _switch_offs(t: FloatArray, on: BoolArray, usable: BoolArray, max_gap_s: float) -> IntArray:
    # Last on sample k of each switch-off followed by three usable off samples, gaps in bounds.
    n = on.size
    if n < 4:
        return np.zeros(0, dtype=np.intp)
    k = np.arange(n - 3)
    ok = on[k] & usable[k]
    for j in (1, 2, 3):
        ok &= ~on[k + j] & usable[k + j] & (t[k + j] - t[k + j - 1] <= max_gap_s)
    return k[ok]


def _faces_jump(
    th: FloatArray, k: FloatArray | np.ndarray, options: DiagnosticsOptions
) -> BoolArray:
    # A hot probe that jumps across the step far more than it moves over the next interval:
    # the faces follow the current within a sample, and ΔT is not continuous at the step.
    jump = np.abs(th[k + 1] - th[k])
    after = np.abs(th[k + 2] - th[k + 1])
    return np.asarray(
        jump > options.step_jump_ratio * after + options.step_jump_floor_k, dtype=np.bool_
    )


def _open_circuit_decay(
    v: FloatArray, t_cabinet: FloatArray, t_ambient: FloatArray, k: IntArray, s25: float
) -> float:
    # How many times faster the open-circuit voltage falls over the first interval after the
    # switch-offs k than S·|δ(Ta - Tcab)| explains (medians over the steps), the off state's
    # ΔT following the ambient's lead over the cabinet at most one to one; one voltage
    # quantum of 10 mV (common practice, no source) keeps a flat trace from dividing by zero.
    lead = np.asarray(t_ambient, dtype=np.float64) - np.asarray(t_cabinet, dtype=np.float64)
    fall = float(np.median(v[k + 1] - v[k + 2]))
    drift = float(np.median(s25 * np.abs(lead[k + 2] - lead[k + 1])))
    return fall / (drift + 0.01)


def _step_mean_temperature(
    dt_step: FloatArray,
    t_cabinet: FloatArray,
    t_ambient: FloatArray,
    t_hot: FloatArray | None,
    s_rel: float,
    probe_sd: float,
) -> tuple[FloatArray, FloatArray]:
    # Tm at each step and its sd, with ΔT there from the open-circuit voltage (no R needed):
    # Th - ΔT/2 where the hot face is probed, else the middle of cabinet and ambient.
    if t_hot is not None:
        return t_hot - 0.5 * dt_step, np.hypot(0.5 * s_rel * dt_step, probe_sd)
    return 0.5 * (t_cabinet + t_ambient), _unanchored_sd(dt_step, t_cabinet, t_ambient, probe_sd)


def step_resistance(
    time_s: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    t_cabinet: FloatArray,
    t_ambient: FloatArray,
    t_hot: FloatArray | None,
    usable: BoolArray,
    *,
    s25: float,
    k25: float | None = None,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> StepResistance:
    """R25 from switch-off steps of a floating driver, without a cold-side probe.

    At each step, R = (V_on - V_off)/I_on (Harman 1958), V_on the last on sample, V_off the
    first two off samples extrapolated linearly back to the middle of the interval holding
    the switch. Carried as the extrapolation's uncertainty: the unknown switch instant (the
    slope over that interval times 1/√12, a uniform instant) and the decay's curvature (a
    quadratic through the first three off samples departs from the line by 3/8 of their
    second difference half an interval before the first). Against simulated coolers with
    known truth and one-minute samples the steps' R25 came within 1 % where the sinks' time
    constants were several minutes (500/1500 J/K), and scattered by ±3 % at about one minute
    (150/400 J/K). R is referred to 25 °C with R25 = R/(1 + α·(Tm - 25 °C))
    (:func:`..physics.resistance_at_25c`); ΔT at the step is V_off/S, so Tm needs no R:
    Th - ΔT/2 with a hot probe, else, with K known, from how the sinks share ΔT
    (:func:`unanchored_mean_temperature`; the middle of cabinet and ambient read simulated
    units' R25 1.5-2 % high, their faces' mean lying 2-6 K above it while the module ran),
    or the middle of cabinet and ambient within the bound of :func:`reconstruct_faces`; its
    standard deviation carried through α. With a hot probe, steps across which it jumps
    (faces that follow the current within a sample) are left out.

    Parameters
    ----------
    time_s : Sample times [s].
    current : Module current [A].
    voltage : Module voltage [V].
    t_cabinet, t_ambient : Cabinet air and ambient [K].
    t_hot : Hot-face temperature, None where not probed [K].
    usable : Samples that may be used [-].
    s25 : Module Seebeck coefficient at 25 °C, e.g. from the ratings [V/K].
    k25 : Module thermal conductance, e.g. from the ratings; None: Tm without it [W/K].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : ``on_current`` [A], ``max_gap_s`` [s], ``min_steps`` [-], ``sink_ratio_range`` [-],
        ``step_jump_ratio`` [-], ``step_jump_floor_k`` [K], ``current_offset`` [A],
        ``step_r_max_rel_stderr`` [-], ``seebeck_unit_rel_sd`` [-], ``probe_offset_k`` [K].

    Returns
    -------
    The resistance and its error.

    Raises
    ------
    InsufficientDataError : fewer than ``min_steps`` usable switch-off steps.
    """
    t = np.asarray(time_s, dtype=np.float64)
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    th = None if t_hot is None else np.asarray(t_hot, dtype=np.float64)
    on = i > options.on_current
    k = _switch_offs(t, on, usable, options.max_gap_s)
    if th is not None and k.size:
        k = k[~_faces_jump(th, k, options)]
    if k.size < options.min_steps:
        raise InsufficientDataError(
            f"{k.size} switch-off steps with three off samples after them, need "
            f"{options.min_steps}",
            "too few switch-offs followed by the module's open-circuit voltage",
        )
    decay = None
    if th is None:
        decay = _open_circuit_decay(v, t_cabinet, t_ambient, k, s25)
        if decay < options.step_decay_min_ratio:
            raise InsufficientDataError(
                f"open-circuit voltage falls {decay:.1f}x what the cabinet's drift explains",
                "the module's open-circuit voltage does not relax after its switch-offs: its "
                "faces follow the current within a sample (no heat capacity to speak of), so "
                "the switch-off steps do not give R",
            )
    gap, gap2 = t[k + 1] - t[k], t[k + 2] - t[k + 1]
    slope = (v[k + 1] - v[k + 2]) / gap2
    v_step = v[k + 1] + slope * 0.5 * gap
    tm, tm_sd = _step_mean_temperature(
        v_step / s25, np.asarray(t_cabinet, dtype=np.float64)[k],
        np.asarray(t_ambient, dtype=np.float64)[k], None if th is None else th[k],
        options.seebeck_unit_rel_sd, options.probe_offset_k,
    )  # fmt: skip
    f_r = 1.0 + alpha * (tm - T_25C_K)
    r25_steps = (v[k] - v_step) / (i[k] * f_r)
    r25 = float(np.median(r25_steps))
    if th is None and k25 is not None:
        # Tm from how the sinks share ΔT, at this first R25 (R moves it by ½·I²·δR only).
        tm, tm_sd = unanchored_mean_temperature(
            v_step / s25, np.asarray(t_cabinet, dtype=np.float64)[k],
            np.asarray(t_ambient, dtype=np.float64)[k], i[k], v[k], r25=r25, s25=s25,
            k=k25, alpha=alpha, beta=beta, options=options,
        )  # fmt: skip
        f_r = 1.0 + alpha * (tm - T_25C_K)
        r25_steps = (v[k] - v_step) / (i[k] * f_r)
        r25 = float(np.median(r25_steps))
    # The median of n normal values has a standard error of about 1.25·sd/√n.
    scatter = 1.2533 * float(np.std(r25_steps, ddof=1)) / math.sqrt(k.size)
    # Systematic, the same at every step: the unknown switch instant and the decay's
    # curvature, Tm through α, the current reading's offset.
    curve = 0.375 * np.abs(v[k + 1] - 2.0 * v[k + 2] + v[k + 3])
    instant = np.abs(slope) * gap / math.sqrt(12.0)
    extrap = float(np.median(np.hypot(instant, curve) / (i[k] * f_r)))
    temp = r25 * alpha * float(np.median(tm_sd / f_r))
    cur = r25 * options.current_offset / float(np.sqrt(np.mean(i[k] ** 2)))
    se = math.sqrt(scatter**2 + extrap**2 + temp**2 + cur**2)
    reliable = se <= options.step_r_max_rel_stderr * abs(r25)
    note = None
    if not reliable:
        note = f"R from {k.size} switch-off steps only within ±{100 * se / abs(r25):.1f} %"
    return StepResistance(
        r25, se, int(k.size), reliable, note, decay_ratio=decay, change_se=scatter
    )


def _balance_ssr(
    r25: float | FloatArray,
    rows: tuple[FloatArray, ...],
    s25: float,
    alpha: float,
    beta: float,
    options: DiagnosticsOptions,
) -> tuple[float, float, int]:
    # The cold face's balance at R25 = r25 (one per row where it moves), instrumented: the
    # residual's part the instruments explain [K²] (the criterion R25 minimises), the
    # residual sum of squares [K²] and the rows used.
    i, v, tcab, th = rows
    r = np.broadcast_to(np.asarray(r25, dtype=np.float64), i.shape)
    dt = delta_t_from_hot_face(i, v, th, True, r, s25, alpha=alpha, beta=beta, options=options)
    ok = np.isfinite(dt)
    i, dt, th, tcab, r = i[ok], dt[ok], th[ok], tcab[ok], r[ok]
    x = th - 0.5 * dt - T_25C_K
    tc = th - dt
    q = s25 * (1.0 + beta * x) * i * tc - 0.5 * i**2 * r * (1.0 + alpha * x)
    a = np.column_stack([q, -dt])
    on = i > options.on_current
    # More instruments than unknowns: a wrong R25 leaves a residual in step with the current
    # (I·δR/S), which the current's, the cabinet's and the hot face's neighbours reveal.
    z = np.column_stack([
        neighbour_means(np.column_stack([q, -dt, i, tcab, th]), on), on, np.ones(i.size),
    ])  # fmt: skip
    a = np.column_stack([a, np.ones(i.size)])
    y = tcab - tc
    # Two-stage least squares: the regressors' part the instruments explain, then the fit.
    a_hat = z @ np.linalg.lstsq(z, a, rcond=None)[0]
    coef = np.linalg.lstsq(a_hat, y, rcond=None)[0]
    res = y - a @ coef
    explained = z @ np.linalg.lstsq(z, res, rcond=None)[0]
    return float(explained @ explained), float(res @ res), int(ok.sum())


@dataclass(frozen=True)
class _Balance:
    """The cold face's balance over a window's rows (current [A], voltage [V], cabinet and
    hot face [K]), their times from the driven samples' mean ``tau`` [day], at ``s25``
    [V/K], searched about ``r25_guess`` [ohm]."""

    rows: tuple[FloatArray, ...]
    tau: FloatArray
    s25: float
    r25_guess: float
    alpha: float
    beta: float
    options: DiagnosticsOptions

    def ssr(self, r25: float | FloatArray) -> tuple[float, float, int]:
        # See _balance_ssr.
        return _balance_ssr(r25, self.rows, self.s25, self.alpha, self.beta, self.options)

    def r25_at(self, x: FloatArray) -> FloatArray:
        # R25 of each row at r25_guess·(1 + x[0]) moving by x[1] per day [ohm].
        return self.r25_guess * (1.0 + float(x[0])) * (1.0 + float(x[1]) * self.tau)

    def crit(self, x: FloatArray) -> float:
        # The balance's criterion there [K²].
        return self.ssr(self.r25_at(x))[0]


def _flat_fit(bal: _Balance) -> float:
    # R25 held across the window by a bounded search (±30 % of the guess) [ohm].
    res = minimize_scalar(
        lambda r: bal.ssr(r)[0],
        bounds=(0.7 * bal.r25_guess, 1.3 * bal.r25_guess), method="bounded",
        options={"xatol": 1e-5 * bal.r25_guess},
    )  # fmt: skip
    return float(res.x)


def _drift_fit(bal: _Balance, start: FloatArray, reach: float = 1.0) -> FloatArray:
    # (R25/r25_guess - 1, drift per day) minimising the criterion from ``start``,
    # Nelder-Mead within ±30 % and ±balance_max_drift_per_day, the first simplex 2 % of R25
    # and a fifth of the drift's bound wide times ``reach`` (smaller from a nearby optimum).
    g_max = bal.options.balance_max_drift_per_day
    x0 = np.clip(start, [-0.3, -g_max], [0.3, g_max])
    simplex = x0 + np.array([[0.0, 0.0], [0.02 * reach, 0.0], [0.0, 0.2 * g_max * reach]])
    res = minimize(
        bal.crit, x0, method="Nelder-Mead", bounds=[(-0.3, 0.3), (-g_max, g_max)],
        options={"initial_simplex": simplex, "xatol": 1e-4, "fatol": 1e-4},
    )  # fmt: skip
    return np.asarray(res.x, dtype=np.float64)


def _curvature(
    x0: FloatArray, crit: Callable[[FloatArray], float], scale: FloatArray
) -> tuple[FloatArray, FloatArray]:
    # Gradient and Hessian of ``crit`` at ``x0`` by central differences of ``scale``.
    m = x0.size
    c0 = crit(x0)
    grad, hess = np.zeros(m), np.zeros((m, m))
    for a in range(m):
        ea = np.eye(m)[a] * scale[a]
        up, down = crit(x0 + ea), crit(x0 - ea)
        grad[a] = (up - down) / (2.0 * scale[a])
        hess[a, a] = (up - 2.0 * c0 + down) / scale[a] ** 2
        for b in range(a):
            eb = np.eye(m)[b] * scale[b]
            hess[a, b] = hess[b, a] = (
                crit(x0 + ea + eb) - crit(x0 + ea - eb) - crit(x0 - ea + eb)
                + crit(x0 - ea - eb)
            ) / (4.0 * scale[a] * scale[b])  # fmt: skip
    return grad, hess


def _half_hessian_inverse(hess: FloatArray) -> FloatArray:
    # (½·H)⁻¹, for σ²·(½·H)⁻¹ as in least squares; inf where the criterion is not curved
    # upwards.
    if not (np.all(np.isfinite(hess)) and np.all(np.linalg.eigvalsh(hess) > 0.0)):
        return np.full(hess.shape, math.inf)
    return np.asarray(np.linalg.inv(0.5 * hess), dtype=np.float64)


def _held_or_drifting(
    bal: _Balance, r25_recent: float | None = None
) -> tuple[float, float, float, float]:
    # R25 [ohm] held across the window or moving by a drift [1/day] (0 where held), the
    # scatter part of its standard error [ohm] and the balance's residual sd [K]. The drift
    # is kept where it lowers the criterion by more than σ²·ln n (G. Schwarz, Ann. Statist.
    # 6(2), 1978: one more parameter), so a steady module keeps the held fit's precision,
    # and, where the unit's recent windows give R25 (``r25_recent`` [ohm]), where it puts
    # R25 at the window's middle no further from theirs than the held fit does: wear moves
    # R25 by a few per cent over weeks, so a drift that moves this window's R25 away from
    # the last days' has traded against R25 to absorb some other misfit of the balance.
    # The drift is fitted only where the held fit's quadratic model (its gradient and
    # curvature in the drift, ½·dᵀH⁻¹d) promises half that drop or where it is not curved
    # upwards: most windows of a steady module are spared the two-parameter search.
    def sigma_at(x: FloatArray, dof: int) -> float:
        _, ssr, used = bal.ssr(bal.r25_at(x))
        return math.sqrt(ssr / max(used - dof, 1))

    crit, guess, step = bal.crit, bal.r25_guess, np.array([1e-3, 1e-3])
    flat = np.array([_flat_fit(bal) / guess - 1.0, 0.0])
    grad, hess = _curvature(flat, crit, step)
    cov = _half_hessian_inverse(hess)
    sigma, penalty = sigma_at(flat, 4), math.log(bal.rows[0].size)
    x, cov_r = flat, _half_hessian_inverse(hess[:1, :1])[0, 0]
    promised = 0.25 * float(grad @ cov @ grad) if np.all(np.isfinite(cov)) else math.inf
    if promised > 0.5 * sigma**2 * penalty:
        moving = _drift_fit(bal, np.zeros(2))
        sigma_m = sigma_at(moving, 5)
        r_held, r_moving = guess * (1.0 + float(flat[0])), guess * (1.0 + float(moving[0]))
        nearer = r25_recent is None or abs(r_moving - r25_recent) <= abs(r_held - r25_recent)
        if crit(flat) - crit(moving) > sigma_m**2 * penalty and nearer:
            x, sigma = moving, sigma_m
            cov_r = _half_hessian_inverse(_curvature(moving, crit, step)[1])[0, 0]
    scatter = guess * sigma * math.sqrt(cov_r) if math.isfinite(cov_r) else math.inf
    return guess * (1.0 + float(x[0])), float(x[1]), scatter, sigma


def balance_resistance(
    time_s: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    t_cabinet: FloatArray,
    t_hot: FloatArray,
    usable: BoolArray,
    *,
    s25: float,
    r25_guess: float,
    r25_recent: float | None = None,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> StepResistance:
    """R25 from the cold face's heat balance, with the hot face probed and no cold probe.

    Where the faces carry no heat capacity to speak of they follow the current within a
    sample and no switch-off step gives R; instead every sample holds the cold face's steady
    balance (Goldsmid 2010, ch. 2; the cold side's path as in :mod:`..heat_paths`)::

        (Tcab - Tc)/r_cold = S·I·Tc - ½·I²·R - K·(Th - Tc),   Tc = Th - ΔT,

    with ΔT read from the voltage at a trial R25 (:func:`delta_t_from_hot_face`; V_oc/S
    while floating). At a given R25 this is linear in r_cold, K·r_cold and a constant (the
    probes' offsets): Tcab - Tc = r_cold·Q - K·r_cold·ΔT + c. A wrong R25 shifts ΔT by
    I·δR/S on the driven samples only, which no choice of the three can absorb once current,
    cabinet and ambient vary; R25 minimises the balance's residual (a bounded
    one-dimensional search, ``scipy.optimize.minimize_scalar``, then with the drift below by
    ``scipy.optimize.minimize``, Nelder-Mead within bounds).

    A module that wears changes R25 within the window, and the balance is that sensitive to
    it: a constant R25 leaves a residual in step with the current that grows along the
    window (δΔT = I·R25·g·(t - t0)/S, about 1 K per per cent of R), which no constant R25
    absorbs. So R25 is allowed to move linearly across the window,
    R25(t) = R25·(1 + g·(t - t0)), t0 the mean time of the driven samples (where R25 is
    served), g within ±``balance_max_drift_per_day``, kept where Schwarz's criterion pays for
    it and, given the unit's recent R25, where it does not move R25 further from that than
    the held fit (a drift that does has absorbed some other misfit: wear is slow). Its
    standard error: the criterion's curvature in (R25, g), σ²·(½·H)⁻¹ (the profile's
    curvature over the drift, as for any least-squares pair), and S's spread between units
    (``seebeck_unit_rel_sd``) carried by refitting at S·(1 ± it).

    Parameters
    ----------
    time_s : Sample times [s].
    current : Module current [A].
    voltage : Module voltage [V].
    t_cabinet : Cabinet air [K].
    t_hot : Hot face [K].
    usable : Samples that may be used (off ones only where the driver floats) [-].
    s25 : Registered ratings' S25 [V/K].
    r25_guess : Registered ratings' R25, the middle of the search (±30 %) [ohm].
    r25_recent : R25 of the unit's recent windows, where known [ohm].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : ``on_current`` [A], ``min_on`` [-], ``seebeck_unit_rel_sd`` [-],
        ``step_r_max_rel_stderr`` [-], ``balance_max_residual_k`` [K],
        ``balance_max_drift_per_day`` [1/day].

    Returns
    -------
    The resistance at the driven samples' mean time, its error and its drift
    (``n_steps``: the samples behind it).

    Raises
    ------
    InsufficientDataError : fewer than ``min_on`` driven samples.
    """
    i = np.asarray(current, dtype=np.float64)
    ok = np.asarray(usable, dtype=bool) & np.isfinite(i) & np.isfinite(t_hot)
    ok &= np.isfinite(voltage) & np.isfinite(t_cabinet) & np.isfinite(time_s)
    driven = ok & (i > options.on_current)
    if int(driven.sum()) < options.min_on:
        raise InsufficientDataError(
            "too few driven samples for the cold face's balance", "module hardly ran"
        )
    rows = tuple(np.asarray(x, dtype=np.float64)[ok] for x in (i, voltage, t_cabinet, t_hot))
    t = np.asarray(time_s, dtype=np.float64)
    tau = (t[ok] - float(np.mean(t[driven]))) / 86_400.0
    bal = _Balance(rows, tau, s25, r25_guess, alpha, beta, options)
    r25, drift, scatter, sigma = _held_or_drifting(bal, r25_recent)
    ds = options.seebeck_unit_rel_sd
    at_s = [replace(bal, s25=s25 * (1.0 + e)) for e in (ds, -ds)]
    if drift == 0.0:
        ends = [_flat_fit(b) for b in at_s]
    else:
        start = np.array([r25 / r25_guess - 1.0, drift])
        ends = [r25_guess * (1.0 + _drift_fit(b, start, reach=0.25)[0]) for b in at_s]
    s_part = 0.5 * abs(ends[0] - ends[1])
    se = math.hypot(scatter, s_part)
    on = rows[0] > options.on_current
    k = np.flatnonzero(on[:-2] & ~on[1:-1] & ~on[2:])  # switch-offs with two off samples
    # Faces that store heat move smoothly across a switch-off, and a slow drift fits a steady
    # balance with the wrong R: the hot probe must jump at most switch-offs, where the unit
    # switches at all.
    smooth = k.size >= options.min_steps and float(np.mean(_faces_jump(rows[3], k, options))) < 0.5
    fits = sigma <= options.balance_max_residual_k and not smooth
    reliable = fits and se <= options.step_r_max_rel_stderr * r25
    note = None
    if not fits:
        note = (
            f"the cold face's steady balance leaves {sigma:.2f} K unexplained"
            + (" and the hot face moves smoothly across the switch-offs" if smooth else "")
            + ": the faces store heat, so their balance is not steady"
        )
    elif not reliable:
        note = f"R from the cold face's balance only within ±{100 * se / r25:.1f} %"
    return StepResistance(r25, se, int(ok.sum()), reliable, note, drift)


def reconstruct_delta_t(
    current: FloatArray,
    voltage: FloatArray,
    t_mean_k: FloatArray,
    floating: bool,
    r25: float,
    r25_se: float,
    s25: float,
    s25_rel_sd: float,
    *,
    t_mean_sd_k: FloatArray | float = 0.0,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> tuple[FloatArray, FloatArray]:
    """ΔT = Th - Tc from the module's voltage: (V - I·R(Tm))/S(Tm) driven, V/S(Tm) floating.

    Goldsmid (2010), ch. 2; Harman (1958) for the open circuit. Off samples of a driver that
    shorts or grounds the module carry no ΔT and come back NaN. The standard error carries
    R25's through I·R/S, S's relative spread through ΔT itself, the voltage reading's offset
    over S, and Tm's through R(Tm) and S(Tm): (I·R25·α + ΔT·S25·β)/S per kelvin, about 1 K of
    ΔT per kelvin of Tm for a module driven near its rated current (first order,
    JCGM 100:2008 eq. (13)).

    Parameters
    ----------
    current : Module current [A].
    voltage : Module voltage [V].
    t_mean_k : Mean module temperature [K].
    floating : Whether off samples show the open-circuit voltage [-].
    r25 : Module resistance at 25 °C [ohm].
    r25_se : Its standard error [ohm].
    s25 : Module Seebeck coefficient at 25 °C [V/K].
    s25_rel_sd : Relative standard deviation of ``s25`` [-].
    t_mean_sd_k : Standard deviation of ``t_mean_k`` [K].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : ``on_current`` [A], ``voltage_offset`` [V].

    Returns
    -------
    (ΔT [K], its standard error [K]).
    """
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    tm = np.asarray(t_mean_k, dtype=np.float64) - T_25C_K
    on = i > options.on_current
    f_r, s_t = 1.0 + alpha * tm, s25 * (1.0 + beta * tm)
    ohmic = np.where(on, i * r25 * f_r, 0.0)
    dt = (v - ohmic) / s_t
    if not floating:
        dt = np.where(on, dt, np.nan)
    # R25 without a finite error (a flat balance) leaves the driven ΔT unknown (inf); the
    # off samples carry none of R's error, whatever it is.
    with np.errstate(invalid="ignore"):
        r_part = np.where(on, i * r25_se * f_r / s_t, 0.0)
    tm_part = (np.where(on, i * r25 * alpha, 0.0) + dt * s25 * beta) / s_t * t_mean_sd_k
    se = np.sqrt(
        r_part**2 + (dt * s25_rel_sd) ** 2 + (options.voltage_offset / s_t) ** 2 + tm_part**2
    )
    return np.asarray(dt, dtype=np.float64), np.asarray(se, dtype=np.float64)


@dataclass(frozen=True)
class FaceReconstruction:
    """The faces as the module's voltage gives them, where probes lack.

    Attributes
    ----------
    delta_t, delta_t_se : ΔT = Th - Tc and its standard error [K] (NaN where not known).
    t_cold, t_cold_se : Cold face, Th - ΔT where the hot face is probed, else NaN [K].
    t_mean, t_mean_sd : Mean module temperature behind R(Tm) and S(Tm) and its standard
        deviation [K].
    step : The resistance the voltage was read with.
    basis : What the reconstruction rests on, in words.
    """

    delta_t: FloatArray
    delta_t_se: FloatArray
    t_cold: FloatArray
    t_cold_se: FloatArray
    t_mean: FloatArray
    t_mean_sd: FloatArray
    step: StepResistance
    basis: str


def _unanchored_sd(
    dt: FloatArray, t_cabinet: FloatArray, t_ambient: FloatArray, probe_sd: float
) -> FloatArray:
    # Without a hot probe Tm is taken as (Ta + Tcab)/2: Th = Ta + rise_h, Tc = Tcab - rise_c
    # give Tm = (Ta + Tcab)/2 + (rise_h - rise_c)/2 with |rise_h - rise_c| <= rise_h + rise_c
    # = ΔT - (Ta - Tcab), taken as uniform over that.
    spread = np.maximum(np.nan_to_num(dt, nan=0.0) - (t_ambient - t_cabinet), 0.0)
    return np.asarray(np.hypot(spread / (2.0 * math.sqrt(3.0)), probe_sd), dtype=np.float64)


def unanchored_mean_temperature(
    delta_t: FloatArray,
    t_cabinet: FloatArray,
    t_ambient: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    *,
    r25: float,
    s25: float,
    k: float,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> tuple[FloatArray, FloatArray]:
    """The module's mean temperature where no face is probed, from how its sinks share ΔT.

    The faces sit beyond the sinks, Th = Ta + r_hot·Qh and Tc = Tcab - r_cold·Qc (the heat
    paths of :mod:`..heat_paths`), so the sinks' rises add up to a known
    D = ΔT - (Ta - Tcab) = r_hot·Qh + r_cold·Qc, and with ρ = r_hot/r_cold::

        Tm = (Ta + Tcab)/2 + (r_hot·Qh - r_cold·Qc)/2
           = (Ta + Tcab)/2 + D·(ρ·Qh - Qc) / (2·(ρ·Qh + Qc)),

    Qh = Qc + V·I (first law at the module), Qc = S·I·Tc - ½·I²·R - K·ΔT (Goldsmid 2010,
    ch. 2), with S and R at Tm and Tc = Tm - ΔT/2 (three fixed-point passes: Tm moves Qc by
    S·I per kelvin, a few per cent of it). Off, Qh = Qc = -K·ΔT. While the module cools the
    hot sink carries two to four times the cold one's heat, so Tm lies above the middle of
    cabinet and ambient by kelvins. ρ is not known without a face probe: it is taken as
    uniform over ``sink_ratio_range``, Tm halfway between its values at the range's ends
    and their half-difference over √3 carried as its standard deviation, with the probes'
    offset. Where ρ·Qh + Qc is near zero or of the other sign than D the split is not
    defined, and Tm is the middle within the second law's bound (as without K).

    Parameters
    ----------
    delta_t : ΔT = Th - Tc [K].
    t_cabinet, t_ambient : Cabinet air and ambient [K].
    current : Module current [A].
    voltage : Module voltage [V].
    r25 : Module resistance at 25 °C [ohm].
    s25 : Module Seebeck coefficient at 25 °C [V/K].
    k : Module thermal conductance [W/K].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : ``on_current`` [A], ``sink_ratio_range`` [-], ``probe_offset_k`` [K].

    Returns
    -------
    (Tm [K], its standard deviation [K]).
    """
    dt = np.asarray(delta_t, dtype=np.float64)
    tcab, ta = np.asarray(t_cabinet, dtype=np.float64), np.asarray(t_ambient, dtype=np.float64)
    i = np.where(np.asarray(current, dtype=np.float64) > options.on_current, current, 0.0)
    power = i * np.asarray(voltage, dtype=np.float64)
    mid, d = 0.5 * (ta + tcab), dt - (ta - tcab)
    shifts, defined = [], np.ones(dt.shape, dtype=bool)
    for rho in options.sink_ratio_range:
        tm = mid.copy()
        for _ in range(3):
            x = tm - T_25C_K
            qc = (
                s25 * (1.0 + beta * x) * i * (tm - 0.5 * dt)
                - 0.5 * i**2 * r25 * (1.0 + alpha * x)
                - k * dt
            )
            den = rho * (qc + power) + qc
            # Near zero (within 5 % of the flows) the sinks' share is not defined.
            ok = np.abs(den) > 0.05 * (np.abs(qc) + power) + 1e-9
            shift = np.where(ok, 0.5 * d * (rho * (qc + power) - qc) / np.where(ok, den, 1.0), 0.0)
            tm = mid + shift
        defined &= ok & (den * d > 0.0) & np.isfinite(shift)
        shifts.append(shift)
    tm = mid + 0.5 * (shifts[0] + shifts[1])
    sd = np.hypot(0.5 * np.abs(shifts[1] - shifts[0]) / math.sqrt(3.0), options.probe_offset_k)
    fallback = _unanchored_sd(dt, tcab, ta, options.probe_offset_k)
    return (
        np.asarray(np.where(defined, tm, mid), dtype=np.float64),
        np.asarray(np.where(defined, sd, fallback), dtype=np.float64),
    )


def unanchored_faces(
    current: FloatArray,
    voltage: FloatArray,
    t_cabinet: FloatArray,
    t_ambient: FloatArray,
    *,
    r25: float,
    s25: float,
    k: float,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> tuple[FloatArray, FloatArray]:
    """Both faces of a floating module with no face probe, placed by an assumed share of
    the sinks: Th = Tm + ΔT/2 and Tc = Tm - ΔT/2.

    ΔT is read from the voltage at R25, V = S·ΔT + I·R (Goldsmid 2010, ch. 2; V = S·ΔT off),
    and Tm from how the sinks share D = ΔT - (Ta - Tcab) at the middle of
    ``sink_ratio_range`` (:func:`unanchored_mean_temperature`). The hot sink's rise above the
    ambient, Th - Ta, is then D·ρ·Qh/(ρ·Qh + Qc), right where the unit's ratio ρ of the
    sinks' resistances is the assumed one and off by a steady factor where it is not: its
    changes hold (a failed fan's tripled r_hot raises it by more than half), not its level.

    Parameters
    ----------
    current : Module current [A].
    voltage : Module voltage [V].
    t_cabinet, t_ambient : Cabinet air and ambient [K].
    r25 : Module resistance at 25 °C [ohm].
    s25 : Module Seebeck coefficient at 25 °C [V/K].
    k : Module thermal conductance [W/K].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : ``on_current`` [A], ``sink_ratio_range`` [-], ``probe_offset_k`` [K].

    Returns
    -------
    (Th [K], Tc [K]); NaN where the voltage gives no ΔT.
    """
    tcab, ta = np.asarray(t_cabinet, dtype=np.float64), np.asarray(t_ambient, dtype=np.float64)
    dt, tm, _ = _faces_at(
        np.asarray(current, dtype=np.float64), np.asarray(voltage, dtype=np.float64), tcab, ta,
        None, r25, s25, alpha, beta, options, k,
    )  # fmt: skip
    return tm + 0.5 * dt, tm - 0.5 * dt


def delta_t_from_hot_face(
    current: FloatArray,
    voltage: FloatArray,
    t_hot: FloatArray,
    floating: bool,
    r25: float | FloatArray,
    s25: float,
    *,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> FloatArray:
    """ΔT from the module's voltage where the hot face is probed, Tm = Th - ΔT/2 solved with it.

    R(Tm) moves ΔT by about 1 K per kelvin of Tm (see :func:`reconstruct_delta_t`), so Tm is
    not guessed: with x = Th - ΔT/2 - 25 °C, V = S25·(1 + β·x)·ΔT + I·R25·(1 + α·x) is the
    quadratic a·ΔT² + b·ΔT + c = 0 with a = -S25·β/2, b = S25·(1 + β·h) - I·R25·α/2,
    c = I·R25·(1 + α·h) - V, h = Th - 25 °C; the root near -c/b is taken in its stable form
    -2c/(b + √(b² - 4ac)) (Goldsmid 2010, ch. 2, with the temperature laws of
    :func:`..physics.resistance_at_temperature`).

    Parameters
    ----------
    current : Module current [A].
    voltage : Module voltage [V].
    t_hot : Hot face [K].
    floating : Whether off samples show the open-circuit voltage [-].
    r25 : Module resistance at 25 °C, one per sample where it moves across them [ohm].
    s25 : Module Seebeck coefficient at 25 °C [V/K].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : ``on_current`` [A].

    Returns
    -------
    ΔT [K]; NaN off a driver that does not float, or where the quadratic has no such root.
    """
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    h = np.asarray(t_hot, dtype=np.float64) - T_25C_K
    ir = np.where(i > options.on_current, i * r25, 0.0)
    a = -0.5 * s25 * beta
    b = s25 * (1.0 + beta * h) - 0.5 * ir * alpha
    c = ir * (1.0 + alpha * h) - v
    disc = b * b - 4.0 * a * c
    ok = (b > 0.0) & (disc >= 0.0)
    dt = np.where(ok, -2.0 * c / (b + np.sqrt(np.where(ok, disc, 0.0))), np.nan)
    if not floating:
        dt = np.where(i > options.on_current, dt, np.nan)
    return np.asarray(dt, dtype=np.float64)


def _check_lift(dt: FloatArray, dt_se: FloatArray, on: BoolArray, lead: FloatArray) -> None:
    # While the module cools, heat flows from the cabinet into the cold face and from the hot
    # face into the ambient, so Tc <= Tcab and Th >= Ta: ΔT >= Ta - Tcab (second law; common
    # practice, no source). A ΔT read with the steps' R that stays below it means R came out
    # high: the faces moved within a sample at the switch-offs, not continuously.
    ok = on & np.isfinite(dt) & np.isfinite(lead)
    if ok.sum() < 5:
        return
    short = float(np.median((dt - lead)[ok]))
    if short < -2.0 * float(np.median(dt_se[ok])):
        raise InsufficientDataError(
            f"ΔT read with the steps' R25 is {-short:.1f} K below the ambient's lead over the "
            "cabinet while the module cools",
            "the switch-off steps give a resistance the heat flows rule out (ΔT below the "
            "ambient's lead over the cabinet while cooling): the faces change faster than "
            "the samples, so the module's voltage cannot stand in for the missing probes",
        )


def _faces_at(
    i: FloatArray,
    v: FloatArray,
    tcab: FloatArray,
    ta: FloatArray,
    th: FloatArray | None,
    r25: float,
    s25: float,
    alpha: float,
    beta: float,
    options: DiagnosticsOptions,
    k25: float | None = None,
) -> tuple[FloatArray, FloatArray, FloatArray]:
    # ΔT, Tm and Tm's sd read from the voltage at R25: with a hot probe Tm = Th - ΔT/2 solved
    # with ΔT, else from how the sinks share ΔT where K is known (ΔT read again there), else
    # the middle of cabinet and ambient within its bound.
    if th is not None:
        dt = delta_t_from_hot_face(
            i, v, th, True, r25, s25, alpha=alpha, beta=beta, options=options
        )
        return dt, th - 0.5 * dt, np.full_like(dt, options.probe_offset_k)
    tm = 0.5 * (tcab + ta)
    dt, _ = reconstruct_delta_t(
        i, v, tm, True, r25, 0.0, s25, 0.0, alpha=alpha, beta=beta, options=options
    )
    if k25 is None:
        return dt, tm, _unanchored_sd(dt, tcab, ta, options.probe_offset_k)
    tm, tm_sd = unanchored_mean_temperature(
        dt, tcab, ta, i, v, r25=r25, s25=s25, k=k25, alpha=alpha, beta=beta, options=options
    )
    dt, _ = reconstruct_delta_t(
        i, v, tm, True, r25, 0.0, s25, 0.0, alpha=alpha, beta=beta, options=options
    )
    return dt, tm, tm_sd


def _faces_checked(
    i: FloatArray,
    v: FloatArray,
    tcab: FloatArray,
    ta: FloatArray,
    th: FloatArray | None,
    step: StepResistance,
    floating: bool,
    s25: float,
    alpha: float,
    beta: float,
    options: DiagnosticsOptions,
    r25_read: tuple[float, float] | None = None,
    k25: float | None = None,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    # ΔT and its sd, Tm and its sd read from the voltage at the step's R25 (ΔT only while
    # driven where the driver does not float), refused where the heat flows rule that ΔT out.
    # With ``r25_read`` (R25 and its error [ohm]) they are then read at that steadier one:
    # the step's own must still pass, since a resistance the heat flows rule out is not served.
    dt, tm, tm_sd = _faces_at(i, v, tcab, ta, th, step.r25, s25, alpha, beta, options, k25)
    on = i > options.on_current
    if not floating:
        dt = np.where(on, dt, np.nan)
    _, dt_se = reconstruct_delta_t(
        i, v, tm, floating, step.r25, step.r25_se, s25, options.seebeck_unit_rel_sd,
        t_mean_sd_k=tm_sd, alpha=alpha, beta=beta, options=options,
    )  # fmt: skip
    if th is not None:
        tm_sd = np.hypot(tm_sd, 0.5 * dt_se)
    _check_lift(dt, dt_se, on, ta - tcab)
    if r25_read is not None:
        given = replace(step, r25=r25_read[0], r25_se=r25_read[1])
        return _faces_checked(
            i, v, tcab, ta, th, given, floating, s25, alpha, beta, options, k25=k25
        )
    return dt, dt_se, tm, tm_sd


def _held_across(step: StepResistance) -> str:
    # What shows the faces held across the switch-offs, where no probe did, in words.
    if step.decay_ratio is None:
        return ""
    return (
        f" (their open-circuit voltage relaxing {step.decay_ratio:.0f}x faster than the "
        "cabinet's drift explains: the faces held across them)"
    )


def reconstruct_faces(
    time_s: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    t_cabinet: FloatArray,
    t_ambient: FloatArray,
    t_hot: FloatArray | None,
    usable: BoolArray,
    *,
    floating: bool,
    s25: float,
    r25_guess: float | None = None,
    r25_read: tuple[float, float] | None = None,
    k25: float | None = None,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> FaceReconstruction:
    """ΔT, and the cold face where the hot one is probed, from the module's own voltage.

    R25 from switch-off steps (:func:`step_resistance`), or where they give none (faces that
    follow the current within a sample) and the hot face is probed from the cold face's
    steady balance (:func:`balance_resistance`) without a power cut (:func:`.cooling_lost`);
    S25 held at ``s25`` (registered ratings) with the spread between units of a type
    (``seebeck_unit_rel_sd``), then ΔT from the voltage; Tc = Th - ΔT. The mean module
    temperature behind R(Tm) and S(Tm) matters (about 1 K of ΔT per kelvin): with a hot probe
    Tm = Th - ΔT/2 is solved together with ΔT (:func:`delta_t_from_hot_face`); without one it
    comes from how the sinks share ΔT where K is known (:func:`unanchored_mean_temperature`),
    else it is the middle of cabinet and ambient within a stated bound.
    Without a hot probe the faces have no anchor (the hot sink's rise above the ambient needs
    its resistance, which needs Th): ΔT and R25 are what hold, t_cold stays NaN. While the
    module cools, ΔT must be at least the ambient's lead over the cabinet (Tc <= Tcab,
    Th >= Ta): a ΔT that falls
    short on most on samples rules the steps' R out.

    Parameters
    ----------
    time_s : Sample times [s].
    current : Module current [A].
    voltage : Module voltage [V].
    t_cabinet, t_ambient : Cabinet air and ambient [K].
    t_hot : Hot face, None where not probed [K].
    usable : Samples that may be used [-].
    floating : Whether off samples show the open-circuit voltage [-].
    s25 : Registered ratings' S25 [V/K].
    r25_guess : Registered ratings' R25, where known: with the hot face probed, R25 then
        comes from the cold face's balance (:func:`balance_resistance`) where the steps give
        none [ohm].
    r25_read : R25 and its standard error to read ΔT at, where a steadier one than these
        readings' own is known (the unit's recent windows); ``step`` stays these readings'
        own, from the balance its drift kept only where it keeps R25 as near that one as
        the held fit (:func:`balance_resistance`) [ohm, ohm].
    k25 : Module thermal conductance from the ratings, where known: without a hot probe Tm
        then comes from how the sinks share ΔT (:func:`unanchored_mean_temperature`) [W/K].
    alpha, beta : Temperature coefficients of R and S [1/K].
    options : as :func:`step_resistance` and :func:`balance_resistance`, and
        ``seebeck_unit_rel_sd`` [-], ``probe_offset_k`` [K].

    Returns
    -------
    The reconstruction.

    Raises
    ------
    NotSeparableError : the driver does not float (no open-circuit voltage).
    InsufficientDataError : too few switch-off steps, or a ΔT read with their R that the
        heat flows rule out (below the ambient's lead over the cabinet while cooling).
    """
    if not floating and (t_hot is None or r25_guess is None):
        raise NotSeparableError(
            "no open-circuit voltage and no face probes: R25 and S not separable",
            "no open-circuit voltage seen (a driver that holds the module at zero volts while "
            "off, or a module that never rests) and no face probes: R25 and S cannot be told "
            "apart",
        )
    i, v = np.asarray(current, dtype=np.float64), np.asarray(voltage, dtype=np.float64)
    tcab, ta = np.asarray(t_cabinet, dtype=np.float64), np.asarray(t_ambient, dtype=np.float64)
    th = None if t_hot is None else np.asarray(t_hot, dtype=np.float64)
    try:
        if not floating:
            raise InsufficientDataError("no open-circuit voltage", "no switch-off steps")
        step = step_resistance(
            time_s, i, v, tcab, ta, th, usable, s25=s25, k25=k25, alpha=alpha, beta=beta,
            options=options,
        )  # fmt: skip
        how = f"R25 from {step.n_steps} switch-off steps" + _held_across(step)
        dt, dt_se, tm, tm_sd = _faces_checked(
            i, v, tcab, ta, th, step, floating, s25, alpha, beta, options, r25_read, k25
        )
    except InsufficientDataError:
        # Faces that follow the current within a sample: no step gives R, but with the hot
        # face probed the cold face's steady balance does.
        if th is None or r25_guess is None:
            raise
        on = i > options.on_current  # a power cut's fans stand still: not the usual path
        lost = cooling_lost(np.asarray(time_s, dtype=np.float64), tcab, on, options)
        rows = usable & (floating | on) & ~lost
        step = balance_resistance(
            time_s, i, v, tcab, th, rows, s25=s25, r25_guess=r25_guess,
            r25_recent=None if r25_read is None else r25_read[0], alpha=alpha, beta=beta,
            options=options,
        )  # fmt: skip
        how = f"R25 from the cold face's steady heat balance over {step.n_steps} samples"
        if np.any(usable & lost):
            how += f", leaving out {int(np.sum(usable & lost))} of a spell with the cooling lost"
        if step.drift_per_day != 0.0:
            how += f", moving {100.0 * step.drift_per_day:+.2f} %/day across them"
        dt, dt_se, tm, tm_sd = _faces_checked(
            i, v, tcab, ta, th, step, floating, s25, alpha, beta, options, r25_read
        )
    if r25_read is not None:
        how += f"; ΔT read at R25 {r25_read[0]:.4g} ohm from the unit's recent windows"
    rs = f"{how}, S from the registered ratings"
    if th is None:
        tc, tc_se = np.full_like(dt, np.nan), np.full_like(dt, np.nan)
        basis = f"no face probes: ΔT from the module's voltage ({rs}); faces unanchored"
    else:
        tc, tc_se = th - dt, np.hypot(dt_se, options.probe_offset_k)
        basis = f"cold face = hot probe - ΔT from the module's voltage ({rs})"
    return FaceReconstruction(dt, dt_se, tc, tc_se, tm, tm_sd, step, basis)
