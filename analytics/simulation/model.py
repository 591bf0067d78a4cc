"""A fleet of thermoelectric coolers stepped in time: the :class:`Simulator`.

Each output step: the surroundings (:mod:`.surroundings`: climate, doors, loads, power cuts),
the faults' effect on the parameters, the thermal model (:mod:`.thermal`, which documents the
physics and the integration scheme), the ground truth's windows, then the sensors
(:mod:`.sensors`) and the chunk (:mod:`.chunk`).

Everything random comes from ``numpy.random.Generator(PCG64)`` streams spawned from one
seed, one stream per kind of draw, each drawing a fixed count per output step, so the data
are identical for a seed whatever the chunking.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from numpy.typing import NDArray

from .chunk import Chunk
from .sensors import SensorModel
from .specs import FAULT_KINDS, FAULT_PARAM, T0_K, DeviceSpec, Fault, FleetSpec
from .surroundings import Climate, Use
from .thermal import SUMMARY_KEYS, ThermalModel
from .truth import FleetTruth

__all__ = ["Simulator", "simulate"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

#: Device parameters the model reads, as columns over devices.
_PARAMS = (
    "s25",
    "r25",
    "k",
    "i_limit",
    "ua",
    "r_hot",
    "r_cold",
    "c_air",
    "c_cold_sink",
    "c_hot_sink",
    "c_contents",
    "g_contents",
    "q_internal",
    "setpoint_c",
    "hysteresis_k",
    "v_supply",
    "kp_a_per_k",
    "i_bias_a",
    "ctrl_bias_k",
    "door_per_day",
    "door_mean_s",
    "g_door",
    "loads_per_day",
    "load_fraction",
    "cuts_per_30d",
    "cut_mean_s",
    "t_amb_mean_c",
    "t_amb_daily_k",
    "t_amb_phase_h",
    "t_amb_weather_k",
    "t_amb_tau_h",
    "rh_mean",
    "utc_offset_h",
)
#: True state recorded at every output step (``Chunk.truth``; ``rh`` is added at the end).
_STATE_KEYS = (
    "t_air",
    "t_contents",
    "t_cold",
    "t_hot",
    "t_ambient",
    "current",
    "voltage",
    "on",
    "door_s",
    "powered",
)
_ENERGY_KEYS = ("wall", "internal", "loads", "electrical", "rejected", "stored")


#: Summaries that are temperatures (kelvin in the model, °C in the chunk).
_SUMMARY_TEMPS = ("mean_t_air", "mean_t_cold", "mean_t_hot", "min_t_air", "max_t_air")


class _Streams:
    """One PCG64 generator per kind of draw, all spawned from the fleet seed."""

    NAMES = (
        "weather",
        "noise",
        "jitter",
        "missed",
        "door",
        "door_len",
        "load",
        "cut",
        "cut_len",
        "dropout",
        "ambient_noise",
    )

    def __init__(self, seed: int) -> None:
        children = np.random.SeedSequence(seed).spawn(len(self.NAMES) + 1)
        self.gen = {
            n: np.random.Generator(np.random.PCG64(c))
            for n, c in zip(self.NAMES, children[1:], strict=True)
        }


def _col(devices: Sequence[DeviceSpec], name: str) -> FloatArray:
    return np.array([float(getattr(d, name)) for d in devices], dtype=np.float64)


class Simulator:
    """Time-stepping model of every cooler of a :class:`FleetSpec`, vectorised over devices."""

    def __init__(self, spec: FleetSpec) -> None:
        self.spec = spec
        devs = spec.devices
        self.n = len(devs)
        self.ids = [d.device_id for d in devs]
        self.index = {d: i for i, d in enumerate(self.ids)}
        self.p = p = {name: _col(devs, name) for name in _PARAMS}
        self.streams = _Streams(spec.seed)
        gen = self.streams.gen
        self.interval = float(spec.interval_s)
        self.n_sub = max(1, math.ceil(self.interval / spec.max_substep_s))
        self.step_index = 0
        self.t_next = float(spec.start_s)
        self.faults = self._faults_by_kind(spec.faults)
        events = [(self.index[e.device_id], e) for e in spec.events]
        self.use = Use(p, self.interval, gen, events, random_use=spec.random_use)
        self.sensors = SensorModel(devs, self.faults, self.interval, gen, enabled=spec.sensors)
        proportional = np.array([d.control == "proportional" for d in devs])
        self.thermal = ThermalModel(
            p, proportional, self.interval, self.n_sub, warm=spec.warm_start,
            summaries=spec.summaries,
        )  # fmt: skip
        self.climate = Climate(p, self.interval, gen["weather"])
        self.truth = FleetTruth(spec)
        self.limits = (
            np.array([d.low_limit_c for d in devs]),
            np.array([d.high_limit_c for d in devs]),
        )
        self.excursions = _ExcursionLog(self.ids, self.truth, self.limits)

    def _faults_by_kind(self, faults: Sequence[Fault]) -> dict[str, list[tuple[int, Fault]]]:
        by_kind: dict[str, list[tuple[int, Fault]]] = {}
        for f in faults:
            if f.kind not in FAULT_KINDS:
                raise ValueError(f"unknown fault kind {f.kind!r}")
            by_kind.setdefault(f.kind, []).append((self.index[f.device_id], f))
        return by_kind

    def _factors(self, t: FloatArray) -> dict[str, FloatArray]:
        """Multiplier of each faulted parameter at times ``t``, arrays (m, n)."""
        m = t.shape[0]
        out = {name: np.ones((m, self.n)) for name in set(FAULT_PARAM.values())}
        for kind, param in FAULT_PARAM.items():
            for i, f in self.faults.get(kind, []):
                out[param][:, i] *= 1.0 + (f.magnitude - 1.0) * f.factor(t)
        return out

    def run(self, n_steps: int) -> Chunk:
        """Advance ``n_steps`` output intervals and return what happened."""
        m, n = int(n_steps), self.n
        t = self.t_next + self.interval * np.arange(m, dtype=np.float64)
        t_amb_all, rh_all = self.climate.at(t)
        fac = self._factors(t)
        door_start, load_all, cut_start = self.use.starts(t)
        keys = _STATE_KEYS + (SUMMARY_KEYS if self.spec.summaries else ())
        tr = {k: np.empty((m, n)) for k in keys}
        en = {k: np.zeros((m, n)) for k in _ENERGY_KEYS}
        door_s_all, powered_all = self.use.door_and_power(door_start, cut_start)
        self.thermal.advance(fac, door_s_all, powered_all, t_amb_all, load_all, tr, en)
        for j, i in zip(*np.nonzero(load_all), strict=True):
            self.truth.loads.setdefault(self.ids[i], []).append(float(t[j]))
        tr["t_ambient"][:] = t_amb_all
        tr["on"][:] = tr["current"] > 0.0
        tr["door_s"][:] = door_s_all
        tr["powered"][:] = powered_all
        for key in ("t_air", "t_contents", "t_cold", "t_hot", "t_ambient", *_SUMMARY_TEMPS):
            if key in tr:
                tr[key] -= T0_K
        tr["rh"] = rh_all
        self.excursions.record(t, tr, cut_start)
        return self._assemble(t, tr, en)

    def open_excursions(self) -> dict[str, float]:
        """Devices whose cabinet is outside its limits now, with the time it left them."""
        return self.excursions.open()

    def _assemble(
        self, t: FloatArray, tr: dict[str, FloatArray], en: dict[str, FloatArray]
    ) -> Chunk:
        """The sensors' view of the true state ``tr``, and the chunk of it."""
        m, n = t.shape[0], self.n
        measured, ts, present = self.sensors.measure(t, tr)
        summaries = self.sensors.summarise(tr) if self.spec.summaries else {}
        self.t_next = float(t[-1] + self.interval) if m else self.t_next
        first = self.step_index
        self.step_index += m
        seq_arr = np.broadcast_to(
            np.arange(first, first + m, dtype=np.int64)[:, None], (m, n)
        ).copy()
        return Chunk(t, ts, seq_arr, present, tr, measured, en, self.ids, summaries)


