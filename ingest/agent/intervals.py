"""Interval reports: one reading per reporting interval, with the interval's summaries.

A unit that samples fast and reports slowly sends, per interval, the last sample (the instant
fields) and what happened over the interval (the payload's summary fields, see
``ingest/PAYLOAD.md``): time-weighted means of each temperature, of the current, of its square
and of the electrical power, the share of time the module was on, and the cabinet's extremes.

Intervals tile time without overlap or hole: an interval runs from the previous report's
sample to the last sample at or before the next multiple of ``every_s`` (Unix time), and that
sample is the report. A report is made once a sample at or past that boundary has been seen.

Means are time averages by the trapezoid rule over each channel's own samples:
mean = (1/T) * sum_k (t_{k+1} - t_k) * (x_k + x_{k+1}) / 2 (definition of a time average and
the trapezoid rule of elementary calculus; common practice, no source). Why the trapezoid and
not sample-and-hold: it is exact for a quantity that changes linearly between samples (a
temperature over a few seconds), and for an on/off switch at an unknown moment between two
samples it counts half the gap to each state, which is the expected share when the moment is
equally likely anywhere in the gap; sample-and-hold would credit the whole gap to the earlier
state. Each summed quantity (I, I*I, V*I, on) is a series of its own, so the mean of the
square is the mean of the squared samples, never the square of the mean. Extremes are the
sampled ones.

Nothing is invented over a hole: a channel whose samples are more than ``max_gap_s`` apart
(or start or end that far from the interval's ends) has no mean for that interval; without
the means of the four required channels, or over an interval shorter than ``min_coverage``
of ``every_s`` (the first after a start, or one cut by a gap), the report goes out with its
instant fields only.
"""

from __future__ import annotations

import bisect
import itertools
import math
import statistics
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field

from tecfleet.ingest.agent.options import CHANNELS, ReportOptions
from tecfleet.ingest.agent.sources import Sample, Value

#: Temperatures whose interval means are sent: cabinet and ambient always, a face only where
#: the unit has its probe.
MEAN_CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient")
REQUIRED_MEANS = ("t_cabinet_mean", "t_ambient_mean", "current_mean", "power_mean")


@dataclass(frozen=True, slots=True)
class IntervalSummary:
    """The summary fields of one interval (payload names), or none and the reason why."""

    fields: dict[str, float] = field(default_factory=dict)
    reason: str | None = None


@dataclass(frozen=True, slots=True)
class Report:
    """One reading to send: its time [s], instant fields, and the interval's summary."""

    ts_s: float
    values: dict[str, Value]
    summary: IntervalSummary


def trapezoid_mean(times: Sequence[float], values: Sequence[float]) -> float:
    """Time average of samples by the trapezoid rule.

    mean = sum_k dt_k * (x_k + x_{k+1}) / 2 / sum_k dt_k, dt_k = t_{k+1} - t_k (trapezoid
    rule; common practice, no source), as a weighted mean of the segments' midpoints.

    times: sample times, increasing, at least two distinct [s]
    values: the samples, one per time [unit of the quantity]
    """
    spans = [b - a for a, b in itertools.pairwise(times)]
    middles = [(a + b) / 2.0 for a, b in itertools.pairwise(values)]
    return statistics.fmean(middles, weights=spans)


def _series(
    samples: Sequence[Sample], of: Callable[[dict[str, Value]], float | None]
) -> tuple[list[float], list[float]]:
    times, values = [], []
    for sample in samples:
        value = of(sample.values)
        if value is not None and sample.ts_s is not None:
            times.append(sample.ts_s)
            values.append(value)
    return times, values


def _covered(times: list[float], start_s: float, end_s: float, max_gap_s: float) -> bool:
    """True when samples bridge [start_s, end_s] with no hole over ``max_gap_s``."""
    if len(times) < 2 or times[-1] <= times[0]:
        return False
    edges = [start_s, *times, end_s]
    return max(b - a for a, b in itertools.pairwise(edges)) <= max_gap_s


def _number(values: dict[str, Value], name: str) -> float | None:
    value = values.get(name)
    return None if value is None or isinstance(value, bool) else float(value)


def _channel(name: str) -> Callable[[dict[str, Value]], float | None]:
    return lambda values: _number(values, name)


def _current_squared(values: dict[str, Value]) -> float | None:
    current = _number(values, "current")
    return None if current is None else current * current


def _power(values: dict[str, Value]) -> float | None:
    current, volts = _number(values, "current"), _number(values, "voltage")
    return None if current is None or volts is None else volts * current


