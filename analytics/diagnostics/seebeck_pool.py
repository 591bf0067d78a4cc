"""The module's Seebeck coefficient pooled over many windows, with the readings' offsets.

S does not wear, while a single window's readings seldom separate it from R: a thermostat
that never lets its module float holds the voltage at the supply's, a proportional driver
moves current and ΔT together. Over days the ambient's swings move the operating point far
enough. Each window leaves the cross-product sums of its electrical fit's rows
(:func:`window_sums`); :func:`pool_seebeck` solves the pooled model

    V = R25·I·f_r + S25·ΔT·f_s + c + d·[I > 0],

f_r = 1 + α·(Tm - 25 °C), f_s = 1 + β·(Tm - 25 °C) (the module equation of
:mod:`.electrical`: Goldsmid (2010), ch. 2; temperature laws as in
:func:`..physics.resistance_at_temperature`). The constant c = S·δ + b holds a constant
offset δ of the probes' ΔT and b of the voltage reading; d = -R·ε one of the current reading,
which only the rows with current see (an open driver reads exactly zero). Each has a
Gaussian prior of zero and its size (Bayesian ridge), so where the readings cannot tell a
constant from S (a zero-volt driver) the fit falls back on the voltage's own scale: V at a
fixed supply then pins R and S through the module's terminal equation V = I·R + S·ΔT (Rowe
(ed.), *CRC Handbook of Thermoelectrics*, 1995).

Where I and ΔT move nearly together (a proportional driver, a thermostat at a fixed supply)
the readings' own noise in I and ΔT pulls least squares away from S (errors in variables:
the attenuation of a regressor measured with noise). Each row's regressors are therefore
instrumented by the mean of its neighbouring rows in the same state, which share its slow
part but not its noise (instrumental variables; J. Durbin, "Errors in variables", Rev. Int.
Stat. Inst. 22, 23, 1954): β = (ZᵀA + P)⁻¹(Zᵀy + P·μ) with the priors' precision P and
means μ, covariance σ²·(ZᵀA + P)⁻¹(ZᵀZ + P)(AᵀZ + P)⁻¹. Against simulated fleets with
known truth (seeds 201-210) least squares left S 2-45 % off on proportional drivers.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .._validate import FloatArray
from ..errors import InsufficientDataError
from .options import DEFAULT_OPTIONS, DiagnosticsOptions

__all__ = ["PooledSeebeck", "fold_sums", "pool_seebeck", "window_sums"]

#: The stacked row u = (I·f_r, ΔT·f_s, 1, [I > 0], V, f_s, z_R, z_S) whose cross-products a
#: window keeps: the pooled design A (first four), the voltage, S's temperature factor (to put
#: back a shift of ΔT) and the instruments of the first two columns.
_X0, _X1, _ONE, _ON, _Y, _F, _Z0, _Z1 = range(8)
_IU = np.triu_indices(8)
_A = [_X0, _X1, _ONE, _ON]
_Z = [_Z0, _Z1, _ONE, _ON]
#: Length of one window's sums: the upper triangle of UᵀU.
SUMS_LEN = len(_IU[0])


def window_sums(x: FloatArray, y: FloatArray, f_s: FloatArray, z: FloatArray) -> list[float]:
    """The cross-product sums of one window's electrical rows, for :func:`pool_seebeck`.

    Parameters
    ----------
    x : The electrical fit's kept rows, columns I·f_r [A], ΔT·f_s [K] (I = 0 on open-circuit
        rows).
    y : Their voltages [V].
    f_s : S's temperature factor of each row [-].
    z : Instruments of the two columns of ``x``: the mean of the neighbouring rows in the
        same state (:func:`.electrical.neighbour_means`) [A, K].

    Returns
    -------
    Upper triangle of UᵀU, row-major, U = (x, 1, [I > 0], y, f_s, z) [A², A·K, ...].
    """
    x = np.asarray(x, dtype=np.float64)
    u = np.column_stack([
        x, np.ones(x.shape[0]), (x[:, 0] != 0.0).astype(np.float64),
        np.asarray(y, dtype=np.float64), np.asarray(f_s, dtype=np.float64),
        np.asarray(z, dtype=np.float64),
    ])  # fmt: skip
    return (u.T @ u)[_IU].tolist()  # type: ignore[no-any-return]


def _full(sums: FloatArray, shift: float) -> FloatArray:
    # UᵀU of the same rows with ΔT + shift (in ΔT·f_s and in its instrument): U' = U·Tᵀ.
    m = np.zeros((8, 8))
    m[_IU] = sums
    m = m + np.triu(m, 1).T
    t = np.eye(8)
    t[_X1, _F] = t[_Z1, _F] = shift
    return np.asarray(t @ m @ t.T, dtype=np.float64)


def fold_sums(
    block: Sequence[float] | None, sums: Sequence[float], weight: float, shift: float
) -> list[float]:
    """Add one window's sums to a block of windows, so that a block pools as its windows would.

    ``pool_seebeck([fold_sums(...)], [1.0], [0.0], ...)`` solves the same equations as
    ``pool_seebeck`` given the block's windows one by one: the sums are linear in the rows,
    so the window's weight and ΔT shift are applied here, once.

    Parameters
    ----------
    block : The block's folded sums so far, or None for a new block [-].
    sums : One :func:`window_sums` result [-].
    weight : The window's weight (see :func:`pool_seebeck`) [-].
    shift : The constant taken off the window's ΔT before its fit [K].

    Returns
    -------
    The block's folded sums, upper triangle row-major like :func:`window_sums` [-].
    """
    m = weight * _full(np.asarray(sums, dtype=np.float64), shift)
    if block is not None:
        m = m + _full(np.asarray(block, dtype=np.float64), 0.0)
    return m[_IU].tolist()  # type: ignore[no-any-return]


@dataclass(frozen=True)
class PooledSeebeck:
    """S25 (and R25) pooled over windows.

    Attributes
    ----------
    s25, s25_se : Seebeck coefficient at 25 °C and its standard error [V/K].
    r25 : Resistance at 25 °C of the same fit (a mean over the pooled windows) [ohm].
    n : Rows behind it (weighted) [-].
    windows : Windows pooled [-].
    residual_v : Residual standard deviation [V].
    reliable : The standard error is within ``electrical_max_rel_stderr`` of S25.
    """

    s25: float
    s25_se: float
    r25: float
    n: float
    windows: int
    residual_v: float
    reliable: bool


def pool_seebeck(
    sums: Sequence[Sequence[float]],
    weights: Sequence[float],
    shifts: Sequence[float],
    prior: tuple[float, float, float] | None,
    *,
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> PooledSeebeck:
    """Fit S25 to the pooled sums of several windows (see the module's docstring).

    Instrumented Bayesian ridge on the summed cross-products: R25 and S25 with the ratings' prior
    where given; the constant c with a prior of zero ± hypot(S·``probe_offset_k``,
    ``voltage_offset``), the current's term d of zero ± R·``current_offset``. Standard errors
    from the pooled residual scatter; a window whose rows overlap the next ones is counted
    at ``weight`` < 1.

    Parameters
    ----------
    sums : One :func:`window_sums` result per window [-].
    weights : Weight of each window's sums, 1 where its rows are its own [-].
    shifts : Constant taken off each window's ΔT before its fit (the probes' offsets as then
        estimated), put back here so that every window shares one offset [K].
    prior : (R25 [ohm], S25 [V/K], relative standard deviation [-]), or None.
    options : ``voltage_offset`` [V], ``current_offset`` [A], ``probe_offset_k`` [K],
        ``electrical_max_rel_stderr`` [-].

    Returns
    -------
    The pooled S25.

    Raises
    ------
    InsufficientDataError : no rows, or the pooled equations are singular.
    """
    s = np.asarray(sums, dtype=np.float64).reshape(-1, SUMS_LEN)
    w = np.asarray(weights, dtype=np.float64)
    m = sum(
        (wk * _full(row, float(d)) for row, wk, d in zip(s, w, shifts, strict=True)),
        np.zeros((8, 8)),
    )
    n = float(m[_ONE, _ONE])
    if n < len(_A) + 2:
        raise InsufficientDataError("no pooled electrical rows", "module hardly ran")
    ata, aty, yty = m[np.ix_(_A, _A)], m[_A, _Y], float(m[_Y, _Y])
    # Instrumented: the readings' own noise would pull S towards zero where I and ΔT move
    # together (see the module's docstring).
    zta, zty, ztz = m[np.ix_(_Z, _A)], m[_Z, _Y], m[np.ix_(_Z, _Z)]
    sol0 = np.linalg.lstsq(zta, zty, rcond=None)[0]
    r0, s0 = (prior[0], prior[1]) if prior is not None else (abs(sol0[0]), abs(sol0[1]))
    means = np.array([r0, s0, 0.0, 0.0]) if prior is not None else np.zeros(len(_A))
    sds = np.array([
        prior[2] * r0 if prior is not None else math.inf,
        prior[2] * s0 if prior is not None else math.inf,
        math.hypot(s0 * options.probe_offset_k, options.voltage_offset),
        max(r0 * options.current_offset, 1e-9),
    ])  # fmt: skip
    # Two passes: the residual scale sets the priors' weight against the rows'.
    sigma = 1.0
    for _ in range(2):
        prec = np.diag((sigma / sds) ** 2)
        lhs = zta + prec
        if np.linalg.cond(lhs) > 1e14:
            raise InsufficientDataError("pooled electrical sums singular", "readings too few")
        coef = np.linalg.solve(lhs, zty + prec @ means)
        ssr = max(yty - 2.0 * float(coef @ aty) + float(coef @ ata @ coef), 0.0)
        sigma = max(math.sqrt(ssr / max(n - len(_A), 1.0)), 1e-6)
    prec = np.diag((sigma / sds) ** 2)
    inv = np.linalg.inv(zta + prec)
    cov = sigma**2 * inv @ (ztz + prec) @ inv.T
    se = math.sqrt(max(float(cov[1, 1]), 0.0))
    ok = coef[1] > 0.0 and se < options.electrical_max_rel_stderr * float(coef[1])
    return PooledSeebeck(
        s25=float(coef[1]), s25_se=se, r25=float(coef[0]), n=n, windows=int(s.shape[0]),
        residual_v=sigma, reliable=bool(ok),
    )  # fmt: skip
