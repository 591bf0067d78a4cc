"""Input checks and array plumbing shared by the physics modules (private)."""

from __future__ import annotations

import math
from typing import TypeAlias

import numpy as np
from numpy.typing import NDArray

from .errors import OutOfDomainError

FloatArray: TypeAlias = NDArray[np.float64]
FloatOrArray: TypeAlias = float | FloatArray

#: Lower end of the documented temperature domain, -60 °C [K].
T_MIN_K = 213.15
#: Upper end of the documented temperature domain, 150 °C [K].
T_MAX_K = 423.15
#: 0 °C [K].
T_0C_K = 273.15
#: 25 °C [K].
T_25C_K = 298.15


def finite(x: FloatOrArray, name: str) -> FloatArray:
    """Return ``x`` as a float64 array, refusing NaN and infinities."""
    a = np.asarray(x, dtype=np.float64)
    # One reduction on the usual path: a sum is finite only if every term is (or it
    # overflows, which the exact check below then sorts out).
    if not math.isfinite(float(a.sum())) and not np.all(np.isfinite(a)):
        raise OutOfDomainError(f"{name} must be finite, got {x!r}")
    return a


def positive(x: FloatOrArray, name: str) -> FloatArray:
    """Return ``x`` as an array, refusing values that are not strictly positive."""
    a = np.asarray(x, dtype=np.float64)
    if a.size and float(a.min()) > 0.0 and math.isfinite(float(a.max())):
        return a
    a = finite(x, name)
    if np.any(a <= 0.0):
        raise OutOfDomainError(f"{name} must be > 0, got {x!r}")
    return a


def non_negative(x: FloatOrArray, name: str) -> FloatArray:
    """Return ``x`` as an array, refusing negative values."""
    a = np.asarray(x, dtype=np.float64)
    if a.size and float(a.min()) >= 0.0 and math.isfinite(float(a.max())):
        return a
    a = finite(x, name)
    if np.any(a < 0.0):
        raise OutOfDomainError(f"{name} must be >= 0, got {x!r}")
    return a


def temperature(x: FloatOrArray, name: str) -> FloatArray:
    """Return a temperature [K] as an array, refusing values outside -60..150 °C."""
    a = np.asarray(x, dtype=np.float64)
    # The usual path: two reductions (NaN fails both comparisons and goes to the checks that
    # name the fault).
    if a.size and float(a.min()) >= T_MIN_K and float(a.max()) <= T_MAX_K:
        return a
    a = finite(x, name)
    if np.any(a < 0.0):
        raise OutOfDomainError(f"{name} is below absolute zero: {x!r} K")
    if np.any(a < T_MIN_K) or np.any(a > T_MAX_K):
        raise OutOfDomainError(
            f"{name} must lie within {T_MIN_K}..{T_MAX_K} K (-60..150 °C), got {x!r} K"
        )
    return a


def out(a: FloatArray) -> FloatOrArray:
    """Return a 0-d result as a Python float and anything else as an array."""
    if a.ndim == 0:
        return float(a)
    return a
