"""Estimate the physical state of a cooler from its readings: module, cabinet, sinks.

Pure functions on numpy arrays, SI units, temperatures in kelvin, times in seconds. No I/O:
:mod:`.runner` loads readings, calls these and stores what they return.

Model (sign conventions of :mod:`.physics`; Ioffe 1957, Goldsmid 2010 ch. 2, Rowe 1995)::

    V  = I·R(Tm) + S(Tm)·ΔT                       terminal voltage, ΔT = Th - Tc
    Qc = S·I·Tc - ½·I²·R - K·ΔT                   heat drawn at the cold face
    Qh = S·I·Th + ½·I²·R - K·ΔT                   heat released at the hot face
    R(Tm) = R25·(1 + α·(Tm - 298.15 K)),  S(Tm) = S25·(1 + β·(Tm - 298.15 K))

and the lumped energy balances of the cabinet air, the cold sink and the hot sink
(Incropera et al. 2007, ch. 5, lumped capacitance)::

    C·dTcab/dt  = UA·(Ta - Tcab) - Qc - Cc·dTc/dt        cabinet (Qc seen through the cold sink)
    Cc·dTc/dt   = (Tcab - Tc)/r_cold - Qc                 cold sink
    Ch·dTh/dt   = Qh - (Th - Ta)/r_hot                    hot sink

The balances are used in integral form over short segments (integrating them removes the need
for noisy derivatives: ∫C·dT/dt dt = C·(T_end - T_start)); all three share the module conductance
K, which makes K identifiable when the unit runs at more than one operating point (on/off cycling
or changing current). When it is not, K leans on a prior (registered ratings, or a typical module
ZT) and is reported as unreliable.

Seebeck coefficient: from the regression of V on I and ΔT across operating points, and directly
from the open-circuit voltage V_oc = S·ΔT when the driver leaves the module floating while off.
At a switch-off the ohmic part I·R disappears at once while S·ΔT remains, which separates them
(T. C. Harman, "Special techniques for measurement of thermoelectric properties",
J. Appl. Phys. 29, 1373, 1958); see :func:`harman_steps`.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.signal import lfilter

from . import heat_paths, physics
from ._validate import T_25C_K, T_MAX_K, T_MIN_K, FloatArray
from .errors import EstimationError, InsufficientDataError, PhysicsError

__all__ = [
    "TYPICAL_MODULE_ZT",
    "ElectricalFit",
    "Estimate",
    "Performance",
    "SampleFlags",
    "ThermalFit",
    "detect_floating_driver",
    "fit_electrical",
    "fit_thermal",
    "flag_samples",
    "harman_steps",
    "hot_side_resistance_ratio",
    "hot_side_resistance_ratios",
    "performance_now",
    "propagate",
    "setpoint_capacity",
]

BoolArray = NDArray[np.bool_]

#: Effective ZT of commercial bismuth-telluride cooling modules near room temperature, used
#: only as a weak prior on K when a device has no registered ratings [-]. About 0.6-0.8
#: (from memory); 0.7 with a wide (50 %) prior spread.
TYPICAL_MODULE_ZT = 0.7

#: Smallest plausible module Seebeck coefficient [V/K]: a few couples at ~400 µV/K each.
#: Open-circuit readings below this are taken as a driver that shorts or grounds the module
#: while off (common practice, no source).
_MIN_FLOATING_SEEBECK = 2e-3


@dataclass(frozen=True)
class Estimate:
    """One estimated quantity.

    Attributes
    ----------
    value : Best estimate (unit given by the key it is stored under).
    stderr : Standard error, None when it cannot be stated.
    n : Number of samples behind it [-].
    reliable : False when the data cannot support it (then ``note`` says why).
    note : Why it is unreliable, or how it was obtained, in words.
    """

    value: float
    stderr: float | None
    n: int
    reliable: bool = True
    note: str | None = None


# ---------------------------------------------------------------------------
# Data quality
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class SampleFlags:
    """Which samples are usable for what, and why others were left out.

    Attributes
    ----------
    usable : Finite, in range, no spike, door shut and settled [-].
    on : Module current above the on threshold [-].
    steady : Usable and at least ``settle_s`` after the last switch [-].
    missing, fault, door : Why a sample was left out [-].
    """

    usable: BoolArray
    on: BoolArray
    steady: BoolArray
    missing: BoolArray
    fault: BoolArray
    door: BoolArray

    def part(self, sl: slice) -> SampleFlags:
        """The flags of a slice of the samples."""
        return SampleFlags(
            self.usable[sl], self.on[sl], self.steady[sl], self.missing[sl], self.fault[sl],
            self.door[sl],
        )  # fmt: skip

    @property
    def counts(self) -> dict[str, int]:
        """Samples left out, by reason, and samples in a switching transient."""
        return {
            "missing": int(self.missing.sum()),
            "sensor_fault": int(self.fault.sum()),
            "door": int(self.door.sum()),
            "transient": int((self.usable & ~self.steady).sum()),
        }


def flag_samples(
    time_s: FloatArray,
    t_cabinet: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    t_ambient: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    door_open: BoolArray | None = None,
    *,
    on_current: float = 0.05,
    settle_s: float = 600.0,
    door_settle_s: float = 900.0,
    spike_k: float = 3.0,
    breaks: BoolArray | None = None,
) -> SampleFlags:
    """Sort samples into usable or left out (missing channel, sensor fault, door).

    A sensor fault is a temperature outside -60..150 °C, a negative current, or a spike: a
    sample more than ``spike_k`` away from both neighbours, in the same direction, while the
    neighbours agree and the drive does not switch (a physical temperature cannot jump and come
    straight back within one sample; common practice, no source). Samples while a door is open
    and for ``door_settle_s`` after it shuts are left out: the air exchange is a load the model
    does not describe.

    Parameters
    ----------
    time_s : Sample times, increasing [s].
    t_cabinet, t_cold, t_hot, t_ambient : Temperatures [K].
    current : Module current [A].
    voltage : Module voltage [V].
    door_open : Door state per sample, optional [-].
    on_current : Current above which the module counts as on [A].
    settle_s : Time after a switch before a sample counts as steady [s].
    door_settle_s : Time after a door opening still left out [s].
    spike_k : Deviation from both neighbours that marks a spike [K].
    breaks : Samples whose successor must not be consulted (the last sample of an analysis
        step), so that flags never depend on readings after the step; optional [-].

    Returns
    -------
    The flags and the counts of samples left out by reason.
    """
    t = np.asarray(time_s, dtype=np.float64)
    temps = np.vstack([t_cabinet, t_cold, t_hot, t_ambient]).astype(np.float64)
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    missing = ~(np.all(np.isfinite(temps), axis=0) & np.isfinite(i) & np.isfinite(v))
    filled = np.where(np.isfinite(temps), temps, 0.0)
    out_of_range = np.any((filled < T_MIN_K) | (filled > T_MAX_K), axis=0) | (
        np.nan_to_num(i) < -on_current
    )
    spike = np.zeros(t.size, dtype=bool)
    if t.size >= 3:
        # A spike leaves and rejoins its neighbours, which agree with each other; a real step
        # (the module switching) does not rejoin. Samples where the current changes are spared:
        # the faces then really jump.
        x = filled
        d_prev, d_next = x[:, 1:-1] - x[:, :-2], x[:, 1:-1] - x[:, 2:]
        jump = (
            (np.abs(d_prev) > spike_k)
            & (np.abs(d_next) > spike_k)
            & (np.sign(d_prev) == np.sign(d_next))
            & (np.abs(x[:, :-2] - x[:, 2:]) < spike_k)
        )
        ic = np.nan_to_num(i) > on_current
        steady_drive = (ic[1:-1] == ic[:-2]) & (ic[1:-1] == ic[2:])
        spike[1:-1] = np.any(jump, axis=0) & steady_drive
        if breaks is not None:
            spike &= ~np.asarray(breaks, dtype=bool)
    fault = (out_of_range | spike) & ~missing

    if door_open is None:
        door = np.zeros(t.size, dtype=bool)
    else:
        d = np.asarray(door_open, dtype=bool)
        # Time since the last sample with the door open, carried forward.
        last_open = np.where(d, t, -np.inf)
        last_open = np.maximum.accumulate(last_open) if t.size else last_open
        door = t - last_open <= door_settle_s
    door = door & ~missing & ~fault

    on = np.nan_to_num(i) > on_current
    usable = ~missing & ~fault & ~door
    switch_t = t[1:][on[1:] != on[:-1]] if t.size > 1 else t[:0]
    last_switch = np.full(t.size, -np.inf)
    if switch_t.size:
        idx = np.searchsorted(switch_t, t, side="right") - 1
        last_switch = np.where(idx >= 0, switch_t[np.clip(idx, 0, None)], -np.inf)
    steady = usable & (t - last_switch >= settle_s)
    return SampleFlags(usable=usable, on=on, steady=steady, missing=missing, fault=fault, door=door)


# ---------------------------------------------------------------------------
# Electrical: R and S
# ---------------------------------------------------------------------------


def detect_floating_driver(
    voltage_off: FloatArray, delta_t_off: FloatArray, min_delta_t: float = 2.0
) -> bool:
    """Whether a module left off shows its open-circuit (Seebeck) voltage.

    A floating module shows V = S·ΔT (Harman 1958); a driver that shorts or grounds it shows
    about 0. Decided on the median of V/ΔT over off samples with |ΔT| > ``min_delta_t``,
    against the smallest plausible module S (a few couples; common practice, no source).

    Parameters
    ----------
    voltage_off : Voltage of samples with the module off [V].
    delta_t_off : Th - Tc of the same samples [K].
    min_delta_t : Smallest |ΔT| that gives a usable ratio [K].

    Returns
    -------
    True when the off voltage follows S·ΔT.
    """
    v = np.asarray(voltage_off, dtype=np.float64)
    dt = np.asarray(delta_t_off, dtype=np.float64)
    sel = np.abs(dt) > min_delta_t
    if sel.sum() < 5:
        return False
    return bool(np.median(v[sel] / dt[sel]) > _MIN_FLOATING_SEEBECK)


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

    def r25_at(self, s25: float) -> float:
        """R25 fitted with S25 held at ``s25`` [V/K]: least squares in R alone, so an error
        δS of ``s25`` moves it by -``r_lever``·δS [ohm]."""
        return self.r_at_zero_s - self.r_lever * s25


def _trimmed_lstsq(x: FloatArray, y: FloatArray, cut: float = 4.0) -> tuple[FloatArray, BoolArray]:
    # One pass of outlier removal at `cut` robust standard deviations, then a refit: the
    # readings carry occasional glitches the model cannot explain.
    coef = _lstsq(x, y)
    res = y - x @ coef
    sd = _robust_sd(res)
    keep = np.abs(res) <= cut * sd if sd > 0.0 else np.ones(y.size, dtype=bool)
    if keep.sum() >= x.shape[1] + 2 and not keep.all():
        coef = _lstsq(x[keep], y[keep])
    return coef, keep


def _ridge(
    x: FloatArray, y: FloatArray, sigma: float, means: list[float], sds: list[float]
) -> tuple[FloatArray, FloatArray]:
    # Least squares with an independent Gaussian prior on each column (Bayesian ridge: one
    # row per prior appended to the design, weighted by sigma / sd; an infinite sd adds
    # nothing). Returns the coefficients and their covariance.
    w = sigma / np.array(sds, dtype=np.float64)
    xa = np.vstack([x, np.diag(w)])
    ya = np.concatenate([y, w * np.array(means, dtype=np.float64)])
    coef = np.asarray(np.linalg.lstsq(xa, ya, rcond=None)[0], dtype=np.float64)
    return coef, np.asarray(sigma**2 * np.linalg.inv(xa.T @ xa), dtype=np.float64)


def _lstsq(x: FloatArray, y: FloatArray) -> FloatArray:
    # Normal equations for these few well-scaled columns (one small solve instead of an SVD
    # of every row); numpy's SVD-based lstsq where they are near singular.
    xtx = x.T @ x
    if np.linalg.cond(xtx) < 1e10:
        return np.asarray(np.linalg.solve(xtx, x.T @ y), dtype=np.float64)
    return np.asarray(np.linalg.lstsq(x, y, rcond=None)[0], dtype=np.float64)


def fit_electrical(
    current: FloatArray,
    voltage: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    usable: BoolArray,
    *,
    floating: bool,
    on_current: float = 0.05,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
    prior: tuple[float, float, float] | None = None,
    min_on: int = 20,
    max_rel_stderr: float = 0.01,
    current_offset: float = 0.01,
    probe_offset_k: float = 0.3,
    voltage_offset: float = 0.01,
) -> ElectricalFit:
    """Fit R25 and S25 to V = R25·I·(1 + α·(Tm - 25 °C)) + S25·ΔT·(1 + β·(Tm - 25 °C)).

    Ordinary least squares (``numpy.linalg.lstsq``) over on samples plus, when the driver
    floats, off samples (V_oc = S·ΔT, I = 0). Module equation: Goldsmid (2010), ch. 2;
    temperature coefficients as in :func:`.physics.resistance_at_temperature`.

    With a ``prior`` (R25, S25, relative standard deviation), e.g. from the registered ratings,
    the fit is regularised towards it (Bayesian ridge: prior rows appended to the design); when
    the readings cannot separate R and S, S is held at the prior and R fitted alone. The
    fit is marked unreliable when the data alone cannot pin R25 or S25 to within
    ``max_rel_stderr`` (constant current with no open-circuit voltage, too few samples).

    Parameters
    ----------
    current : Module current [A].
    voltage : Module voltage [V].
    t_cold, t_hot : Face temperatures [K].
    usable : Samples that may be used [-].
    floating : Whether off samples show the open-circuit voltage [-].
    on_current : Current above which the module counts as on [A].
    alpha : Temperature coefficient of R [1/K].
    beta : Temperature coefficient of S [1/K].
    prior : (R25 [ohm], S25 [V/K], relative standard deviation [-]), optional.
    min_on : Fewest on samples accepted [-].
    max_rel_stderr : Largest data-only relative standard error called reliable [-].
    current_offset : Standard uncertainty of a constant offset of the current reading, about
        one step of a 10 mA converter (common practice, no source) [A]. It moves R by about
        current_offset / I_rms; R is marked unreliable where that exceeds twice
        ``max_rel_stderr`` (a few tenths of an ampere, as when a cold ambient leaves the
        module idling).
    probe_offset_k : Standard uncertainty of a constant offset in the probes' ΔT [K]; it and
        the current offset are carried into the covariance to first order.
    voltage_offset : Standard uncertainty of a constant offset of the voltage reading, about
        one step of a 10 mV converter (common practice, no source) [V]. With the ΔT offset
        it sets the prior of the offset term of ``s25_offset_free``.

    Returns
    -------
    The fit.

    Raises
    ------
    InsufficientDataError : too few samples, or R and S not separable and no prior.
    """
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    tc = np.asarray(t_cold, dtype=np.float64)
    th = np.asarray(t_hot, dtype=np.float64)
    dt = th - tc
    tm = 0.5 * (tc + th) - T_25C_K
    on = usable & (i > on_current)
    off = usable & (i <= on_current) & (np.abs(dt) > 1.0) if floating else np.zeros_like(on)
    rows = on | off
    n_on, n_off = int(on.sum()), int(off.sum())
    if n_on < min_on:
        raise InsufficientDataError(
            f"{n_on} usable on samples, need {min_on}", "module hardly ran in this window"
        )
    f_r, f_s = (1.0 + alpha * tm)[rows], (1.0 + beta * tm)[rows]
    x = np.column_stack([i[rows] * f_r, dt[rows] * f_s])
    y = v[rows]
    coef, keep = _trimmed_lstsq(x, y)
    x, y = x[keep], y[keep]
    f_r, f_s = f_r[keep], f_s[keep]
    if int(np.sum(x[:, 0] != 0.0)) < min_on // 2:
        raise InsufficientDataError(
            "most on samples disagree with V = I·R + S·ΔT", "voltage readings inconsistent"
        )
    res = y - x @ coef
    dof = max(y.size - 2, 1)
    sigma = max(float(np.sqrt(res @ res / dof)), 1e-6)
    xtx = x.T @ x
    # R with S held anywhere: off rows carry no current and drop out of these sums.
    x00 = float(xtx[0, 0])
    r_at_zero_s, r_lever = float(x[:, 0] @ y) / x00, float(xtx[0, 1]) / x00
    data_ok = np.linalg.cond(xtx) < 1e12
    rel_se = np.array([np.inf, np.inf])
    if data_ok:
        cov_data = sigma**2 * np.linalg.inv(xtx)
        rel_se = np.sqrt(np.diag(cov_data)) / np.maximum(np.abs(coef), 1e-12)
        data_ok = bool(np.all(rel_se < max_rel_stderr)) and bool(np.all(coef > 0.0))
    note: str | None = None
    if not data_ok:
        if n_off == 0 and np.ptp(i[on]) < 0.05 * float(np.mean(i[on])):
            note = "constant current and no open-circuit voltage: R and S not separable"
        else:
            note = "readings do not vary enough to separate R and S"
    r_ok = data_ok
    if prior is not None and not data_ok:
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
        coef, cov = _ridge(x, y, sigma, [r0, s0], [rel * r0, rel * s0])
    elif data_ok:
        cov = np.asarray(sigma**2 * np.linalg.inv(xtx), dtype=np.float64)
    else:
        raise InsufficientDataError(f"R and S not identifiable: {note}", note)
    if not np.all(coef > 0.0):
        raise EstimationError(f"fitted R25/S25 not positive: {coef}")
    # Constant offsets of the current reading and of the probes' ΔT do not average out: carry
    # them to first order. An offset δ changes the voltage the model expects by -R·f_r·δ on
    # the samples with current, or -S·f_s·δ on all, which moves the fitted (R, S) by
    # (XᵀX)⁻¹Xᵀ of that (only R's column where S is held).
    cov = np.array(cov, dtype=np.float64)
    on_rows = x[:, 0] != 0.0
    shifts = (
        (np.where(on_rows, coef[0] * f_r, 0.0), current_offset),
        (coef[1] * f_s, probe_offset_k),
    )
    s_current = 0.0  # S's part from the current reading's offset
    for j, (shift, sd) in enumerate(shifts):
        if data_ok:
            g = np.linalg.solve(xtx, x.T @ shift)
            cov += np.outer(g, g) * sd**2
            if j == 0:
                s_current = float(g[1]) * sd
        else:
            g0 = float(x[:, 0] @ shift) / float(xtx[0, 0])
            cov[0, 0] += (g0 * sd) ** 2
    s_free, s_free_se = float(coef[1]), math.sqrt(max(float(cov[1, 1]), 0.0))
    if data_ok:
        # One more unknown, the constant S·δ + b, with a prior of zero ± its size beside the
        # ratings' priors; the spread of ΔT while the module is off, or across currents,
        # tells it from S.
        c_sd = math.hypot(float(coef[1]) * probe_offset_k, voltage_offset)
        means, sds = [0.0, 0.0, 0.0], [math.inf, math.inf, c_sd]
        if prior is not None:
            means[:2], sds[:2] = [prior[0], prior[1]], [prior[2] * prior[0], prior[2] * prior[1]]
        sol, cov3 = _ridge(np.column_stack([x, np.ones(y.size)]), y, sigma, means, sds)
        s_free = float(sol[1])
        s_free_se = math.hypot(math.sqrt(max(float(cov3[1, 1]), 0.0)), s_current)
    i_rms = float(np.sqrt(np.mean(i[on] ** 2)))
    rel_i = current_offset / max(i_rms, 1e-12)
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
        residual_v=sigma,
        reliable=data_ok,
        note=note,
        r_reliable=bool(r_ok),
        s25_offset_free=s_free,
        s25_offset_free_se=s_free_se,
        r_at_zero_s=r_at_zero_s,
        r_lever=r_lever,
        r_sd_fixed_s=sigma / math.sqrt(x00),
        current_ok=current_ok,
    )


def harman_steps(
    time_s: FloatArray,
    current: FloatArray,
    voltage: FloatArray,
    t_cold: FloatArray,
    t_hot: FloatArray,
    usable: BoolArray,
    *,
    on_current: float = 0.05,
    max_gap_s: float = 180.0,
    min_delta_t: float = 2.0,
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
    on_current : Current above which the module counts as on [A].
    max_gap_s : Largest time between the two samples of a step [s].
    min_delta_t : Smallest ΔT after the step that gives a usable ratio [K].

    Returns
    -------
    (S per step [V/K], R per step at the mean module temperature of the step [ohm]).
    """
    t = np.asarray(time_s, dtype=np.float64)
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    dt = np.asarray(t_hot, dtype=np.float64) - np.asarray(t_cold, dtype=np.float64)
    on = i > on_current
    k = np.flatnonzero(
        on[:-1]
        & ~on[1:]
        & usable[:-1]
        & usable[1:]
        & (np.diff(t) <= max_gap_s)
        & (np.abs(dt[1:]) > min_delta_t)
    )
    s = v[k + 1] / dt[k + 1]
    r = (v[k] - s * dt[k]) / i[k]
    return s, r


