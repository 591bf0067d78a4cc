"""What every rule produces: a per-sample observation of its condition."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["BoolArray", "FloatArray", "IntArray", "Observations"]

IntArray = NDArray[np.int64]
FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]


@dataclass
class Observations:
    """Per-sample result of one rule, in time order.

    ``t`` [ms]; ``active`` the condition to open; ``hold`` the looser condition that keeps an
    open alert open (hysteresis); ``severity`` 1 warning / 2 critical; ``value`` the quantity
    whose extremes the evidence reports; ``detail`` per-sample facts for the evidence.
    """

    t: IntArray
    active: BoolArray
    hold: BoolArray
    severity: NDArray[np.int8]
    value: FloatArray
    detail: list[dict[str, Any]] | None = None

    @staticmethod
    def empty() -> Observations:
        return Observations(
            np.zeros(0, np.int64),
            np.zeros(0, bool),
            np.zeros(0, bool),
            np.zeros(0, np.int8),
            np.zeros(0, np.float64),
        )
