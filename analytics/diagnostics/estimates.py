"""The estimate type the diagnostics serve, and first-order propagation of errors."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import TypeAlias

import numpy as np
from numpy.typing import NDArray

from .._validate import FloatArray

__all__ = ["BoolArray", "Estimate", "propagate"]

BoolArray: TypeAlias = NDArray[np.bool_]


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
    basis : What it rests on (the channels and the method), in words; None: the basis of
        the estimates it is stored with.
    """

    value: float
    stderr: float | None
    n: int
    reliable: bool = True
    note: str | None = None
    basis: str | None = None


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