# ---------------------------------------------------------------------------
# Thermal: UA, C, K, sink resistances
# ---------------------------------------------------------------------------

#: Names of the thermal parameters in :class:`ThermalFit`.
THERMAL_PARAMS = ("ua", "k", "c", "q_internal", "c_cold", "g_cold", "g_hot", "c_hot")

#: Prior on the heat released inside the cabinet by its inner fan and electronics [W]: about
#: 1 W ± 1 W for small thermoelectric cabinets (common practice, no source). Without it UA and
#: a constant internal load cannot be told apart while the ambient hardly changes.
Q_INTERNAL_PRIOR = (1.0, 1.0)


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

    def stderr(self, name: str) -> float:
        """Standard error of one parameter (a name from ``THERMAL_PARAMS``)."""
        return self.stderrs[name]


def _segment_sums(seg: NDArray[np.int64], n_seg: int, weights: FloatArray) -> FloatArray:
    return np.bincount(seg, weights=weights, minlength=n_seg).astype(np.float64)


def _robust_sd(x: FloatArray) -> float:
    # Standard deviation from the median absolute deviation (normal-consistent, 1.4826·MAD).
    return 1.4826 * _median_mad(x)[1]


def _balance_weights(
    blocks: list[tuple[FloatArray, FloatArray]], params: FloatArray, floor: float
) -> FloatArray:
    # Each balance's rows weighted by one over that balance's robust residual scale.
    w = []
    for xb, yb in blocks:
        sd = _robust_sd(yb - xb @ params)
        w.append(np.full(yb.size, 1.0 / max(sd, floor)))
    return np.concatenate(w)


