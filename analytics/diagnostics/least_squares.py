"""Least squares as the estimators use it: robust scales, trimmed fits, Gaussian priors.

Small dense problems (a few columns, a few hundred rows): normal equations or numpy's
SVD-based ``lstsq``, priors as extra rows or in information form (Bayesian ridge), and
residual scales from the median absolute deviation.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import NDArray

from .._validate import FloatArray
from ..errors import EstimationError
from .estimates import BoolArray

__all__ = [
    "lstsq",
    "median_mad",
    "ridge",
    "robust_sd",
    "robust_weighted",
    "segment_sums",
    "solve_with_prior",
    "trimmed_lstsq",
]

#: Residuals beyond this many robust standard deviations are dropped as glitches [-] (common
#: practice, no source).
OUTLIER_CUT = 4.0


def segment_sums(seg: NDArray[np.int64], n_seg: int, weights: FloatArray) -> FloatArray:
    """Sum of ``weights`` per segment index ``seg`` (0 .. ``n_seg`` - 1) [units of weights]."""
    return np.bincount(seg, weights=weights, minlength=n_seg).astype(np.float64)


def median_mad(x: FloatArray) -> tuple[float, float]:
    """Median and median absolute deviation of ``x`` (NaN for no values) [units of x]."""
    # From one sort each: numpy's median costs more in argument handling than in work at
    # these sizes (a few dozen values).
    srt = np.sort(x)
    n = srt.size
    if n == 0:
        return math.nan, math.nan
    med = 0.5 * float(srt[(n - 1) // 2] + srt[n // 2])
    dev = np.sort(np.abs(srt - med))
    return med, 0.5 * float(dev[(n - 1) // 2] + dev[n // 2])


def robust_sd(x: FloatArray) -> float:
    """Standard deviation from the median absolute deviation, 1.4826·MAD (normal-consistent)
    [units of x]."""
    return 1.4826 * median_mad(x)[1]


def lstsq(x: FloatArray, y: FloatArray) -> FloatArray:
    """Least-squares coefficients of y on the columns of x."""
    # Normal equations for these few well-scaled columns (one small solve instead of an SVD
    # of every row); numpy's SVD-based lstsq where they are near singular.
    xtx = x.T @ x
    if np.linalg.cond(xtx) < 1e10:
        return np.asarray(np.linalg.solve(xtx, x.T @ y), dtype=np.float64)
    return np.asarray(np.linalg.lstsq(x, y, rcond=None)[0], dtype=np.float64)


def trimmed_lstsq(
    x: FloatArray, y: FloatArray, cut: float = OUTLIER_CUT
) -> tuple[FloatArray, BoolArray]:
    """Least squares, then one pass of outlier removal at ``cut`` robust standard deviations
    and a refit: the readings carry occasional glitches the model cannot explain.

    Returns the coefficients and the rows kept."""
    coef = lstsq(x, y)
    res = y - x @ coef
    sd = robust_sd(res)
    keep = np.abs(res) <= cut * sd if sd > 0.0 else np.ones(y.size, dtype=bool)
    if keep.sum() >= x.shape[1] + 2 and not keep.all():
        coef = lstsq(x[keep], y[keep])
    return coef, keep


def prior_rows(sigma: float, means: list[float], sds: list[float]) -> tuple[FloatArray, FloatArray]:
    """Rows to append to a design and its left-hand side for an independent Gaussian prior
    on each column: one row per column, weighted by sigma / sd, with sigma the residuals'
    scale (an infinite sd gives a row of zeros, which adds nothing)."""
    w = sigma / np.array(sds, dtype=np.float64)
    return np.diag(w), w * np.array(means, dtype=np.float64)


def ridge(
    x: FloatArray, y: FloatArray, sigma: float, means: list[float], sds: list[float]
) -> tuple[FloatArray, FloatArray]:
    """Least squares with an independent Gaussian prior on each column (Bayesian ridge: the
    design with :func:`prior_rows`). Returns the coefficients and their covariance."""
    rows_x, rows_y = prior_rows(sigma, means, sds)
    xa = np.vstack([x, rows_x])
    ya = np.concatenate([y, rows_y])
    coef = np.asarray(np.linalg.lstsq(xa, ya, rcond=None)[0], dtype=np.float64)
    return coef, np.asarray(sigma**2 * np.linalg.inv(xa.T @ xa), dtype=np.float64)


def _balance_weights(
    blocks: list[tuple[FloatArray, FloatArray]], params: FloatArray, floor: float
) -> FloatArray:
    # Each balance's rows weighted by one over that balance's robust residual scale.
    w = []
    for xb, yb in blocks:
        sd = robust_sd(yb - xb @ params)
        w.append(np.full(yb.size, 1.0 / max(sd, floor)))
    return np.concatenate(w)


def solve_with_prior(
    xw: FloatArray,
    yw: FloatArray,
    index: int,
    p0: float,
    p_sd: float,
    fixed: bool = False,
    others: dict[int, tuple[float, float]] | None = None,
) -> tuple[FloatArray, FloatArray]:
    """Weighted least squares with a Gaussian prior ``p0`` ± ``p_sd`` on column ``index``
    (and ``others``: column -> (mean, sd)), in information form; ``fixed`` holds that column
    at its prior value instead. Covariance scaled by the reduced chi-square when the
    residuals exceed their assumed scale.

    Raises
    ------
    EstimationError : the information matrix is singular.
    """
    n_par = xw.shape[1]
    if fixed:
        free = [j for j in range(n_par) if j != index]
        sub_others = {free.index(j): v for j, v in (others or {}).items()}
        sub, sub_cov = solve_with_prior(
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


def robust_weighted(
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
    """Several balances (design, left-hand sides) fitted together, robustly, with a prior
    ``p0`` ± ``p_sd`` on column ``index`` (and ``others``).

    Columns scaled to unit size; each balance weighted by its own robust residual scale from a
    first pass; rows beyond four of those scales dropped (unmodelled loads, glitches). When
    a parameter that must be positive (``positive_cols``) is not (degenerate data: noise
    pushing the poorly determined direction anywhere), or ``hold`` asks for it, the
    prior-carrying one is held at its prior; the third result says so. Each row of
    ``shifts`` (one value per row of the stacked balances) is a change of the left-hand
    sides; the fourth result holds the parameters' first-order response to each, at the
    final weights.

    Returns
    -------
    (parameters, their covariance, held, responses to ``shifts``).
    """
    x_all = np.vstack([b[0] for b in blocks])
    y_all = np.concatenate([b[1] for b in blocks])
    scale = np.maximum(np.abs(x_all).max(axis=0), 1e-12)
    xs = x_all / scale
    dev = y_all - y_all.mean()
    y_scale = max(math.sqrt(float(dev @ dev) / max(dev.size, 1)), 1e-12)  # standard deviation

    def scaled(div: float) -> dict[int, tuple[float, float]]:
        return {j: (m * scale[j], sd * scale[j] / div) for j, (m, sd) in (others or {}).items()}

    coef, _ = solve_with_prior(
        xs, y_all, index, p0 * scale[index], p_sd * scale[index] / y_scale, others=scaled(y_scale)
    )
    wts = _balance_weights(blocks, coef / scale, 1e-9 * y_scale)
    keep = np.abs((y_all - xs @ coef) * wts) <= OUTLIER_CUT
    xw, yw = xs[keep] * wts[keep, None], y_all[keep] * wts[keep]
    params, cov = solve_with_prior(
        xw, yw, index, p0 * scale[index], p_sd * scale[index], others=scaled(1.0)
    )
    p_sd_post = math.sqrt(max(float(cov[index, index]), 0.0)) / scale[index]
    # Also held when the data narrow it less than halving the prior spread: a weakly identified
    # parameter moved by sensor bias is worse than the prior itself.
    weak = hold_when_weak and p_sd_post >= 0.5 * p_sd
    forced = hold or not all(params[j] > 0.0 for j in positive_cols) or weak
    if forced:
        params, cov = solve_with_prior(
            xw, yw, index, p0 * scale[index], p_sd * scale[index], fixed=True, others=scaled(1.0)
        )
    zero_mean = {j: (0.0, sd) for j, (_, sd) in scaled(1.0).items()}
    resp = np.array(
        [
            solve_with_prior(
                xw, dy[keep] * wts[keep], index, 0.0, p_sd * scale[index], forced, zero_mean
            )[0]
            / scale
            for dy in (np.zeros((0, y_all.size)) if shifts is None else shifts)
        ]
    ).reshape(-1, scale.size)
    return params / scale, cov / np.outer(scale, scale), forced, resp
