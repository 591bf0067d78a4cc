"""Data quality: which samples are usable for what, and why others were left out."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._validate import T_MAX_K, T_MIN_K, FloatArray
from .estimates import BoolArray
from .options import DEFAULT_OPTIONS, DiagnosticsOptions

__all__ = ["SampleFlags", "flag_samples"]


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
    breaks: BoolArray | None = None,
    probed: tuple[bool, bool] = (True, True),
    options: DiagnosticsOptions = DEFAULT_OPTIONS,
) -> SampleFlags:
    """Sort samples into usable or left out (missing channel, sensor fault, door).

    A face without a probe (``probed``) is no missing channel: its temperature is NaN where
    nothing reconstructed it, and the fits that need it leave those samples out themselves.

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
    breaks : Samples whose successor must not be consulted (the last sample of an analysis
        step), so that flags never depend on readings after the step; optional [-].
    probed : Whether the unit has a probe on its cold and on its hot face [-].
    options : ``on_current`` [A], ``settle_s`` [s], ``door_settle_s`` [s], ``spike_k`` [K].

    Returns
    -------
    The flags and the counts of samples left out by reason.
    """
    on_current = options.on_current
    t = np.asarray(time_s, dtype=np.float64)
    temps = np.vstack([t_cabinet, t_cold, t_hot, t_ambient]).astype(np.float64)
    i = np.asarray(current, dtype=np.float64)
    v = np.asarray(voltage, dtype=np.float64)
    required = np.array([True, *probed, True])
    finite = np.isfinite(temps)
    missing = ~(np.all(finite[required], axis=0) & np.isfinite(i) & np.isfinite(v))
    filled = np.where(finite, temps, 0.0)
    out_of_range = np.any(finite & ((filled < T_MIN_K) | (filled > T_MAX_K)), axis=0) | (
        np.nan_to_num(i) < -on_current
    )
    # A face without a probe is judged only where all three samples hold a value for it.
    judged = finite | required[:, None]
    spike = _spikes(filled, judged, i, on_current, options.spike_k, breaks)
    fault = (out_of_range | spike) & ~missing
    door = _door_settling(t, door_open, options.door_settle_s) & ~missing & ~fault

    on = np.nan_to_num(i) > on_current
    usable = ~missing & ~fault & ~door
    switch_t = t[1:][on[1:] != on[:-1]] if t.size > 1 else t[:0]
    last_switch = np.full(t.size, -np.inf)
    if switch_t.size:
        idx = np.searchsorted(switch_t, t, side="right") - 1
        last_switch = np.where(idx >= 0, switch_t[np.clip(idx, 0, None)], -np.inf)
    steady = usable & (t - last_switch >= options.settle_s)
    return SampleFlags(usable=usable, on=on, steady=steady, missing=missing, fault=fault, door=door)


def _spikes(
    x: FloatArray,
    judged: BoolArray,
    i: FloatArray,
    on_current: float,
    spike_k: float,
    breaks: BoolArray | None,
) -> BoolArray:
    # A spike leaves and rejoins its neighbours, which agree with each other; a real step
    # (the module switching) does not rejoin. Samples where the current changes are spared:
    # the faces then really jump. ``x`` holds the four temperatures, one row each [K];
    # ``judged`` marks the values a spike may be judged on.
    spike = np.zeros(x.shape[1], dtype=bool)
    if x.shape[1] >= 3:
        d_prev, d_next = x[:, 1:-1] - x[:, :-2], x[:, 1:-1] - x[:, 2:]
        jump = (
            (np.abs(d_prev) > spike_k)
            & (np.abs(d_next) > spike_k)
            & (np.sign(d_prev) == np.sign(d_next))
            & (np.abs(x[:, :-2] - x[:, 2:]) < spike_k)
            & judged[:, :-2]
            & judged[:, 1:-1]
            & judged[:, 2:]
        )
        ic = np.nan_to_num(i) > on_current
        steady_drive = (ic[1:-1] == ic[:-2]) & (ic[1:-1] == ic[2:])
        spike[1:-1] = np.any(jump, axis=0) & steady_drive
        if breaks is not None:
            spike &= ~np.asarray(breaks, dtype=bool)
    return spike


def _door_settling(t: FloatArray, door_open: BoolArray | None, door_settle_s: float) -> BoolArray:
    # Samples with the door open or shut for at most door_settle_s.
    if door_open is None:
        return np.zeros(t.size, dtype=bool)
    d = np.asarray(door_open, dtype=bool)
    # Time since the last sample with the door open, carried forward.
    last_open = np.where(d, t, -np.inf)
    last_open = np.maximum.accumulate(last_open) if t.size else last_open
    return np.asarray(t - last_open <= door_settle_s, dtype=bool)