def _median_mad(x: FloatArray) -> tuple[float, float]:
    # Median and median absolute deviation of a few dozen values from one sort each:
    # numpy's median costs more in argument handling than in work at these sizes.
    srt = np.sort(x)
    n = srt.size
    if n == 0:
        return math.nan, math.nan
    med = 0.5 * float(srt[(n - 1) // 2] + srt[n // 2])
    dev = np.sort(np.abs(srt - med))
    return med, 0.5 * float(dev[(n - 1) // 2] + dev[n // 2])


def _solve_with_prior(
    xw: FloatArray,
    yw: FloatArray,
    index: int,
    p0: float,
    p_sd: float,
    fixed: bool = False,
    others: dict[int, tuple[float, float]] | None = None,
) -> tuple[FloatArray, FloatArray]:
    # Weighted least squares with a Gaussian prior on one column, in information form; `fixed`
    # holds that column at its prior value instead. Covariance scaled by the reduced chi-square
    # when the residuals exceed their assumed scale.
    n_par = xw.shape[1]
    if fixed:
        free = [j for j in range(n_par) if j != index]
        sub_others = {free.index(j): v for j, v in (others or {}).items()}
        sub, sub_cov = _solve_with_prior(
            xw[:, free], yw - xw[:, index] * p0, 0, 0.0, math.inf, others=sub_others
        )
        params = np.zeros(n_par)
        params[free] = sub
        params[index] = p0
        cov = np.zeros((n_par, n_par))
        cov[np.ix_(free, free)] = sub_cov
        cov[index, index] = p_sd**2
        return params, cov
    info = xw.T @ xw
    rhs = xw.T @ yw
    for j, (m, sd) in [(index, (p0, p_sd)), *(others or {}).items()]:
        if math.isfinite(sd):
            info[j, j] += 1.0 / sd**2
            rhs[j] += m / sd**2
    try:
        cov_i: FloatArray = np.asarray(np.linalg.inv(info), dtype=np.float64)
    except np.linalg.LinAlgError as exc:
        raise EstimationError("energy balance matrix is singular") from exc
    params = cov_i @ rhs
    dof = max(yw.size - n_par, 1)
    res = yw - xw @ params
    chi2 = float(res @ res) / dof
    return np.asarray(params, dtype=np.float64), cov_i * max(chi2, 1.0)


def _robust_weighted(
    blocks: list[tuple[FloatArray, FloatArray]],
    index: int,
    p0: float,
    p_sd: float,
    positive_cols: tuple[int, ...],
    hold_when_weak: bool = True,
    hold: bool = False,
    others: dict[int, tuple[float, float]] | None = None,
    shifts: FloatArray | None = None,
) -> tuple[FloatArray, FloatArray, bool, FloatArray]:
    # Columns scaled to unit size; each balance weighted by its own robust residual scale from a
    # first pass; rows beyond four of those scales dropped (unmodelled loads, glitches). When
    # a parameter that must be positive is not (degenerate data: noise pushing the poorly
    # determined direction anywhere), the prior-carrying one is held at its prior; the flag
    # returned says so. Each row of ``shifts`` (one value per row of the stacked balances) is
    # a change of the left-hand sides; the fourth result holds the parameters' first-order
    # response to each, at the final weights.
    x_all = np.vstack([b[0] for b in blocks])
    y_all = np.concatenate([b[1] for b in blocks])
    scale = np.maximum(np.abs(x_all).max(axis=0), 1e-12)
    xs = x_all / scale
    dev = y_all - y_all.mean()
    y_scale = max(math.sqrt(float(dev @ dev) / max(dev.size, 1)), 1e-12)  # standard deviation

    def scaled(div: float) -> dict[int, tuple[float, float]]:
        return {j: (m * scale[j], sd * scale[j] / div) for j, (m, sd) in (others or {}).items()}

    coef, _ = _solve_with_prior(
        xs, y_all, index, p0 * scale[index], p_sd * scale[index] / y_scale, others=scaled(y_scale)
    )
    wts = _balance_weights(blocks, coef / scale, 1e-9 * y_scale)
    keep = np.abs((y_all - xs @ coef) * wts) <= 4.0
    xw, yw = xs[keep] * wts[keep, None], y_all[keep] * wts[keep]
    params, cov = _solve_with_prior(
        xw, yw, index, p0 * scale[index], p_sd * scale[index], others=scaled(1.0)
    )
    p_sd_post = math.sqrt(max(float(cov[index, index]), 0.0)) / scale[index]
    # Also held when the data narrow it less than halving the prior spread: a weakly identified
    # parameter moved by sensor bias is worse than the prior itself.
    weak = hold_when_weak and p_sd_post >= 0.5 * p_sd
    forced = hold or not all(params[j] > 0.0 for j in positive_cols) or weak
    if forced:
        params, cov = _solve_with_prior(
            xw, yw, index, p0 * scale[index], p_sd * scale[index], fixed=True, others=scaled(1.0)
        )
    zero_mean = {j: (0.0, sd) for j, (_, sd) in scaled(1.0).items()}
    resp = np.array(
        [
            _solve_with_prior(
                xw, dy[keep] * wts[keep], index, 0.0, p_sd * scale[index], forced, zero_mean
            )[0]
            / scale
            for dy in (np.zeros((0, y_all.size)) if shifts is None else shifts)
        ]
    ).reshape(-1, scale.size)
    return params / scale, cov / np.outer(scale, scale), forced, resp


def _strobed_blocks(
    on: BoolArray, block: NDArray[np.int64], max_lag: int = 6, min_match: float = 0.95
) -> BoolArray:
    # Blocks whose on/off pattern repeats exactly every few samples while it switches: the
    # thermostat cycle is then locked to a multiple of the sampling interval and the samples
    # see the same few phases of every cycle, so block means of the cycling heat flows are
    # biased (stroboscopic aliasing; C. E. Shannon, Proc. IRE 37, 10, 1949, on sampling).
    # Per block: largest fraction of sample pairs ``lag`` apart (2..max_lag) that agree.
    n_blk = int(block.max()) + 1 if block.size else 0
    sw = _segment_sums(block, n_blk, (on[1:] != on[:-1]).astype(np.float64))
    best = np.zeros(n_blk)
    if not np.any(sw >= 10.0):
        return np.zeros(n_blk, dtype=bool)
    for lag in range(2, max_lag + 1):
        if on.size <= lag:
            break
        same = (on[lag:] == on[:-lag]).astype(np.float64)
        b = block[lag - 1 :]
        frac = _segment_sums(b, n_blk, same) / np.maximum(
            _segment_sums(b, n_blk, np.ones_like(same)), 1.0
        )
        best = np.maximum(best, frac)
    # A cycle seen fewer than ~5 times in the block is not enough to call it locked.
    return np.asarray((best >= min_match) & (sw >= 10.0), dtype=bool)


def _warm_goods_runs(res: FloatArray, start: float = 1.5, settle: float = 0.0) -> BoolArray:
    # Warm goods put in release their heat over hours: a run of blocks that starts with a
    # residual above `start` robust scales and lasts while it stays above `settle`. Only
    # upward runs: nothing inside the cabinet takes heat out except the module. The excess
    # is often only two or three scales at its peak, split between two blocks when the goods
    # go in mid-hour, and its tail lasts hours below one scale, yet summed over those hours
    # it moves UA by tens of per cent; so the run starts low and lasts while the excess
    # stays positive. A chance run costs the fit a few ordinary hours (common practice, no
    # source). Against simulated fleets with known truth these thresholds, not 2 and 0.5,
    # kept warm goods out of UA's trend over 90-day seasons (units flagged 2 of 36, not 4)
    # and brought 7-day UA within 20 % on 96 % of units, not 94 %.
    out = np.zeros(res.size, dtype=bool)
    if res.size == 0:
        return out
    med, mad = _median_mad(res)
    sd = 1.4826 * mad
    if not sd > 0.0:
        return out
    z = ((res - med) / sd).tolist()
    running = False
    for j, zj in enumerate(z):
        running = zj > start or (running and zj > settle)
        out[j] = running
    return out


def _sink_taus(p1: FloatArray, cov1: FloatArray) -> tuple[float, float, float, float]:
    # (τ_cold, its error, τ_hot, its error) [s] from the sink fit's (K, c_cold, g_cold, g_hot,
    # c_hot): τ = c/g, its error that of c over g (g is far better determined). A sink whose
    # conductance did not come out positive tells nothing: 0 with an error of 1e9 s.
    out: list[float] = []
    for jc, jg in ((1, 2), (4, 3)):
        g = float(p1[jg])
        sd_c = math.sqrt(max(float(cov1[jc, jc]), 0.0))
        out += [float(p1[jc]) / g, sd_c / g] if g > 0.0 else [0.0, 1e9]
    return out[0], out[1], out[2], out[3]


def _slowest_sink(
    taus: tuple[float, float, float, float], limit: float, sigmas: float
) -> float | None:
    # The larger time constant [s] of the sinks whose own is beyond ``limit`` and stands
    # ``sigmas`` standard errors clear of zero; None where neither is.
    slow = [tau for tau, sd in (taus[:2], taus[2:]) if tau > limit and tau > sigmas * sd]
    return max(slow) if slow else None


def _lag_one_autocorrelation(res: FloatArray, cap: float = 0.9) -> float:
    # Lag-one autocorrelation of residuals in time order, from 0 (none, or negative) to cap.
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


def _after_warm_spells(
    t: FloatArray,
    tcab: FloatArray,
    rise_k: float,
    min_s: float,
    recovery_s: float,
    on: BoolArray,
    saturated_share: float,
) -> tuple[BoolArray, bool]:
    # Samples from the start of a warm spell (cabinet air more than rise_k above its usual low
    # for min_s or longer: a power cut, cooling that failed) until recovery_s after it ends:
    # the contents warmed with the air and give that heat back for hours, a load the cabinet
    # balance does not describe. A spell through which the module was on for at least
    # saturated_share of the samples is the cooling at its limit, not lost: it is not left
    # out (a hot day would otherwise leave only a few hours of the window, and a UA fitted
    # to those hours alone came out tens of per cent high against simulated fleets with
    # known truth); the second result says whether the window held one.
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
    segment_s: float = 900.0,
    cabinet_block_s: float = 3600.0,
    max_gap_s: float = 180.0,
    min_segments: int = 8,
    on_current: float = 0.05,
    switch_guard_s: float = 0.0,
    q_internal_prior: tuple[float, float] = Q_INTERNAL_PRIOR,
    probe_offset_k: float = 0.3,
    warm_spell_k: float = 3.0,
    warm_spell_min_s: float = 1800.0,
    recovery_s: float = 12 * 3600.0,
    saturated_share: float = 0.9,
    min_rest_share: float = 0.05,
    min_current_spread: float = 0.5,
    k_settled: float | None = None,
    q_settled: tuple[float, float] | None = None,
    sr_rel_cov: FloatArray | None = None,
    contents_tau_s: tuple[float, ...] = (3600.0, 7200.0, 14400.0, 28800.0, 57600.0),
    max_sink_tau_share: float = 1.0 / 6.0,
    sink_c_sigmas: float = 3.0,
    min_switches_per_h: float = 2.0,
    max_transient_share: float = 0.15,
    sink_taus_settled: tuple[float, float, float, float] | None = None,
) -> ThermalFit:
    """Fit K and the sinks, then UA, C and the internal load, to integral energy balances.

    Stage 1, the sinks, over segments of ``segment_s`` (trapezoidal integrals over consecutive
    usable samples at most ``max_gap_s`` apart), with Pc = S·I·Tc - ½·I²·R and
    Ph = S·I·Th + ½·I²·R (Goldsmid 2010, ch. 2):

        ∫Pc = g_c·∫(Tcab - Tc) + K·∫ΔT - Cc·δTc + a_c·τ   (cold sink)
        ∫Ph = g_h·∫(Th - Ta)   + K·∫ΔT + Ch·δTh + a_h·τ   (hot sink)

    solved together by weighted least squares with a prior K = ``k_prior`` ± ``k_prior_rel``.
    a_c and a_h are the constant heat flows that constant probe offsets make in each balance
    (g·δ + K·δΔT), with priors of zero ± ``probe_offset_k`` times the path's conductance; the
    storage terms carry no offset, so the switching transients tell them from K. Two operating
    points (on/off, or two currents) make K identifiable; at one, it leans on the prior (and
    the offsets are left out) and is reported so.

    Stage 2, the cabinet, over blocks of ``cabinet_block_s`` with Qc = Pc - K·ΔT:

        ∫Qc = UA·∫(Ta - Tcab) + q_int·τ - C·δTcab

    with a prior on q_int (``q_internal_prior``), held at that prior when the fit would make the
    internal load negative (fans and electronics release heat). Blocks of an hour or more
    average over the thermostat cycles, so heat exchanged with slowly following contents mostly
    cancels. Where the module never rests the air moves with the load, and a contents term
    -Cn·δTn joins, Tn following Tcab through a first-order lag. Single blocks the model
    cannot explain are dropped as outliers; warm goods put in release their heat over hours,
    so a run of blocks that starts with an excess of heat of 1.5 robust scales and lasts
    while the excess stays positive is left out as a whole; and so are blocks in
    which the on/off cycle is locked to a few sampling intervals (the samples then see only
    some phases of each cycle, which biases the block means), and the hours of a warm spell
    (power cut, failed cooling) and ``recovery_s`` after it, while the contents give back the
    heat they took; a warm spell through which the module ran flat out (the cooling at its
    limit on a hot afternoon) stays in, with the contents node. Lumped-capacitance balances:
    Incropera et al. (2007), ch. 5.

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
    segment_s : Segment length of the sink balances [s].
    cabinet_block_s : Block length of the cabinet balance [s].
    max_gap_s : Largest gap between samples integrated across [s].
    min_segments : Fewest sink segments accepted [-].
    on_current : Current above which the module counts as on [A].
    switch_guard_s : Sample pairs closer than this after a switch are left out [s]; 0 keeps
        all. Worth setting (to a few sink time constants) when the sinks store heat: sink
        temperatures then change too fast for trapezoidal integration over one interval, and
        the errors would line up with the switching and bias K.
    q_internal_prior : (mean [W], standard deviation [W]) of the internal load.
    probe_offset_k : Standard uncertainty of a constant offset between two probes, carried
        into K and UA to first order [K].
    warm_spell_k, warm_spell_min_s, recovery_s : A warm spell is the cabinet air more than
        ``warm_spell_k`` above its usual low (10th percentile of the window) for
        ``warm_spell_min_s`` or longer; the cabinet balance leaves it out and ``recovery_s``
        after it, while the contents give back the heat they took (about three time
        constants of a few hours; common practice, no source) [K], [s], [s].
    saturated_share : A warm spell through which the module ran at least this share of the
        time is the cooling at its limit (a hot afternoon, a heavy load), not cooling lost:
        its hours stay in the balance and the contents node is tried for them, since the
        contents warm and cool with the air just as where the module never rests [-].
    contents_tau_s : Time constants tried for the contents node of a module that never
        rests, or of a window with a warm spell at the cooling's limit [s].
    min_rest_share, min_current_spread : K is held at its prior when fewer than
        ``min_rest_share`` of the usable samples have the module at rest and the segments'
        mean currents span less than ``min_current_spread`` of the median one: a single
        operating point (common practice, no source) [-], [-].
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
    max_sink_tau_share : Where the module switches on and off, K rests on the sinks'
        transients after each switch. When a sink's fitted time constant (heat capacity over
        conductance) exceeds this share of the median sampling interval, the faces move
        within an interval in a way the trapezoid rule over the samples does not follow, and
        the integrals' errors line up with the switching: where the switching is frequent
        too (``max_transient_share``), K is then held as at a single operating point
        (against simulated fleets with known truth, 150-4000 J/K sinks and cycles of a few
        minutes, K fitted there came out 20-80 % low and UA up to 2.7x; massless faces fit
        to under a second) [-].
    sink_c_sigmas : A sink's time constant counts (for ``max_sink_tau_share``) where it
        exceeds this many of its standard errors; a module that seldom switches leaves it
        undetermined [-].
    min_switches_per_h : Fewest on/off switches per hour, on average over the window, for
        the sinks' time constants to be judged: a thermostat switches every few minutes, a
        proportional drive that rests now and then a few times a day (on simulated fleets
        with known truth, over 5/h against under 1.5/h) [1/h].
    max_transient_share : K is held only where the number of switches times that time
        constant also exceeds this share of the window: the trapezoid rule's errors come
        with each transient. On simulated coolers with 150/300 J/K sinks and cycles made
        shorter step by step, K came within 1 % up to a share of 0.15 (runs of four
        samples between switches) and 15-35 % off from 0.20 (runs of three) [-].
    sink_taus_settled : The unit's settled sink time constants and their errors, as in
        :attr:`ThermalFit.sink_taus` (e.g. pooled from its earlier windows): when given, they
        decide instead of this window's own, which scatter from window to window; sinks do
        not change [s].

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
    pc = s * i * tc - 0.5 * i * i * r
    ph = s * i * th + 0.5 * i * i * r
    dtv = th - tc
    h = np.diff(t)
    on = i > on_current
    switched = np.concatenate([[False], on[1:] != on[:-1]])
    last_switch = np.maximum.accumulate(np.where(switched, t, -np.inf))
    settled = (
        (t - last_switch >= switch_guard_s)[:-1] & ~switched[1:]
        if switch_guard_s > 0.0
        else np.ones(h.size, dtype=bool)
    )
    base = usable[:-1] & usable[1:] & (h <= max_gap_s) & (h > 0)
    pair = base & settled

    def trap(f: FloatArray) -> FloatArray:
        return np.asarray(0.5 * (f[:-1] + f[1:]) * h, dtype=np.float64)

    def segments(
        length: float, use: BoolArray
    ) -> tuple[Callable[[FloatArray], FloatArray], int, NDArray[np.int64], BoolArray]:
        seg_all = np.floor((t[:-1] - t[0]) / length).astype(np.int64)
        seg = seg_all[use]
        n_seg = int(seg_all.max()) + 1 if seg_all.size else 0
        good = _segment_sums(seg, n_seg, h[use]) >= 0.6 * length

        def sums(f: FloatArray) -> FloatArray:
            return _segment_sums(seg, n_seg, f[use])[good]

        return sums, int(good.sum()), seg_all, good

    sums, n_good, seg_all, good = segments(segment_s, pair)
    if n_good < min_segments:
        raise InsufficientDataError(
            f"{n_good} usable {segment_s / 60:.0f}-minute segments, need {min_segments}",
            "too few complete stretches of readings (door openings, gaps or faults)",
        )
    i_pc, i_ph, i_dt = sums(trap(pc)), sums(trap(ph)), sums(trap(dtv))
    i_cold, i_hot = sums(trap(tcab - tc)), sums(trap(th - ta))
    d_c, d_h = sums(np.diff(tc)), sums(np.diff(th))
    z = np.zeros_like(i_pc)
    # Sink unknowns: k, c_cold, g_cold, g_hot, c_hot (then a_c, a_h: see below)
    x_cold = np.column_stack([i_dt, -d_c, i_cold, z, z])
    x_hot = np.column_stack([i_dt, z, z, i_hot, d_h])
    # K separates from the sinks only between distinct operating points. A module that never
    # rests and whose current hardly moves offers none: what the fit would find then is the
    # probes' resolution and offsets, so K is held at its prior.
    seg_i = sums(trap(i)) / np.maximum(sums(h), 1e-9)
    rests = float(np.mean(~on[usable])) >= min_rest_share if usable.any() else True
    i_mid = float(np.median(seg_i))
    one_point = not rests and float(np.ptp(seg_i)) < min_current_spread * max(i_mid, 1e-9)
    k0 = k_settled if one_point and k_settled is not None else k_prior
    blocks = [(x_cold, i_pc), (x_hot, i_ph)]
    p1, cov1, forced, _ = _robust_weighted(
        blocks, 0, k0, k_prior_rel * k_prior, (0, 2, 3), hold=one_point
    )
    k_sd = float(np.sqrt(max(cov1[0, 0], 0.0)))  # from the readings' scatter alone
    # Constant probe offsets shift the small sink differences (a few kelvin at rest) and
    # through them K. Each balance gets a constant heat flow for them, g·δ + K·δΔT, with a
    # prior of zero ± ``probe_offset_k`` times that path's conductance; the switching
    # transients, whose storage terms carry no offset, separate it from K. K's spread
    # beyond its scatter-only one is then what the offsets leave unresolved (``k_probe``).
    # At a single operating point they cannot be told from the sinks' conductances: left out.
    dur = sums(h)
    offsets = (  # priors of a_c and a_h, columns 5 and 6
        {}
        if one_point
        else {
            5: (0.0, probe_offset_k * math.hypot(float(p1[2]), float(p1[0]))),
            6: (0.0, probe_offset_k * math.hypot(float(p1[3]), float(p1[0]))),
        }
    )
    offset_cols = [(dur, z), (z, dur)] if offsets else [(), ()]
    # Relative errors of S and R move both balances' heat flows: S·I·T in each, ∓½·I²·R.
    s_it_c, s_it_h, joule = (
        sums(trap(s * i * tc)),
        sums(trap(s * i * th)),
        sums(trap(0.5 * i * i * r)),
    )

    def fit_sinks(k_at: float, hold: bool) -> tuple[FloatArray, FloatArray, bool, FloatArray]:
        return _robust_weighted(
            [(np.column_stack([x, *c]), y) for (x, y), c in zip(blocks, offset_cols, strict=True)],
            0, k_at, k_prior_rel * k_prior, (0, 2, 3), hold=hold, others=offsets,
            shifts=np.array([np.concatenate([s_it_c, s_it_h]), np.concatenate([-joule, joule])]),
        )  # fmt: skip

    p1, cov1, forced, resp = fit_sinks(k0, one_point or forced)
    h_typ = float(np.median(h)) if h.size else 0.0
    # Only a module that switches often (a thermostat's cycle of minutes) puts K's weight on
    # the transients after each switch; where it seldom does, the sinks' heat capacities
    # are hardly determined, and trade off with what else the balances leave out.
    n_switch = int(np.count_nonzero(on[1:][usable[1:]] != on[:-1][usable[1:]]))
    switching = rests and not one_point and n_switch >= min_switches_per_h * (t[-1] - t[0]) / 3600
    taus_own = _sink_taus(p1, cov1) if switching else None
    taus = taus_own if sink_taus_settled is None else sink_taus_settled
    tau_slow = (
        _slowest_sink(taus, max_sink_tau_share * h_typ, sink_c_sigmas)
        if switching and taus is not None
        else None
    )
    # ...and the bias builds up with the share of the time the faces spend within a time
    # constant of a switch.
    span = float(t[-1] - t[0]) if t.size > 1 else 0.0
    slow_faces = tau_slow is not None and n_switch * tau_slow > max_transient_share * span
    if slow_faces and not forced:
        # Held at the prior: a settled K would come from windows whose faces seemed followed.
        p1, cov1, forced, resp = fit_sinks(k_prior, True)
    dk_el = resp[:, 0]  # K's response to +1 (100 %) relative error of S, of R
    k, c_cold, g_cold, g_hot, c_hot = (float(v) for v in p1[:5])
    if k <= 0.0 or g_cold <= 0.0 or g_hot <= 0.0:
        raise EstimationError(
            f"non-physical sink fit: K={k:.3g} W/K, 1/r_cold={g_cold:.3g} W/K, "
            f"1/r_hot={g_hot:.3g} W/K"
        )
    k_sd_all = float(np.sqrt(max(cov1[0, 0], 0.0)))
    k_probe = 0.0 if forced else math.sqrt(max(k_sd_all**2 - k_sd**2, 0.0))
    k_sd = k_sd_all if forced else min(k_sd, k_sd_all)
    k_from_data = not forced and k_sd_all < 0.5 * k_prior_rel * k_prior

    # Cabinet: every usable pair counts (switching does not matter for whole-hour sums),
    # except in blocks where the on/off cycle is commensurate with the sampling.
    held_cab = forced or k_settled is not None
    k_cab = k if k_settled is None or slow_faces else k_settled
    qc = pc - k_cab * dtv
    blk = np.floor((t[:-1] - t[0]) / cabinet_block_s).astype(np.int64)
    strobed = _strobed_blocks(on, blk)
    recovering, saturated = _after_warm_spells(
        t, tcab, warm_spell_k, warm_spell_min_s, recovery_s, on, saturated_share
    )
    bsums, n_blocks, _, _ = segments(cabinet_block_s, base & ~strobed[blk] & ~recovering[:-1])
    if n_blocks < 3:
        why = (
            "cabinet still giving up heat stored during a warm spell (power cut, failed cooling)"
            if recovering.any()
            else "too few complete hours for the cabinet balance (door openings, gaps or faults)"
        )
        raise InsufficientDataError(
            f"{n_blocks} usable {cabinet_block_s / 3600:.1f}-hour blocks, need 3", why
        )
    x_cab = np.column_stack([bsums(trap(ta - tcab)), bsums(h), -bsums(np.diff(tcab))])
    y_cab = bsums(trap(qc))
    q0, q_sd = q_internal_prior
    p2, cov2, _, _ = _robust_weighted([(x_cab, y_cab)], 1, q0, q_sd, (0, 1), hold_when_weak=False)
    # Where the module never rests (proportional drive) the air moves with the load and the
    # contents follow it hours late; the part of their stored heat in step with Ta - Tcab
    # would pull UA low. There a contents node behind a first-order lag joins the balance,
    # its time constant from ``contents_tau_s``, kept when it lowers the Bayesian information
    # criterion (Schwarz, Ann. Statist. 6(2), 1978), the time constant counted as a
    # parameter, and when both heat capacities come out positive. With a thermostat the air
    # stays within its band and the contents with it, except while the module runs flat out
    # and the air still warms (a saturated warm spell): then the contents node is tried too.
    n_cab = y_cab.size
    best = _bic_term(n_cab, _robust_sd(y_cab - x_cab @ p2))
    x_best = x_cab
    for tau in () if rests and not saturated else contents_tau_s:
        x_n = np.column_stack([x_cab, -bsums(np.diff(_first_order_lag(t, tcab, tau)))])
        p_n, cov_n, _, _ = _robust_weighted(
            [(x_n, y_cab)], 1, q0, q_sd, (0, 1), hold_when_weak=False
        )
        score = _bic_term(n_cab, _robust_sd(y_cab - x_n @ p_n)) + 2.0 * math.log(n_cab)
        if p_n[2] > 0.0 and p_n[3] > 0.0 and score < best:
            best, x_best, p2, cov2 = score, x_n, p_n, cov_n
    x_cab = x_best
    warm = np.zeros(y_cab.size, dtype=bool)
    for _ in range(3):
        found = _warm_goods_runs(y_cab - x_cab @ p2)
        if np.array_equal(found, warm) or int((~found).sum()) < max(3, x_cab.shape[1] + 2):
            break
        warm = found
        p2, cov2, _, _ = _robust_weighted(
            [(x_cab[~warm], y_cab[~warm])], 1, q0, q_sd, (0, 1), hold_when_weak=False
        )
    q_own = float(p2[1])
    if q_settled is not None:
        q0, q_sd = q_settled
    # The final cabinet fit, on the blocks chosen above (with the unit's settled internal load
    # when there is one), also gives its first-order response to what moves Qc (part of a
    # steady shift goes to the internal load): K's own uncertainty, added in quadrature to
    # UA's; and, kept apart as ``ua_probe`` since they are the same in every window and cancel
    # in UA's changes, the probe offsets (through K, and in Ta - Tcab itself: a shift of
    # UA·τ), a K held at its prior or the unit's settled value, and the errors of S and R
    # (directly and through K).
    cab_shifts = np.array(
        [-bsums(trap(dtv)), bsums(trap(s * i * tc)), -bsums(trap(0.5 * i * i * r)), bsums(h)]
    )
    p2, cov2, _, resp_cab = _robust_weighted(
        [(x_cab[~warm], y_cab[~warm])], 1, q0, q_sd, (0, 1), hold_when_weak=False,
        shifts=cab_shifts[:, ~warm],
    )  # fmt: skip
    # Neighbouring blocks share what the model leaves out (a thermostat cycle drifting in and
    # out of step with the sampling, the tail of a load), so their residuals run together
    # and the blocks are worth fewer independent ones: the covariance grows by
    # (1 + ρ)/(1 - ρ), ρ the residuals' lag-one autocorrelation, as for the effective sample
    # size of a first-order autoregressive series (H. von Storch and F. W. Zwiers,
    # Statistical Analysis in Climate Research, 1999; from memory).
    res_cab = y_cab[~warm] - x_cab[~warm] @ p2
    rho = _lag_one_autocorrelation(res_cab)
    cov2 = cov2 * ((1.0 + rho) / (1.0 - rho))
    ua, q_int, c = (float(v) for v in p2[:3])
    if ua <= 0.0:
        raise EstimationError(f"non-physical cabinet fit: UA={ua:.3g} W/K")
    sd1 = np.sqrt(np.maximum(np.diag(cov1), 0.0))
    sd2 = np.sqrt(np.maximum(np.diag(cov2), 0.0))
    dua_dk, dua_offset = abs(float(resp_cab[0, 0])), ua * abs(float(resp_cab[3, 0]))
    dua_el = resp_cab[1:3, 0] + dk_el * float(resp_cab[0, 0])
    cov_el = np.zeros((2, 2)) if sr_rel_cov is None else np.asarray(sr_rel_cov, dtype=np.float64)
    k_el = math.sqrt(max(float(dk_el @ cov_el @ dk_el), 0.0))
    ua_el = math.sqrt(max(float(dua_el @ cov_el @ dua_el), 0.0))
    ua_sd = math.hypot(float(sd2[0]), 0.0 if held_cab else k_sd * dua_dk)
    ua_probe = math.hypot(
        k_probe * dua_dk,
        k_sd * dua_dk if held_cab else 0.0,
        dua_offset * probe_offset_k,
        ua_el,
    )
    stderrs = {
        "k": math.hypot(k_sd, k_probe, k_el),
        "c_cold": float(sd1[1]),
        "g_cold": float(sd1[2]),
        "g_hot": float(sd1[3]),
        "c_hot": float(sd1[4]),
        "ua": ua_sd,
        "ua_probe": ua_probe,
        "q_internal": float(sd2[1]),
        "c": float(sd2[2]),
    }
    ua_rel = ua_sd / ua
    ua_ok = ua_rel < 0.15
    c_ok = c > 0.0 and float(sd2[2]) < 0.3 * c
    notes = []
    if slow_faces:
        notes.append(
            f"sinks store heat over {tau_slow:.0f} s against {h_typ:.0f}-s samples: "
            "the switching transients cannot be followed, module conductance held"
        )
    elif not k_from_data:
        notes.append("module conductance weakly identifiable: value leans on its prior")
    if not ua_ok:
        notes.append(f"cabinet UA poorly determined (±{100 * ua_rel:.0f} %)")
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
        n=n_good,
        n_samples=int(pair[good[seg_all]].sum()),
        k_from_data=k_from_data,
        rested=rests,
        ua_reliable=bool(ua_ok),
        c_reliable=bool(c_ok),
        note="; ".join(notes) or None,
        q_internal_own=q_own,
        k_cabinet=k_cab,
        ua_per_k=float(resp_cab[0, 0]),
        faces_followed=not slow_faces,
        sink_taus=taus_own,
    )


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
    max_gap_s: float = 180.0,
    min_heat_j: float = 3.6e4,
    probe_offset_k: float = 0.3,
    max_rel_stderr: float = 0.2,
) -> Estimate:
    """Hot-side (sink plus fan) thermal resistance over a short stretch of readings.

    r_hot = ∫(Th - Ta) dt / (∫Qh dt - Ch·δTh), the hot sink's energy balance integrated over the
    stretch (Incropera et al. 2007, ch. 5), with Qh = S·I·Th + ½·I²·R - K·ΔT (Goldsmid 2010,
    ch. 2). Integrating over whole on/off cycles cancels most of the heat stored in the sink, so
    the estimate works on short windows (tens of minutes) and reacts quickly to a blocked fin
    or a failed fan. Standard error from the spread of the per-pair ratio, treating pairs as
    independent, plus a probe offset on the rise (which dominates when the sink runs only a
    few kelvin above ambient).

    Parameters
    ----------
    time_s : Sample times [s].
    t_hot, t_ambient, t_cold : Temperatures [K].
    current : Module current [A].
    seebeck, resistance : Module S [V/K] and R [ohm] at each sample's mean temperature.
    conductance : Module thermal conductance K [W/K].
    usable : Samples that may be used [-].
    c_hot : Heat capacity of the hot sink, when known [J/K].
    max_gap_s : Largest gap between samples integrated across [s].
    min_heat_j : Least heat rejected over the stretch for a usable ratio [J].
    probe_offset_k : Uncertainty of the difference of two uncalibrated probes [K]; about
        0.2-0.5 K (common practice, no source). Added to the error as an offset of the rise.
    max_rel_stderr : Largest relative standard error called reliable [-].

    Returns
    -------
    r_hot [K/W].

    Raises
    ------
    InsufficientDataError : too little heat rejected to measure it.
    """
    ests = hot_side_resistance_ratios(
        time_s, t_hot, t_ambient, t_cold, current, seebeck, resistance, conductance, usable,
        np.zeros(np.size(time_s), dtype=np.int64), 1, c_hot=c_hot, max_gap_s=max_gap_s,
        min_heat_j=min_heat_j, probe_offset_k=probe_offset_k, max_rel_stderr=max_rel_stderr,
    )  # fmt: skip
    est = ests[0]
    if isinstance(est, InsufficientDataError):
        raise est
    return est


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
    max_gap_s: float = 180.0,
    min_heat_j: float = 3.6e4,
    probe_offset_k: float = 0.3,
    max_rel_stderr: float = 0.2,
    faces_followed: bool = True,
    on_current: float = 0.05,
    locked_match: float = 0.9,
) -> list[Estimate | InsufficientDataError]:
    """:func:`hot_side_resistance_ratio` over many stretches of readings at once.

    Each sample belongs to the stretch ``block`` (0 .. ``n_blocks`` - 1, non-decreasing in
    time); only consecutive samples of the same stretch form a pair. Per-stretch integrals are
    ``numpy.bincount`` sums, so one call costs about as much as one stretch.

    Parameters
    ----------
    time_s ... max_rel_stderr : As in :func:`hot_side_resistance_ratio`.
    block : Stretch of each sample [-].
    n_blocks : Number of stretches [-].
    faces_followed : False when the hot sink stores heat over a good part of a sampling
        interval while the module switches every few minutes
        (:attr:`ThermalFit.faces_followed`): the rise then lags the heat within each cycle
        and the trapezoid rule does not follow it, so no stretch is called reliable (on
        simulated units one read 22 % low, hour after hour, a steady bias that cancels in
        its changes), and a stretch whose on/off cycle is locked to the sampling (the samples
        see the same few phases of every cycle; such hours read up to twice the true value)
        gives none [-].
    on_current : Current above which the module counts as on [A].
    locked_match : Where ``faces_followed`` is False, a stretch counts as locked when this
        share of its sample pairs a few intervals apart (2-6) agree on the module's state [-].

    Returns
    -------
    Per stretch, r_hot [K/W], or the error saying why there is none.
    """
    t = np.asarray(time_s, dtype=np.float64)
    th = np.asarray(t_hot, dtype=np.float64)
    i = np.asarray(current, dtype=np.float64)
    blk = np.asarray(block, dtype=np.int64)
    qh = seebeck * i * th + 0.5 * i * i * resistance - conductance * (th - t_cold)
    rise = th - t_ambient
    h = np.diff(t)
    pair = usable[:-1] & usable[1:] & (h <= max_gap_s) & (h > 0) & (blk[:-1] == blk[1:])
    seg = blk[:-1][pair]
    q_int = (0.5 * (qh[:-1] + qh[1:]) * h)[pair]
    r_int = (0.5 * (rise[:-1] + rise[1:]) * h)[pair]

    def sums(f: FloatArray) -> FloatArray:
        return _segment_sums(seg, n_blocks, f)

    q_sum, r_sum, h_sum = sums(q_int), sums(r_int), sums(h[pair])
    heat = q_sum - c_hot * sums(np.diff(th)[pair])
    n = np.bincount(seg, minlength=n_blocks)
    ok = (n >= 10) & (heat >= min_heat_j)
    value = np.where(ok, r_sum / np.where(ok, heat, 1.0), np.nan)
    # Spread of the pair-level mismatch against the fitted ratio, summed as independent errors.
    mismatch = r_int - value[seg] * q_int
    se_noise = np.sqrt(sums(mismatch**2)) / np.where(ok, heat, 1.0)
    # A constant probe offset does not average out: it shifts the mean rise itself.
    mean_rise = r_sum / np.where(h_sum > 0.0, h_sum, 1.0)
    se_offset = np.abs(value) * probe_offset_k / np.maximum(np.abs(mean_rise), 1e-9)
    se = np.hypot(se_noise, se_offset)
    locked = np.zeros(n_blocks, dtype=bool)
    if not faces_followed and blk.size > 1:
        # Partly locked hours bias it too: a lower share of matching pairs than the
        # cabinet balance's 0.95 (one simulated hour at 0.9 read +51 %).
        found = _strobed_blocks(i > on_current, blk[:-1], min_match=locked_match)
        locked[: min(found.size, n_blocks)] = found[:n_blocks]
    out: list[Estimate | InsufficientDataError] = []
    for j in range(n_blocks):
        if not ok[j]:
            out.append(
                InsufficientDataError(
                    f"{heat[j]:.3g} J rejected over {n[j]} sample pairs",
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
        precise = bool(se[j] < max_rel_stderr * abs(value[j]))
        reliable = precise and faces_followed
        note = (
            None
            if reliable
            else f"hot sink only {mean_rise[j]:.1f} K above ambient: probe offsets dominate"
            if not precise
            else "sink stores heat within a sampling interval: the hour's figure can be some "
            "tens of per cent off (the 24-hour fit is not); its changes are followed"
        )
        out.append(Estimate(float(value[j]), float(se[j]), int(n[j]), reliable, note))
    return out


# ---------------------------------------------------------------------------
# Performance and capacity
# ---------------------------------------------------------------------------


def propagate(
    f: Callable[[FloatArray], FloatArray], params: FloatArray, cov: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Values and first-order standard errors of ``f(params)`` (delta method).

    u² = diag(J·Σ·Jᵀ) (JCGM 100:2008, GUM, eq. (13)), with the sensitivity coefficients J
    found numerically from the change of f for a small change of each input, as GUM 5.1.4
    allows (clause number from memory): one forward step of 1e-6 relative per parameter. ``f``
    is evaluated once on all the stepped parameter sets together, which keeps this cheap
    enough to run for every window.

    Parameters
    ----------
    f : Maps parameter sets, shape (k, n), to results, shape (k, m) [units of the results].
    params : Parameter values, shape (n,) [their units].
    cov : Their covariance matrix, shape (n, n) [products of their units].

    Returns
    -------
    (values, standard errors), each of shape (m,).
    """
    p = np.asarray(params, dtype=np.float64)
    step = np.maximum(np.abs(p), 1e-12) * 1e-6
    points = np.vstack([p, p + np.diag(step)])
    out = np.asarray(f(points), dtype=np.float64).reshape(points.shape[0], -1)
    jac = ((out[1:] - out[0]) / step[:, None]).T
    var = np.einsum("ij,jk,ik->i", jac, cov, jac)
    return out[0], np.sqrt(np.maximum(var, 0.0))


@dataclass(frozen=True)
class Performance:
    """Module performance at given face temperatures and current.

    Attributes
    ----------
    cooling_w, input_power_w, cop, cop_max, current_for_best_cop_a, carnot_cop :
        Qc [W], P [W], COP [-], best COP at these temperatures [-], the current giving it [A],
        Carnot COP [-], each as an :class:`Estimate`.
    """

    cooling_w: Estimate
    input_power_w: Estimate
    cop: Estimate
    cop_max: Estimate
    current_for_best_cop_a: Estimate
    carnot_cop: Estimate


def performance_now(
    current: float,
    t_cold: float,
    t_hot: float,
    s25: float,
    r25: float,
    k: float,
    cov: FloatArray,
    n: int,
    *,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
) -> Performance:
    """Cooling, power, COP and the best COP at one operating point, with standard errors.

    Qc and P from :func:`.physics.cold_side_heat` and :func:`.physics.input_power`, COP = Qc/P
    as in :func:`.physics.cop`; the best COP and its current from :func:`.physics.best_cop` and
    :func:`.physics.current_for_best_cop` (Ioffe 1957); the Carnot COP Tc/(Th - Tc). S and R are
    taken at the mean face temperature. Errors by :func:`propagate` from ``cov``.

    Parameters
    ----------
    current : Module current [A].
    t_cold, t_hot : Face temperatures [K].
    s25 : Seebeck coefficient at 25 °C [V/K].
    r25 : Resistance at 25 °C [ohm].
    k : Thermal conductance [W/K].
    cov : Covariance of (s25, r25, k).
    n : Samples behind the operating point [-].
    alpha, beta : Temperature coefficients of R and S [1/K].

    Returns
    -------
    The figures.

    Raises
    ------
    EstimationError : no power taken, or hot face not above cold face.
    """
    tm = 0.5 * (t_cold + t_hot)
    p0 = np.array([s25, r25, k])

    def figures(p: FloatArray) -> FloatArray:
        s = np.asarray(physics.seebeck_at_temperature(p[:, 0], tm, beta))
        r = np.asarray(physics.resistance_at_temperature(p[:, 1], tm, alpha))
        k = p[:, 2]
        qc = np.asarray(physics.cold_side_heat(current, t_cold, t_hot, s, r, k))
        power = np.asarray(physics.input_power(current, t_cold, t_hot, s, r))
        # COP = Qc/P from the two just computed, as physics.cop computes it.
        if np.any(power <= 0.0):
            raise EstimationError("COP is undefined where the electrical input power is <= 0")
        return np.column_stack(
            [
                qc,
                power,
                qc / power,
                physics.best_cop(t_cold, t_hot, s, r, k),
                physics.current_for_best_cop(t_cold, t_hot, s, r, k),
            ]
        )

    if t_hot <= t_cold:
        raise EstimationError("hot face not above cold face: COP figures undefined")
    try:
        values, errors = propagate(figures, p0, cov)
    except PhysicsError as exc:
        raise EstimationError(f"performance undefined at this operating point: {exc}") from exc
    carnot = float(physics.carnot_cop(t_cold, t_hot))
    est = [Estimate(float(v), float(se), n) for v, se in zip(values, errors, strict=True)]
    return Performance(est[0], est[1], est[2], est[3], est[4], Estimate(carnot, None, n))


def setpoint_capacity(
    setpoint_k: float,
    design_ambient_k: float,
    s25: float,
    r25: float,
    k: float,
    r_hot: float,
    r_cold: float,
    ua: float,
    max_current: float,
    *,
    max_voltage: float | None = None,
    alpha: float = physics.BI2TE3_RESISTANCE_TEMPCO,
    beta: float = physics.BI2TE3_SEEBECK_TEMPCO,
) -> heat_paths.SetpointCapacity:
    """Whether the fitted cooler can hold its setpoint at the design ambient.

    Thin wrapper on :func:`.heat_paths.capacity_at_setpoint` with the fitted module (at 25 °C,
    with temperature coefficients), sinks and cabinet.

    Parameters
    ----------
    setpoint_k : Cabinet setpoint [K].
    design_ambient_k : Ambient the unit must cope with [K].
    s25 : Seebeck coefficient at 25 °C [V/K].
    r25 : Resistance at 25 °C [ohm].
    k : Module thermal conductance [W/K].
    r_hot, r_cold : Sink resistances [K/W].
    ua : Cabinet heat-loss conductance [W/K].
    max_current : Largest drive current [A].
    max_voltage : Largest drive voltage, optional [V].
    alpha, beta : Temperature coefficients of R and S [1/K].

    Returns
    -------
    The capacity figures.

    Raises
    ------
    EstimationError : the capacity could not be computed.
    """
    module = physics.ModuleParameters(s25, r25, k)
    try:
        return heat_paths.capacity_at_setpoint(
            setpoint_k,
            design_ambient_k,
            module,
            r_hot,
            r_cold,
            ua,
            max_current,
            max_voltage=max_voltage,
            alpha=alpha,
            beta=beta,
        )
    except PhysicsError as exc:
        raise EstimationError(f"capacity at setpoint not computable: {exc}") from exc
