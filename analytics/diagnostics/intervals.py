"""The reporting interval of a series of readings, and the balances' time scales set by it.

A unit that reports every 5 or 15 minutes (a battery, cellular or low-power one) gives the
same energy balances as one that reports every minute, only over longer stretches: each
integral is still the sum of trapezoids between samples (or of interval means, where the
readings carry them), and integrating a lumped balance over a stretch needs no derivative
(Incropera et al. 2007, ch. 5). What changes is how many samples a segment or block holds. The
thresholds in :class:`.DiagnosticsOptions` are stated for one-minute readings; here they are
stretched, never shrunk, so that a segment, a block and a stretch hold about as many sample
pairs at any interval as they do at one minute. At one-minute readings nothing changes.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .._validate import FloatArray
from .options import DiagnosticsOptions

__all__ = ["interval_basis", "scaled_for_interval", "usual_interval"]


def usual_interval(time_s: FloatArray) -> float:
    """The series' usual interval between readings: the median of its positive gaps [s]
    (0 for fewer than two readings).

    The median keeps it to what the unit normally does, whatever its gaps and missed
    readings; an irregular unit's is its typical one.
    """
    h = np.diff(np.asarray(time_s, dtype=np.float64))
    h = h[h > 0.0]
    return float(np.median(h)) if h.size else 0.0


def scaled_for_interval(options: DiagnosticsOptions, interval_s: float) -> DiagnosticsOptions:
    """``options`` with the balances' time scales stretched to readings ``interval_s`` apart.

    The largest gap integrated across becomes ``max_gap_intervals`` usual intervals, the sink
    segments ``segment_intervals`` and the cabinet blocks ``block_intervals`` of them, each
    at least its one-minute value: the balances keep the number of samples behind each of
    their rows. Parameters: the options for one-minute readings; the usual interval [s].
    """
    if not interval_s > 0.0:
        return options
    return dataclasses.replace(
        options,
        max_gap_s=max(options.max_gap_s, options.max_gap_intervals * interval_s),
        segment_s=max(options.segment_s, options.segment_intervals * interval_s),
        cabinet_block_s=max(options.cabinet_block_s, options.block_intervals * interval_s),
    )


def interval_basis(interval_s: float, summaries: bool = False) -> str:
    """The few words an estimate's basis gives for the readings it rests on, e.g.
    "5-minute instants" or "15-minute interval means" (interval [s])."""
    if not interval_s > 0.0:
        return "no readings"
    minutes = interval_s / 60.0
    size = f"{minutes:.0f}-minute" if minutes >= 0.95 else f"{interval_s:.0f}-second"
    return f"{size} {'interval means' if summaries else 'instants'}"
