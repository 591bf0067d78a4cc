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
from dataclasses import dataclass

import numpy as np

from .._validate import FloatArray
from .estimates import BoolArray
from .options import DiagnosticsOptions

__all__ = [
    "COVER_SHARE",
    "IntervalMeans",
    "closing_pairs",
    "interval_basis",
    "scaled_for_interval",
    "usual_interval",
]

#: A summary stands for a pair of samples when the interval it covers is at least this share
#: of the time between them: a reading missed before it leaves the earlier part unsummarised
#: (common practice, no source) [-].
COVER_SHARE = 0.75


@dataclass(frozen=True)
class IntervalMeans:
    """What each reading says of the interval it closes (NaN where it says nothing).

    Attributes
    ----------
    interval : The interval covered, ending at the reading [s].
    t_cabinet, t_cold, t_hot, t_ambient : Mean temperatures over it [K].
    current : Mean current [A].
    current_sq : Mean of the current's square [A²].
    power : Mean electrical power into the module [W].
    on_share : Share of the interval the module was on [-].
    """

    interval: FloatArray
    t_cabinet: FloatArray
    t_cold: FloatArray
    t_hot: FloatArray
    t_ambient: FloatArray
    current: FloatArray
    current_sq: FloatArray
    power: FloatArray
    on_share: FloatArray

    def part(self, sl: slice) -> IntervalMeans:
        """The means of the readings in ``sl``."""
        return IntervalMeans(*(getattr(self, f.name)[sl] for f in dataclasses.fields(self)))

    def complete(self) -> BoolArray:
        """Readings that carry every mean the energy balances use [-]."""
        ok = np.isfinite(self.interval)
        for f in dataclasses.fields(self):
            ok &= np.isfinite(getattr(self, f.name))
        return np.asarray(ok, dtype=bool)


def closing_pairs(time_s: FloatArray, means: IntervalMeans) -> BoolArray:
    """Sample pairs whose later reading's means stand for the whole pair: every balance mean
    present and covering at least ``COVER_SHARE`` of the time between the two [-]."""
    h = np.diff(np.asarray(time_s, dtype=np.float64))
    ok = means.complete()[1:] & (means.interval[1:] >= COVER_SHARE * h)
    return np.asarray(ok, dtype=bool)


def usual_interval(time_s: FloatArray) -> float:
    """The series' usual interval between readings: the median of its positive gaps [s]
    (0 for fewer than two readings).

    The median keeps it to what the unit normally does, whatever its gaps and missed
    readings; an irregular unit's is its typical one.
    """
    h = np.diff(np.asarray(time_s, dtype=np.float64))
    h = h[h > 0.0]
    return float(np.median(h)) if h.size else 0.0


def scaled_for_interval(
    options: DiagnosticsOptions, interval_s: float, summarised: bool = False
) -> DiagnosticsOptions:
    """``options`` with the balances' time scales stretched to readings ``interval_s`` apart.

    The largest gap integrated across becomes ``max_gap_intervals`` usual intervals, the sink
    segments ``segment_intervals`` and the cabinet blocks ``block_intervals`` of them, each
    at least its one-minute value: the balances keep the number of samples behind each of
    their rows; warm goods' releases are fitted only up to ``releases_max_interval_s``.
    Where the readings carry interval summaries (``summarised``) each pair's
    integral is exact whatever the interval, so only the largest gap grows. Parameters: the
    options for one-minute readings; the usual interval [s]; whether summaries are used.
    """
    if not interval_s > 0.0:
        return options
    if summarised:
        return dataclasses.replace(
            options, max_gap_s=max(options.max_gap_s, options.max_gap_intervals * interval_s)
        )
    return dataclasses.replace(
        options,
        max_gap_s=max(options.max_gap_s, options.max_gap_intervals * interval_s),
        segment_s=max(options.segment_s, options.segment_intervals * interval_s),
        cabinet_block_s=max(options.cabinet_block_s, options.block_intervals * interval_s),
        warm_goods_releases=(
            options.warm_goods_releases and interval_s <= options.releases_max_interval_s
        ),
    )


def interval_basis(interval_s: float, summaries: bool = False) -> str:
    """The few words an estimate's basis gives for the readings it rests on, e.g.
    "5-minute instants" or "15-minute interval means" (interval [s])."""
    if not interval_s > 0.0:
        return "no readings"
    minutes = interval_s / 60.0
    size = f"{minutes:.0f}-minute" if minutes >= 0.95 else f"{interval_s:.0f}-second"
    return f"{size} {'interval means' if summaries else 'instants'}"