def _on_above(on_above_a: float) -> Callable[[dict[str, Value]], float | None]:
    def on(values: dict[str, Value]) -> float | None:
        current = _number(values, "current")
        return None if current is None else float(current > on_above_a)

    return on


def summarise(samples: Sequence[Sample], on_above_a: float, max_gap_s: float) -> IntervalSummary:
    """The summary fields of the interval from the first to the last sample.

    Trapezoid time averages (see the module's docstring) of each temperature [°C], the current
    [A], its square [A²], V*I [W] and of the on indicator (current above ``on_above_a``) [-];
    the sampled least and greatest cabinet temperature [°C]; ``interval_s`` the interval [s].

    samples: the interval's samples, oldest first, all with a time; channels as sent [units of
        the payload]
    on_above_a: a current above this counts as the module on [A]
    max_gap_s: longest hole a mean may bridge [s]
    """
    stamped = [s for s in samples if s.ts_s is not None]
    if len(stamped) < 2:
        return IntervalSummary(reason="fewer than two samples")
    start_s, end_s = stamped[0].ts_s, stamped[-1].ts_s
    assert start_s is not None and end_s is not None
    if end_s <= start_s:
        return IntervalSummary(reason="the samples span no time")
    quantities: dict[str, Callable[[dict[str, Value]], float | None]] = {
        **{f"{name}_mean": _channel(name) for name in MEAN_CHANNELS},
        "current_mean": _channel("current"),
        "current_sq_mean": _current_squared,
        "power_mean": _power,
        "on_share": _on_above(on_above_a),
    }
    out: dict[str, float] = {"interval_s": end_s - start_s}
    for name, of in quantities.items():
        times, values = _series(stamped, of)
        if _covered(times, start_s, end_s, max_gap_s):
            out[name] = trapezoid_mean(times, values)
        elif times and name in REQUIRED_MEANS:
            return IntervalSummary(reason=f"{name} has a hole over {max_gap_s:g} s")
    missing = [name for name in REQUIRED_MEANS if name not in out]
    if missing:
        return IntervalSummary(reason=f"no samples for {', '.join(missing)}")
    if out["power_mean"] < 0.0:
        # A module's electrical power is not negative: the voltage's sign or offset is wrong,
        # and the payload would refuse the reading; the instants still go out.
        return IntervalSummary(reason="negative mean power (check the voltage's sign)")
    _, cabinet = _series(stamped, _channel("t_cabinet"))
    out["t_cabinet_min"], out["t_cabinet_max"] = min(cabinet), max(cabinet)
    return IntervalSummary(fields=out)


def latest_values(samples: Sequence[Sample]) -> dict[str, Value]:
    """Each channel's newest value among the samples (oldest first)."""
    out: dict[str, Value] = {}
    for sample in samples:
        out.update(sample.values)
    return {name: out[name] for name in CHANNELS if name in out}


def next_boundary(start_s: float, following_s: float, every_s: float) -> float:
    """The report boundary after an interval starting at ``start_s``: the first multiple of
    ``every_s`` after it, or, when no sample comes before that, the first one at or after the
    next sample (``following_s``), so a hole over a boundary lands inside one interval [s]."""
    after_start = (math.floor(start_s / every_s) + 1.0) * every_s
    return max(after_start, math.ceil(following_s / every_s) * every_s)


def close_intervals(
    samples: Sequence[Sample], options: ReportOptions
) -> tuple[list[Report], float | None]:
    """The reports of every interval the samples close, and the time from which samples must
    be kept (the last report's, the next interval's start) [s]; (``[]``, None) when none closes.

    samples: samples with a time, oldest first; the first starts the open interval [units of
        the payload]
    options: the reporting interval, the on threshold, the largest hole and the coverage
    """
    times = [s.ts_s for s in samples if s.ts_s is not None]
    if len(times) != len(samples):
        raise ValueError("every sample needs a time before intervals can close")
    reports: list[Report] = []
    start = 0
    while start + 1 < len(samples):
        boundary = next_boundary(times[start], times[start + 1], options.every_s)
        if times[-1] < boundary:
            break
        end = bisect.bisect_right(times, boundary) - 1
        chunk = samples[start : end + 1]
        summary = IntervalSummary(reason="summaries are off")
        if options.summaries:
            summary = summarise(chunk, options.on_above_a, options.max_gap_s)
            span = times[end] - times[start]
            if summary.fields and span < options.min_coverage * options.every_s:
                summary = IntervalSummary(reason=f"covers {span:.0f} s of {options.every_s:g} s")
        reports.append(Report(times[end], latest_values(chunk), summary))
        start = end
    return reports, (reports[-1].ts_s if reports else None)