class _ExcursionLog:
    """Writes power cuts and cabinet excursions (outside the limits for 15 minutes or more)
    into the truth as the chunks come."""

    def __init__(
        self, ids: list[str], truth: FleetTruth, limits: tuple[FloatArray, FloatArray]
    ) -> None:
        self.ids = ids
        self.truth = truth
        self.limits = limits
        self.outside_since: list[float | None] = [None] * len(ids)

    def record(self, t: FloatArray, tr: dict[str, FloatArray], cut: FloatArray) -> None:
        """Power cuts starting in the chunk, and excursions of the cabinet air (°C in ``tr``)."""
        for j, i in zip(*np.nonzero(cut), strict=True):
            dev = self.ids[i]
            self.truth.power_cuts.setdefault(dev, []).append((float(t[j]), float(cut[j, i])))
        low, high = self.limits
        outside = (tr["t_air"] < low) | (tr["t_air"] > high)
        changed = np.nonzero(
            outside.any(axis=0) | np.array([s is not None for s in self.outside_since])
        )[0]
        for i in changed:
            dev = self.ids[i]
            for j in range(t.shape[0]):
                since = self.outside_since[i]
                if outside[j, i] and since is None:
                    self.outside_since[i] = float(t[j])
                elif not outside[j, i] and since is not None:
                    if t[j] - since >= 15 * 60:  # shorter swings are door noise
                        self.truth.excursions.setdefault(dev, []).append((since, float(t[j])))
                    self.outside_since[i] = None

    def open(self) -> dict[str, float]:
        """Devices whose cabinet is outside its limits now, with the time it left them."""
        return {self.ids[i]: s for i, s in enumerate(self.outside_since) if s is not None}


def simulate(
    spec: FleetSpec, days: float, chunk_steps: int = 1440
) -> tuple[list[Chunk], FleetTruth]:
    """Run a whole fleet for ``days`` and return the chunks and the truth (for tests)."""
    sim = Simulator(spec)
    total = round(days * 86_400.0 / spec.interval_s)
    chunks = []
    done = 0
    while done < total:
        k = min(chunk_steps, total - done)
        chunks.append(sim.run(k))
        done += k
    return chunks, sim.truth
