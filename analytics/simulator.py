"""Physics-based simulator of a fleet of thermoelectric coolers.

Each cooler is the network of :mod:`.heat_paths`::

    ambient --UA(+door)-- cabinet air --G-- contents
                            |
                         r_cold (inner fan)
                            |
                         cold face [module S, R, K] hot face --r_hot (fan)-- ambient

with the module of :mod:`.physics` (Qc = S·I·Tc - ½I²R - K·ΔT, Qh = Qc + P), S and R
evaluated at the mean face temperature (:func:`.physics.seebeck_at_temperature`,
:func:`.physics.resistance_at_temperature`, same linear law inlined for speed).

Integration scheme (per sub-step of ``interval_s / n_sub``, default 20 s at most):

* The module faces carry their sinks' heat capacity (``c_cold_sink``, ``c_hot_sink``; 0 by
  default, massless faces), backward Euler: at a fixed current and fixed S, R the two face
  balances are linear in (Tc, Th) and the cabinet air temperature, so Tc, Th and Qc are
  solved in closed form as linear functions of the air temperature at the *end* of the
  sub-step.
* Air and contents use backward Euler with those linear functions substituted, so the
  whole step is implicit in the temperatures and unconditionally stable; air reacts in
  minutes (C_air / total conductance), contents in hours (C_contents / G).
* Current (voltage drive: I = (V - S·ΔT)/R) and S, R use the faces of the previous
  sub-step (a one-sub-step lag; it vanishes at steady state). The reported terminal
  voltage is S·ΔT + I·R with S and R at the reported faces, as a module's terminals show.

Because every flux of a sub-step is evaluated at the same end-of-step state, the discrete
first law closes to rounding: heat through the walls + door + internal + loads + electrical
power = heat rejected at the hot face + change of stored heat. ``Chunk.energy`` carries
those terms.

Everything random comes from ``numpy.random.Generator(PCG64)`` streams spawned from one
seed, one stream per kind of draw, each drawing a fixed count per output step, so the data
are identical for a seed whatever the chunking.

Plausible values (common practice, no source) are noted where they are chosen.
"""

from __future__ import annotations

import argparse
import json
import math
from collections.abc import Iterable, Sequence
from dataclasses import asdict, dataclass, field, replace
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.signal import lfilter

from . import heat_paths, physics
from ._validate import T_25C_K

__all__ = [
    "CHANNELS",
    "Chunk",
    "DeviceSpec",
    "Fault",
    "FleetSpec",
    "FleetTruth",
    "ScheduledEvent",
    "Simulator",
    "add_simulate_arguments",
    "device_from_ratings",
    "parse_fault_mix",
    "random_fleet",
    "run_simulate",
    "simulate",
]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

T0_K = 273.15
T25_K = T_25C_K
ALPHA_R = physics.BI2TE3_RESISTANCE_TEMPCO
BETA_S = physics.BI2TE3_SEEBECK_TEMPCO

#: Measured channels in payload order.
CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient", "current", "voltage", "rh")
_TEMP_CHANNELS = ("t_cabinet", "t_cold", "t_hot", "t_ambient")
#: Reported quantisation of each channel (a 0.1 °C probe, 10 mA / 10 mV ADC steps).
QUANTUM = {
    "t_cabinet": 0.1,
    "t_cold": 0.1,
    "t_hot": 0.1,
    "t_ambient": 0.1,
    "current": 0.01,
    "voltage": 0.01,
    "rh": 0.1,
}
_DECIMALS = {name: (1 if q >= 0.1 else 2) for name, q in QUANTUM.items()}
#: What a disconnected 1-wire temperature probe reads (the usual error code of such
#: probes; outside the ingester's -60..150 °C, so the reading is refused by design).
PROBE_ERROR_C = -127.0

#: Typical 127-couple module: Imax 6 A, Vmax 14.7 V, ΔTmax 67 K, Qmax 52 W at 27 °C
#: (datasheet-like figures, common practice, no source). Gives S ≈ 0.049 V/K,
#: R ≈ 1.9 ohm, K ≈ 0.51 W/K.
STANDARD_RATINGS: dict[str, float] = {
    "couples": 127,
    "i_max_a": 6.0,
    "v_max_v": 14.7,
    "dt_max_k": 67.0,
    "q_max_w": 52.0,
    "t_hot_rated_c": 27.0,
    "count": 1,
}

FAULT_KINDS = ("wear", "leak", "fan", "inner_fan", "sag", "sensor", "offline")
#: Parameter each physical fault multiplies.
_FAULT_PARAM = {
    "wear": "r25",
    "leak": "ua",
    "fan": "r_hot",
    "inner_fan": "r_cold",
    "sag": "v_supply",
}


# ---------------------------------------------------------------------------
# Specification
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Fault:
    """A fault on one device.

    ``magnitude`` is the final multiplier of the parameter for physical faults (wear: R25,
    leak: UA, fan: r_hot, inner_fan: r_cold, sag: supply voltage); for ``sensor`` faults it is
    the drift in the channel's unit (``mode='drift'``) or the probability per sample of a
    probe error (``mode='dropout'``); ``stuck`` freezes the channel at its value at start.
    ``ramp_s`` 0 is a step; otherwise the parameter moves linearly over ``ramp_s`` and then
    stays. ``end_s`` (repair) restores it; None means never.
    """

    kind: str
    device_id: str
    start_s: float
    magnitude: float = 1.0
    ramp_s: float = 0.0
    end_s: float | None = None
    channel: str | None = None
    mode: str | None = None

    @property
    def shape(self) -> str:
        return "ramp" if self.ramp_s > 0 else "step"

    def factor(self, t: FloatArray) -> FloatArray:
        """Fraction of the fault developed at times ``t`` (0 before, 1 when fully developed)."""
        if self.ramp_s > 0:
            f = np.clip((t - self.start_s) / self.ramp_s, 0.0, 1.0)
        else:
            f = (t >= self.start_s).astype(np.float64)
        if self.end_s is not None:
            f = np.where(t >= self.end_s, 0.0, f)
        return f


