"""Integral form of the energy balances: trapezoidal integrals summed over fixed segments.

Integrating a balance over a segment removes the need for noisy derivatives:
∫C·dT/dt dt = C·(T_end - T_start). Each pair of consecutive samples contributes its
trapezoid 0.5·(f_k + f_k+1)·h_k to the segment its first sample falls in; where the later
sample carries the mean of f over the interval it closes (an interval summary), the pair
contributes that mean times h_k instead, which is the integral itself.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from .._validate import FloatArray
from .estimates import BoolArray
from .least_squares import segment_sums

__all__ = ["SampleGrid", "Segments"]

#: A segment counts when its usable pairs cover at least this share of its length [-] (common
#: practice, no source).
MIN_SEGMENT_COVER = 0.6


@dataclass(frozen=True)
class Segments:
    """Sample pairs grouped into segments of fixed length; only well-covered ones count.

    Attributes
    ----------
    seg : Segment of each pair in use [-].
    n_seg : Number of segments spanned [-].
    use : Pairs in use [-].
    good : Segments covered well enough to count [-].
    seg_all : Segment of every pair [-].
    """

    seg: NDArray[np.int64]
    n_seg: int
    use: BoolArray
    good: BoolArray
    seg_all: NDArray[np.int64]

    @property
    def n_good(self) -> int:
        """Segments that count [-]."""
        return int(self.good.sum())

    def sums(self, f: FloatArray) -> FloatArray:
        """Per-pair values ``f`` summed over each segment that counts [units of f]."""
        return segment_sums(self.seg, self.n_seg, f[self.use])[self.good]


@dataclass(frozen=True)
class SampleGrid:
    """Sample times and the intervals between them.

    Attributes
    ----------
    t : Sample times [s].
    h : Intervals, ``t[k+1] - t[k]`` [s].
    closing : Pairs whose later sample holds the mean over the interval it closes, or None
        (instants throughout) [-].
    """

    t: FloatArray
    h: FloatArray
    closing: BoolArray | None = None

    @classmethod
    def of(cls, t: FloatArray, closing: BoolArray | None = None) -> SampleGrid:
        """The grid of sample times ``t`` [s]; ``closing`` as the attribute."""
        return cls(t, np.diff(t), closing)

    def trap(self, f: FloatArray) -> FloatArray:
        """Integral of ``f`` over each interval: its trapezoid, or where the pair is
        ``closing``, the later sample's interval mean times the interval [units of f·s]."""
        out = 0.5 * (f[:-1] + f[1:]) * self.h
        if self.closing is not None:
            out = np.where(self.closing, f[1:] * self.h, out)
        return np.asarray(out, dtype=np.float64)

    def segments(self, length: float, use: BoolArray) -> Segments:
        """Pairs ``use`` grouped into segments of ``length`` [s] from the first sample."""
        t, h = self.t, self.h
        seg_all = np.floor((t[:-1] - t[0]) / length).astype(np.int64)
        seg = seg_all[use]
        n_seg = int(seg_all.max()) + 1 if seg_all.size else 0
        good = segment_sums(seg, n_seg, h[use]) >= MIN_SEGMENT_COVER * length
        return Segments(seg, n_seg, use, good, seg_all)