@dataclass(frozen=True)
class ScheduledEvent:
    """A use event at a known time: ``door`` (open for ``duration_s``), ``load`` (warm goods,
    ``magnitude`` = fraction of the contents replaced at ambient temperature, put in through
    the door, which opens for at least half a minute) or ``power_cut`` (``duration_s``)."""

    kind: str
    device_id: str
    start_s: float
    duration_s: float = 0.0
    magnitude: float = 0.0


@dataclass(frozen=True)
class DeviceSpec:
    """One cooler: its physics, its use, its sensors and its site. SI units, °C for setpoints."""

    device_id: str
    # module (whole stack: modules in series), at a mean temperature of 25 °C
    s25: float = 0.049
    r25: float = 1.90
    k: float = 0.51
    i_limit: float = 6.0  # driver current limit [A]
    # heat paths
    ua: float = 0.5
    r_hot: float = 0.25
    r_cold: float = 0.45
    c_air: float = 800.0  # air plus liner and shelves [J/K]
    # Heat capacities of the cold and the hot sink, each with its module face [J/K]; 0 keeps
    # the faces massless (an aluminium sink of a few hundred grams holds 100-400 J/K:
    # about 0.9 J/(g·K), common practice, no source).
    c_cold_sink: float = 0.0
    c_hot_sink: float = 0.0
    c_contents: float = 15_000.0
    g_contents: float = 2.0  # air-to-contents conductance [W/K]
    q_internal: float = 1.0  # inner fan and electronics inside [W]
    # control
    control: str = "thermostat"  # or "proportional"
    setpoint_c: float = 5.0
    hysteresis_k: float = 1.0
    v_supply: float = 12.0
    kp_a_per_k: float = 1.5
    i_bias_a: float = 2.0
    ctrl_bias_k: float = 0.0
    # use
    door_per_day: float = 8.0
    door_mean_s: float = 25.0
    g_door: float = 3.0  # extra conductance while the door is open [W/K]
    loads_per_day: float = 0.3
    load_fraction: float = 0.15
    cuts_per_30d: float = 0.5
    cut_mean_s: float = 1800.0
    # site climate
    t_amb_mean_c: float = 22.0
    t_amb_daily_k: float = 2.0
    t_amb_phase_h: float = 15.0  # local hour of the daily maximum
    t_amb_weather_k: float = 1.5  # sd of the slow (days) anomaly
    t_amb_tau_h: float = 48.0
    rh_mean: float = 45.0
    utc_offset_h: float = 0.0
    # sensors
    sensor_bias: tuple[float, ...] = (0.0,) * 7
    sensor_noise: tuple[float, ...] = (0.05, 0.05, 0.05, 0.05, 0.005, 0.005, 1.0)
    jitter_s: float = 0.5
    p_missed: float = 0.002
    off_voltage: str = "open_circuit"  # or "zero"
    # registration
    label: str = ""
    site: str = ""
    ratings: dict[str, float] = field(default_factory=lambda: dict(STANDARD_RATINGS))
    volume_l: float = 40.0
    low_limit_c: float = 2.0
    high_limit_c: float = 8.0

    def registration(self) -> dict[str, Any]:
        """Registration body in the contract's shape (``PUT /v1/devices/{id}``)."""
        return {
            "label": self.label or self.device_id,
            "site": self.site or "unknown",
            "module": {k: self.ratings[k] for k in STANDARD_RATINGS},
            "cabinet": {
                "volume_l": self.volume_l,
                "setpoint_c": self.setpoint_c,
                "low_limit_c": self.low_limit_c,
                "high_limit_c": self.high_limit_c,
            },
        }


@dataclass(frozen=True)
class FleetSpec:
    """A fleet: devices, faults, scheduled events, the start time and the seed."""

    devices: tuple[DeviceSpec, ...]
    start_s: float
    interval_s: float = 60.0
    seed: int = 0
    faults: tuple[Fault, ...] = ()
    events: tuple[ScheduledEvent, ...] = ()
    random_use: bool = True  # random doors, loads and power cuts
    sensors: bool = True  # bias, noise, jitter, missed samples
    max_substep_s: float = 20.0

    @property
    def device_ids(self) -> list[str]:
        return [d.device_id for d in self.devices]


def device_from_ratings(
    device_id: str,
    ratings: dict[str, float] | None = None,
    spread: dict[str, float] | None = None,
    **kwargs: Any,
) -> DeviceSpec:
    """A device whose module comes from datasheet ratings (``physics.parameters_from_ratings``),
    ``count`` modules in series; ``spread`` multiplies the resulting S, R, K (unit-to-unit)."""
    rt = dict(STANDARD_RATINGS if ratings is None else ratings)
    module = physics.parameters_from_ratings(
        rt["i_max_a"],
        rt["v_max_v"],
        rt["dt_max_k"],
        rt["t_hot_rated_c"] + T0_K,
        q_max=rt.get("q_max_w"),
        n_couples=int(rt["couples"]),
    )
    module = physics.modules_in_series(module, int(rt.get("count", 1)))
    sp = spread or {}
    return DeviceSpec(
        device_id=device_id,
        s25=module.seebeck * sp.get("s", 1.0),
        r25=module.resistance * sp.get("r", 1.0),
        k=module.conductance * sp.get("k", 1.0),
        i_limit=float(rt["i_max_a"]),
        ratings=rt,
        **kwargs,
    )


# ---------------------------------------------------------------------------
# Truth
# ---------------------------------------------------------------------------

TRUTH_PARAMS = ("r25", "s25", "k", "ua", "r_hot", "r_cold", "c_air", "c_contents")
_TRUTH_NAMES = {
    "r25": "resistance_25c_ohm",
    "s25": "seebeck_25c_v_per_k",
    "k": "conductance_w_per_k",
    "ua": "ua_w_per_k",
    "r_hot": "r_hot_k_per_w",
    "r_cold": "r_cold_k_per_w",
    "c_air": "c_air_j_per_k",
    "c_contents": "c_contents_j_per_k",
}


@dataclass
class FleetTruth:
    """True parameters and fault windows of every device, for scoring estimates and alerts."""

    spec: FleetSpec
    excursions: dict[str, list[tuple[float, float | None]]] = field(default_factory=dict)
    power_cuts: dict[str, list[tuple[float, float]]] = field(default_factory=dict)
    loads: dict[str, list[float]] = field(default_factory=dict)

    def device(self, device_id: str) -> DeviceSpec:
        for d in self.spec.devices:
            if d.device_id == device_id:
                return d
        raise KeyError(device_id)

    def faults_of(self, device_id: str) -> list[Fault]:
        return [f for f in self.spec.faults if f.device_id == device_id]

    def params_at(self, device_id: str, t_s: float) -> dict[str, float]:
        """True parameters at time ``t_s`` (keys of ``TRUTH_PARAMS``)."""
        d = self.device(device_id)
        values = {p: float(getattr(d, p)) for p in TRUTH_PARAMS}
        for f in self.faults_of(device_id):
            param = _FAULT_PARAM.get(f.kind)
            if param in values:
                frac = float(f.factor(np.array([t_s]))[0])
                values[param] *= 1.0 + (f.magnitude - 1.0) * frac
        return values

    def fault_windows(self, device_id: str | None = None) -> list[dict[str, Any]]:
        """Every fault as a window: start, fully developed, end, shape, magnitude."""
        out = []
        for f in self.spec.faults:
            if device_id is not None and f.device_id != device_id:
                continue
            out.append(
                {
                    "device_id": f.device_id,
                    "kind": f.kind,
                    "alert_kind": _ALERT_KIND[f.kind],
                    "param": _FAULT_PARAM.get(f.kind),
                    "shape": f.shape,
                    "start_s": f.start_s,
                    "developed_s": f.start_s + f.ramp_s,
                    "end_s": f.end_s,
                    "magnitude": f.magnitude,
                    "channel": f.channel,
                    "mode": f.mode,
                }
            )
        return out

    def to_dict(self, end_s: float | None = None) -> dict[str, Any]:
        spec = self.spec
        end = end_s if end_s is not None else spec.start_s
        devices: dict[str, Any] = {}
        for d in spec.devices:
            breaks = {spec.start_s, end}
            for f in self.faults_of(d.device_id):
                for t in (f.start_s, f.start_s + f.ramp_s, f.end_s):
                    if t is not None and spec.start_s <= t <= end:
                        breaks.add(t)
            day = 86_400.0
            t = spec.start_s + day
            while t < end:
                breaks.add(t)
                t += day
            series = []
            for t in sorted(breaks):
                row = {"ts": t}
                row.update({_TRUTH_NAMES[k]: v for k, v in self.params_at(d.device_id, t).items()})
                series.append(row)
            devices[d.device_id] = {
                "registration": d.registration(),
                "baseline": {_TRUTH_NAMES[p]: float(getattr(d, p)) for p in TRUTH_PARAMS},
                "control": {
                    "mode": d.control,
                    "setpoint_c": d.setpoint_c,
                    "hysteresis_k": d.hysteresis_k,
                    "v_supply": d.v_supply,
                },
                "off_voltage": d.off_voltage,
                "series": series,
                "faults": self.fault_windows(d.device_id),
                "power_cuts": [list(w) for w in self.power_cuts.get(d.device_id, [])],
                "loads": list(self.loads.get(d.device_id, [])),
                "excursions": [list(w) for w in self.excursions.get(d.device_id, [])],
            }
        return {
            "seed": spec.seed,
            "start_s": spec.start_s,
            "end_s": end,
            "interval_s": spec.interval_s,
            "params_note": "series rows are exact at their times; linear between them",
            "devices": devices,
        }

    def write_json(self, path: str, end_s: float | None = None) -> None:
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(self.to_dict(end_s), fh, indent=1)


_ALERT_KIND = {
    "wear": "module_wear",
    "leak": "heat_leak",
    "fan": "hot_side_cooling",
    "inner_fan": "capacity_shortfall",
    "sag": "capacity_shortfall",
    "sensor": "sensor_fault",
    "offline": "offline",
}


# ---------------------------------------------------------------------------
# Simulation
# ---------------------------------------------------------------------------


@dataclass
class Chunk:
    """Output of :meth:`Simulator.run`: ``n_steps`` output steps for every device.

    ``truth`` arrays (n_steps, n_dev) are the model's state at each output instant:
    t_air, t_contents, t_cold, t_hot, t_ambient [°C], current [A], voltage [V], on (drive on),
    door_s (seconds open in the interval), powered. ``measured`` holds what the sensors report
    (already biased, noisy, quantised, faulted), ``ts`` the sample timestamps (jittered) and
    ``present`` which samples exist (not missed, not offline). ``energy`` holds per-step
    energy terms [J]: wall (through walls and door, into the cabinet), internal, loads,
    electrical, rejected (at the hot face), stored (air + contents).
    """

    t: FloatArray
    ts: FloatArray
    seq: NDArray[np.int64]
    present: BoolArray
    truth: dict[str, FloatArray]
    measured: dict[str, FloatArray]
    energy: dict[str, FloatArray]
    device_ids: list[str]

    @property
    def n_steps(self) -> int:
        return int(self.t.shape[0])

    def readings(self, step: int, device: int) -> dict[str, Any]:
        """One reading as a payload object (``present`` is not checked)."""
        return _reading(self, step, device)

    def payload_rows(self) -> list[list[dict[str, Any] | None]]:
        """Payload objects per step and device (None where no sample exists)."""
        return _payload_rows(self)


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
        self.n = n = len(devs)
        self.ids = [d.device_id for d in devs]
        self.index = {d: i for i, d in enumerate(self.ids)}
        p = {
            name: _col(devs, name)
            for name in (
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
                "jitter_s",
                "p_missed",
            )
        }
        self.p = p
        self.proportional = np.array([d.control == "proportional" for d in devs])
        self.off_open = np.array([d.off_voltage == "open_circuit" for d in devs])
        self.bias = np.array([d.sensor_bias for d in devs], dtype=np.float64)  # (n, 7)
        self.noise_sd = np.array([d.sensor_noise for d in devs], dtype=np.float64)
        if not spec.sensors:
            self.bias[:] = 0.0
            self.noise_sd[:] = 0.0
            p["jitter_s"][:] = 0.0
            p["p_missed"][:] = 0.0
        self.streams = _Streams(spec.seed)
        self.interval = float(spec.interval_s)
        self.n_sub = max(1, math.ceil(self.interval / spec.max_substep_s))
        self.step_index = 0
        self.t_next = float(spec.start_s)
        # faults
        by_kind: dict[str, list[tuple[int, Fault]]] = {}
        for f in spec.faults:
            if f.kind not in FAULT_KINDS:
                raise ValueError(f"unknown fault kind {f.kind!r}")
            by_kind.setdefault(f.kind, []).append((self.index[f.device_id], f))
        self.faults = by_kind
        self.stuck_value: dict[int, float] = {}
        self.events = [(self.index[e.device_id], e) for e in spec.events]
        # state: start at the setpoint, faces at rest, weather anomaly from its stationary law
        sp_k = p["setpoint_c"] + T0_K
        self.t_air = sp_k.copy()
        self.t_cont = sp_k.copy()
        amb0 = p["t_amb_mean_c"] + T0_K
        self.tc = sp_k - 2.0
        self.th = amb0 + 2.0
        self.on = np.ones(n, dtype=bool)
        self.door_left = np.zeros(n)
        self.cut_left = np.zeros(n)
        w0 = self.streams.gen["weather"].standard_normal(n)
        self.weather = w0 * p["t_amb_weather_k"]
        self.outside_since: list[float | None] = [None] * n
        self.truth = FleetTruth(spec)
        self.limits = (
            np.array([d.low_limit_c for d in devs]),
            np.array([d.high_limit_c for d in devs]),
        )

    # -- inputs ---------------------------------------------------------------

    def _ambient(self, t: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Ambient temperature [K] and relative humidity [%] at times t, shape (m, n)."""
        p = self.p
        m = t.shape[0]
        # slow weather anomaly: discrete Ornstein-Uhlenbeck (AR(1)) per device
        phi = np.exp(-self.interval / (p["t_amb_tau_h"] * 3600.0))
        eps = self.streams.gen["weather"].standard_normal((m, self.n))
        drive = eps * p["t_amb_weather_k"] * np.sqrt(1.0 - phi**2)
        anomaly = np.empty((m, self.n))
        prev = self.weather
        # AR(1) along time with per-device coefficient: lfilter per distinct phi
        for value in np.unique(phi):
            cols = np.nonzero(phi == value)[0]
            y, _ = lfilter(
                [1.0], [1.0, -value], drive[:, cols], axis=0, zi=(value * prev[cols])[None, :]
            )
            anomaly[:, cols] = y
        self.weather = anomaly[-1].copy()
        hours = ((t[:, None] / 3600.0) + p["utc_offset_h"]) % 24.0
        daily = np.cos(2.0 * np.pi * (hours - p["t_amb_phase_h"]) / 24.0)
        t_amb = p["t_amb_mean_c"] + p["t_amb_daily_k"] * daily + anomaly
        rh = np.clip(p["rh_mean"] - 8.0 * daily - 2.0 * anomaly, 5.0, 95.0)
        return t_amb + T0_K, rh

    def _factors(self, t: FloatArray) -> dict[str, FloatArray]:
        m = t.shape[0]
        out = {name: np.ones((m, self.n)) for name in set(_FAULT_PARAM.values())}
        for kind, param in _FAULT_PARAM.items():
            for i, f in self.faults.get(kind, []):
                out[param][:, i] *= 1.0 + (f.magnitude - 1.0) * f.factor(t)
        return out

    def _use(self, t: FloatArray) -> tuple[FloatArray, FloatArray, FloatArray]:
        """Doors / loads / cuts starting at each step (m, n): door s, load fraction, cut s."""
        p, g, m, n = self.p, self.streams.gen, t.shape[0], self.n
        u_door = g["door"].random((m, n))
        l_door = g["door_len"].exponential(1.0, (m, n))
        u_load = g["load"].random((m, n))
        u_cut = g["cut"].random((m, n))
        l_cut = g["cut_len"].exponential(1.0, (m, n))
        if not self.spec.random_use:
            zero = np.zeros((m, n))
            door, load, cut = zero, zero.copy(), zero.copy()
        else:
            hours = ((t[:, None] / 3600.0) + p["utc_offset_h"]) % 24.0
            busy = np.where((hours >= 7.0) & (hours < 19.0), 1.8, 0.2)
            dt_day = self.interval / 86_400.0
            door = np.where(
                u_door < p["door_per_day"] * dt_day * busy, l_door * p["door_mean_s"], 0.0
            )
            load = np.where(u_load < p["loads_per_day"] * dt_day * busy, p["load_fraction"], 0.0)
            cut = np.where(u_cut < p["cuts_per_30d"] * dt_day / 30.0, l_cut * p["cut_mean_s"], 0.0)
        for i, e in self.events:
            k = int(np.searchsorted(t, e.start_s))
            if k >= m or t[k] - e.start_s >= self.interval or (k > 0 and t[k - 1] >= e.start_s):
                continue
            if e.kind == "door":
                door[k, i] = max(door[k, i], e.duration_s)
            elif e.kind == "load":
                load[k, i] = max(load[k, i], e.magnitude)
            elif e.kind == "power_cut":
                cut[k, i] = max(cut[k, i], e.duration_s)
            else:
                raise ValueError(f"unknown event kind {e.kind!r}")
        # Goods go in through the door: a load opens it for at least half a minute.
        door = np.where(load > 0.0, np.maximum(door, 30.0 + l_door * p["door_mean_s"]), door)
        return door, load, cut

    # -- stepping -------------------------------------------------------------

    def run(self, n_steps: int) -> Chunk:
        """Advance ``n_steps`` output intervals and return what happened."""
        m, n, p = int(n_steps), self.n, self.p
        t = self.t_next + self.interval * np.arange(m, dtype=np.float64)
        t_amb_all, rh_all = self._ambient(t)
        fac = self._factors(t)
        door_start, load_all, cut_start = self._use(t)
        r25_all = p["r25"] * fac["r25"]
        ua_all = p["ua"] * fac["ua"]
        rh_all_res = p["r_hot"] * fac["r_hot"]
        rc_all = p["r_cold"] * fac["r_cold"]
        vs_all = p["v_supply"] * fac["v_supply"]

        names = (
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
        tr = {k: np.empty((m, n)) for k in names}
        en = {
            k: np.zeros((m, n))
            for k in ("wall", "internal", "loads", "electrical", "rejected", "stored")
        }

        s25, k_mod, ca, cn, g = p["s25"], p["k"], p["c_air"], p["c_contents"], p["g_contents"]
        sp_k = p["setpoint_c"] + T0_K + p["ctrl_bias_k"]
        hyst, ilim = p["hysteresis_k"], p["i_limit"]
        kp, ibias = p["kp_a_per_k"], p["i_bias_a"]
        prop = self.proportional
        h = self.interval / self.n_sub
        ca_h, cn_h = ca / h, cn / h
        cc_h, chs_h = p["c_cold_sink"] / h, p["c_hot_sink"] / h
        massive = (cc_h > 0.0) | (chs_h > 0.0)
        w1 = g / (cn_h + g)
        ta, tn, tc, th, on = self.t_air, self.t_cont, self.tc, self.th, self.on
        door_left, cut_left = self.door_left, self.cut_left
        loads_log = self.truth.loads

        # door and power state along the chunk (sequential but cheap), then everything that
        # depends only on them, vectorised over the chunk
        door_s_all = np.empty((m, n))
        powered_all = np.empty((m, n), dtype=bool)
        for j in range(m):
            door_left = np.maximum(door_left, door_start[j])
            cut_left = np.maximum(cut_left, cut_start[j])
            door_s_all[j] = np.minimum(door_left, self.interval)
            door_left = door_left - door_s_all[j]
            powered_all[j] = cut_left <= 0.0
            cut_left = np.maximum(cut_left - self.interval, 0.0)
        pw = powered_all.astype(np.float64)
        ua_eff_all = ua_all + p["g_door"] * (door_s_all / self.interval)
        inv_rc_all = pw / rc_all + (1.0 - pw) / (rc_all * 2.5)  # inner fan stopped in a cut
        inv_rh_all = pw / rh_all_res + (1.0 - pw) / (rh_all_res * 3.0)  # hot fan stopped
        q_int_all = pw * p["q_internal"]
        sp_hi, sp_lo = sp_k + hyst, sp_k - hyst
        prop_f = prop.astype(np.float64)
        volt_f = 1.0 - prop_f
        e_wall_all, e_el_all, e_rej_all = en["wall"], en["electrical"], en["rejected"]
        t_air_out, t_cont_out, tc_out, th_out = (
            tr["t_air"],
            tr["t_contents"],
            tr["t_cold"],
            tr["t_hot"],
        )
        cur_out, v_out = tr["current"], tr["voltage"]

        for j in range(m):
            t_amb = t_amb_all[j]
            r25 = r25_all[j]
            vsup = vs_all[j]
            load = load_all[j]
            if load.any():
                # warm goods arrive at room temperature and replace part of the contents
                en["loads"][j] = cn * load * (t_amb - tn)
                tn = tn + load * (t_amb - tn)
                for i in np.nonzero(load)[0]:
                    loads_log.setdefault(self.ids[i], []).append(float(t[j]))
            ua = ua_eff_all[j]
            inv_rc, inv_rh = inv_rc_all[j], inv_rh_all[j]
            q_int = q_int_all[j]
            pw_j = pw[j]
            e_stored0 = ca * ta + cn * tn + cc_h * h * tc + chs_h * h * th
            ua_tamb = ua * t_amb
            rh_tamb = t_amb * inv_rh
            den0 = ca_h + ua + g - g * w1
            e_wall = e_el = e_rej = 0.0
            for _ in range(self.n_sub):
                dtm = 0.5 * (tc + th) - T25_K
                s = s25 * (1.0 + BETA_S * dtm)
                r = r25 * (1.0 + ALPHA_R * dtm)
                # drive: thermostat with hysteresis, or proportional current
                on = (ta > sp_hi) | (on & (ta > sp_lo))
                i_now = np.minimum(np.maximum((vsup - s * (th - tc)) / r, 0.0), ilim)
                i_volt = i_now
                # predictor: faces at that current with the air as it is, then the current the
                # supply really drives across that temperature difference (damps the lag at
                # switch-on, when ΔT jumps by tens of kelvin)
                si = s * i_volt
                jh = 0.5 * i_volt * i_volt * r
                a22 = si - k_mod - inv_rh
                b2 = -jh - rh_tamb
                tc_p = ((ta * inv_rc + jh) * a22 + k_mod * b2) / (
                    (si + k_mod + inv_rc) * a22 + k_mod * k_mod
                )
                th_p = (b2 - k_mod * tc_p) / a22
                i_volt = np.minimum(np.maximum((vsup - s * (th_p - tc_p)) / r, 0.0), ilim)
                # sinks that store heat keep ΔT through a switch: the faces as they are hold
                i_volt = np.where(massive, i_now, i_volt)
                i_prop = np.minimum(np.maximum(ibias + kp * (ta - sp_k), 0.0), i_volt)
                cur = (prop_f * i_prop + volt_f * on * i_volt) * pw_j
                # faces (backward Euler on the sinks' heat), linear in the air temperature
                # at the end of the sub-step
                si = s * cur
                jh = 0.5 * cur * cur * r
                a11 = si + k_mod + inv_rc + cc_h
                a22 = si - k_mod - inv_rh - chs_h
                b2 = -jh - rh_tamb - chs_h * th
                det = a11 * a22 + k_mod * k_mod
                mcoef = a22 * inv_rc / det  # dTc/dTair
                tc0 = ((jh + cc_h * tc) * a22 + k_mod * b2) / det
                # backward Euler on air and contents
                w0 = cn_h * tn / (cn_h + g)
                ta = (ca_h * ta + ua_tamb + g * w0 + q_int + tc0 * inv_rc) / (
                    den0 + (1.0 - mcoef) * inv_rc
                )
                tn = w0 + w1 * ta
                tc = tc0 + mcoef * ta
                th = (b2 - k_mod * tc) / a22
                e_wall = e_wall + ua * (t_amb - ta)
                e_el = e_el + cur * (s * (th - tc) + cur * r)
                e_rej = e_rej + (th * inv_rh - rh_tamb)
            e_wall_all[j] = e_wall * h
            e_el_all[j] = e_el * h
            e_rej_all[j] = e_rej * h
            en["internal"][j] = q_int * (h * self.n_sub)
            # the load's heat is stored in the contents too: counted as input and storage
            en["stored"][j] = (
                ca * ta + cn * tn + cc_h * h * tc + chs_h * h * th - e_stored0 + en["loads"][j]
            )
            t_air_out[j] = ta
            t_cont_out[j] = tn
            tc_out[j] = tc
            th_out[j] = th
            cur_out[j] = cur
            # The terminals show S and R at the faces' temperatures of this instant, not of the
            # sub-step's start: right after a switch those differ by kelvins.
            dtm = 0.5 * (tc + th) - T25_K
            v_out[j] = s25 * (1.0 + BETA_S * dtm) * (th - tc) + cur * r25 * (1.0 + ALPHA_R * dtm)
        tr["t_ambient"][:] = t_amb_all
        tr["on"][:] = cur_out > 0.0
        tr["door_s"][:] = door_s_all
        tr["powered"][:] = powered_all
        self.t_air, self.t_cont, self.tc, self.th, self.on = ta, tn, tc, th, on
        self.door_left, self.cut_left = door_left, cut_left
        for key in ("t_air", "t_contents", "t_cold", "t_hot", "t_ambient"):
            tr[key] -= T0_K
        tr["rh"] = rh_all
        self._log_windows(t, tr, cut_start)
        measured, ts, present, seq = self._sensors(t, tr)
        self.t_next = float(t[-1] + self.interval) if m else self.t_next
        first = self.step_index
        self.step_index += m
        del seq
        seq_arr = np.broadcast_to(
            np.arange(first, first + m, dtype=np.int64)[:, None], (m, n)
        ).copy()
        return Chunk(t, ts, seq_arr, present, tr, measured, en, self.ids)

    def _log_windows(self, t: FloatArray, tr: dict[str, FloatArray], cut: FloatArray) -> None:
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

    def open_excursions(self) -> dict[str, float]:
        """Devices whose cabinet is outside its limits now, with the time it left them."""
        return {self.ids[i]: s for i, s in enumerate(self.outside_since) if s is not None}

    def _sensors(
        self, t: FloatArray, tr: dict[str, FloatArray]
    ) -> tuple[dict[str, FloatArray], FloatArray, BoolArray, NDArray[np.int64]]:
        g, p, m, n = self.streams.gen, self.p, t.shape[0], self.n
        noise = g["noise"].standard_normal((m, n, len(CHANNELS)))
        jitter = g["jitter"].standard_normal((m, n))
        missed = g["missed"].random((m, n)) < p["p_missed"]
        u_drop = g["dropout"].random((m, n))
        true = {
            "t_cabinet": tr["t_air"],
            "t_cold": tr["t_cold"],
            "t_hot": tr["t_hot"],
            "t_ambient": tr["t_ambient"],
            "current": tr["current"],
            "voltage": np.where(
                tr["current"] > 0.0, tr["voltage"], np.where(self.off_open, tr["voltage"], 0.0)
            ),
            "rh": tr["rh"],
        }
        meas: dict[str, FloatArray] = {}
        for c, name in enumerate(CHANNELS):
            v = true[name] + self.bias[:, c] + self.noise_sd[:, c] * noise[:, :, c]
            if name == "current":
                v = np.where(tr["current"] > 0.0, v, 0.0)  # an open driver reads zero
                v = np.maximum(v, 0.0)
            if name == "voltage":
                v = np.where(
                    (tr["current"] > 0.0) | self.off_open, v, 0.0
                )  # shorted or grounded driver reads zero
            if name == "rh":
                v = np.clip(v, 0.0, 100.0)
            meas[name] = v
        present = ~missed
        for i, f in self.faults.get("sensor", []):
            name = f.channel or "t_cabinet"
            frac = f.factor(t)
            col = meas[name][:, i]
            if f.mode == "drift":
                col += f.magnitude * frac
            elif f.mode == "stuck":
                active = frac > 0
                if active.any():
                    if id(f) not in self.stuck_value:
                        self.stuck_value[id(f)] = float(col[np.argmax(active)])
                    col[active] = self.stuck_value[id(f)]
            elif f.mode == "dropout":
                col[(frac > 0) & (u_drop[:, i] < f.magnitude)] = PROBE_ERROR_C
            else:
                raise ValueError(f"unknown sensor fault mode {f.mode!r}")
        for i, f in self.faults.get("offline", []):
            present[:, i] &= f.factor(t) <= 0
        for name in CHANNELS:
            q = QUANTUM[name]
            meas[name] = np.round(np.round(meas[name] / q) * q, _DECIMALS[name])
        lim = 0.25 * self.interval
        ts = t[:, None] + np.clip(jitter * p["jitter_s"], -lim, lim)
        ts = np.round(ts, 3)
        return meas, ts, present, np.zeros(0, dtype=np.int64)


def _reading(chunk: Chunk, j: int, i: int) -> dict[str, Any]:
    meas = chunk.measured
    out: dict[str, Any] = {"ts": float(chunk.ts[j, i]), "seq": int(chunk.seq[j, i])}
    for name in CHANNELS:
        out[name] = float(meas[name][j, i])
    out["door_open"] = bool(chunk.truth["door_s"][j, i] > 0)
    return out


def _payload_rows(chunk: Chunk) -> list[list[dict[str, Any] | None]]:
    """Payload dicts for all steps and devices, built from Python lists (fast path)."""
    cols = {name: chunk.measured[name].tolist() for name in CHANNELS}
    ts = chunk.ts.tolist()
    seq = chunk.seq.tolist()
    door = (chunk.truth["door_s"] > 0).tolist()
    present = chunk.present.tolist()
    tcab, tcold, thot, tamb = (cols[c] for c in _TEMP_CHANNELS)
    cur, volt, rh = cols["current"], cols["voltage"], cols["rh"]
    rows: list[list[dict[str, Any] | None]] = []
    for j in range(chunk.n_steps):
        row: list[dict[str, Any] | None] = []
        pj = present[j]
        for i in range(len(pj)):
            if not pj[i]:
                row.append(None)
                continue
            row.append(
                {
                    "ts": ts[j][i],
                    "seq": seq[j][i],
                    "t_cabinet": tcab[j][i],
                    "t_cold": tcold[j][i],
                    "t_hot": thot[j][i],
                    "t_ambient": tamb[j][i],
                    "current": cur[j][i],
                    "voltage": volt[j][i],
                    "rh": rh[j][i],
                    "door_open": door[j][i],
                }
            )
        rows.append(row)
    return rows


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


def concat(chunks: Sequence[Chunk]) -> Chunk:
    """Join chunks along time."""
    first = chunks[0]
    return Chunk(
        t=np.concatenate([c.t for c in chunks]),
        ts=np.concatenate([c.ts for c in chunks]),
        seq=np.concatenate([c.seq for c in chunks]),
        present=np.concatenate([c.present for c in chunks]),
        truth={k: np.concatenate([c.truth[k] for c in chunks]) for k in first.truth},
        measured={k: np.concatenate([c.measured[k] for c in chunks]) for k in first.measured},
        energy={k: np.concatenate([c.energy[k] for c in chunks]) for k in first.energy},
        device_ids=first.device_ids,
    )


# ---------------------------------------------------------------------------
# Random fleets and fault mixes
# ---------------------------------------------------------------------------

#: Default developed magnitude and ramp of each fault kind (common practice, no source).
FAULT_DEFAULTS: dict[str, dict[str, Any]] = {
    "wear": {"magnitude": 1.10, "ramp_s": 14 * 86_400.0},
    "leak": {"magnitude": 1.6, "ramp_s": 0.0},
    "fan": {"magnitude": 3.0, "ramp_s": 0.0},
    "inner_fan": {"magnitude": 2.5, "ramp_s": 0.0},
    "sag": {"magnitude": 0.85, "ramp_s": 2 * 86_400.0},
    "sensor": {"magnitude": 3.0, "ramp_s": 5 * 86_400.0, "mode": "drift", "channel": "t_cabinet"},
    "offline": {"magnitude": 1.0, "ramp_s": 0.0},
}


def parse_fault_mix(text: str | None) -> dict[str, int]:
    """``"wear:2,leak:1"`` -> {"wear": 2, "leak": 1}; ``"none"`` or empty -> {}."""
    if not text or text.strip().lower() == "none":
        return {}
    mix: dict[str, int] = {}
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        name, _, count = part.partition(":")
        name = name.strip().lower().replace("-", "_")
        if name not in FAULT_KINDS:
            raise ValueError(f"unknown fault kind {name!r}; known: {', '.join(FAULT_KINDS)}")
        mix[name] = mix.get(name, 0) + (int(count) if count else 1)
    return mix


def random_fleet(
    n_devices: int,
    *,
    seed: int = 0,
    start_s: float,
    days: float,
    interval_s: float = 60.0,
    faults: str | dict[str, int] | None = None,
    prefix: str = "tec",
) -> FleetSpec:
    """A plausible random fleet with a fault mix placed on distinct devices."""
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence([seed, 0xF1EE7])))
    devices = []
    for i in range(n_devices):
        big = rng.random() < 0.4
        ratings = dict(STANDARD_RATINGS)
        if big:
            ratings["count"] = 2
        volume = float(rng.uniform(35, 60) if big else rng.uniform(20, 40))
        air = heat_paths.air_heat_capacity(volume / 1000.0, 278.15)
        spread = {"s": rng.normal(1, 0.02), "r": rng.normal(1, 0.03), "k": rng.normal(1, 0.03)}
        indoor = rng.random() < 0.8
        devices.append(
            device_from_ratings(
                f"{prefix}-{i:04d}",
                ratings,
                spread,
                ua=float(rng.uniform(0.3, 0.6) * (1.5 if big else 1.0)),
                r_hot=float(rng.uniform(0.12, 0.2) if big else rng.uniform(0.18, 0.3)),
                r_cold=float(rng.uniform(0.25, 0.35) if big else rng.uniform(0.35, 0.5)),
                c_air=air + 15.0 * volume,
                c_contents=float(rng.uniform(5_000, 40_000)),
                g_contents=float(rng.uniform(1.0, 4.0)),
                q_internal=float(rng.uniform(0.5, 1.5)),
                control="proportional" if rng.random() < 0.25 else "thermostat",
                setpoint_c=float(rng.choice([4.0, 5.0, 5.0, 6.0])),
                v_supply=24.0 if big else 12.0,
                ctrl_bias_k=float(rng.normal(0, 0.15)),
                door_per_day=float(rng.uniform(2, 15)),
                loads_per_day=float(rng.uniform(0.05, 0.5)),
                cuts_per_30d=float(rng.uniform(0.0, 1.0)),
                t_amb_mean_c=float(rng.uniform(19, 25) if indoor else rng.uniform(12, 28)),
                t_amb_daily_k=float(rng.uniform(0.5, 2.5) if indoor else rng.uniform(4, 8)),
                t_amb_phase_h=float(rng.uniform(13, 17)),
                t_amb_weather_k=float(rng.uniform(0.5, 1.5) if indoor else rng.uniform(2, 4)),
                rh_mean=float(rng.uniform(30, 60)),
                sensor_bias=tuple(
                    float(x) for x in rng.normal(0, [0.2, 0.2, 0.2, 0.2, 0.01, 0.01, 2.0])
                ),
                off_voltage="open_circuit" if rng.random() < 0.6 else "zero",
                volume_l=round(volume, 1),
            )
        )
    mix = parse_fault_mix(faults) if isinstance(faults, str | None) else dict(faults)
    order = rng.permutation(n_devices)
    if sum(mix.values()) > n_devices:
        raise ValueError(f"fault mix needs {sum(mix.values())} devices, fleet has {n_devices}")
    fault_list: list[Fault] = []
    k = 0
    duration = days * 86_400.0
    for kind in FAULT_KINDS:
        for _ in range(mix.get(kind, 0)):
            dev = devices[int(order[k])].device_id
            k += 1
            d = dict(FAULT_DEFAULTS[kind])
            start = start_s + duration * float(rng.uniform(0.2, 0.6))
            ramp = min(float(d.pop("ramp_s")), max(0.0, start_s + duration - start))
            if kind == "sensor":
                d["mode"] = str(rng.choice(["drift", "stuck", "dropout"]))
                if d["mode"] == "stuck":
                    ramp = 0.0
                if d["mode"] == "dropout":
                    d["magnitude"], ramp = 0.05, 0.0
            end = start + float(rng.uniform(0.5, 2.0)) * 86_400.0 if kind == "offline" else None
            fault_list.append(Fault(kind, dev, start, ramp_s=ramp, end_s=end, **d))
    return FleetSpec(
        devices=tuple(devices),
        start_s=float(start_s),
        interval_s=float(interval_s),
        seed=seed,
        faults=tuple(fault_list),
    )


def with_devices(spec: FleetSpec, devices: Iterable[DeviceSpec]) -> FleetSpec:
    return replace(spec, devices=tuple(devices))


def spec_summary(spec: FleetSpec) -> dict[str, Any]:
    return {"devices": len(spec.devices), "faults": [asdict(f) for f in spec.faults]}


# ---------------------------------------------------------------------------
# CLI (output lives in fleet_publisher; imported lazily so the model stays light)
# ---------------------------------------------------------------------------


def add_simulate_arguments(parser: argparse.ArgumentParser) -> None:
    """Options of ``tecfleet simulate``."""
    from .fleet_publisher import add_arguments

    add_arguments(parser)


def run_simulate(args: argparse.Namespace) -> int:
    """Run ``tecfleet simulate`` with parsed options; returns the exit code."""
    from .fleet_publisher import run

    return run(args)
