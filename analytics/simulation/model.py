"""The physics model of a fleet of thermoelectric coolers, stepped in time.

Each cooler is the network of :mod:`tecfleet.analytics.heat_paths`::

    ambient --UA(+door)-- cabinet air --G-- contents
                            |
                         r_cold (inner fan)
                            |
                         cold face [module S, R, K] hot face --r_hot (fan)-- ambient

with the module of :mod:`tecfleet.analytics.physics` (Qc = S·I·Tc - ½I²R - K·ΔT,
Qh = Qc + P), S and R evaluated at the mean face temperature
(:func:`~tecfleet.analytics.physics.seebeck_at_temperature`,
:func:`~tecfleet.analytics.physics.resistance_at_temperature`, same linear law inlined for
speed).

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

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.signal import lfilter

from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_25C_K

from .chunk import Chunk
from .sensors import SensorModel
from .specs import FAULT_KINDS, FAULT_PARAM, T0_K, DeviceSpec, Fault, FleetSpec
from .truth import FleetTruth

__all__ = ["ALPHA_R", "BETA_S", "T25_K", "Simulator", "simulate"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

T25_K = T_25C_K
ALPHA_R = physics.BI2TE3_RESISTANCE_TEMPCO
BETA_S = physics.BI2TE3_SEEBECK_TEMPCO

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


@dataclass(frozen=True)
class _Coefficients:
    """Per-device constants of the sub-step equations, arrays (n,); ``h`` the sub-step [s]."""

    s25: FloatArray
    k_mod: FloatArray
    ca: FloatArray
    cn: FloatArray
    g: FloatArray
    sp_k: FloatArray
    sp_hi: FloatArray
    sp_lo: FloatArray
    ilim: FloatArray
    kp: FloatArray
    ibias: FloatArray
    prop_f: FloatArray
    volt_f: FloatArray
    h: float
    ca_h: FloatArray
    cn_h: FloatArray
    cc_h: FloatArray
    chs_h: FloatArray
    massive: BoolArray
    w1: FloatArray


@dataclass(frozen=True)
class _Paths:
    """Heat paths and drive of a chunk, arrays (m, n), fixed by faults, doors and power cuts."""

    r25: FloatArray
    vsup: FloatArray
    ua_eff: FloatArray
    inv_rc: FloatArray
    inv_rh: FloatArray
    q_int: FloatArray
    pw: FloatArray


@dataclass(frozen=True)
class _StepInputs:
    """What the sub-steps of one output step share, arrays (n,)."""

    t_amb: FloatArray
    r25: FloatArray
    vsup: FloatArray
    ua: FloatArray
    inv_rc: FloatArray
    inv_rh: FloatArray
    q_int: FloatArray
    pw: FloatArray
    ua_tamb: FloatArray
    rh_tamb: FloatArray
    den0: FloatArray


class Simulator:
    """Time-stepping model of every cooler of a :class:`FleetSpec`, vectorised over devices."""

    def __init__(self, spec: FleetSpec) -> None:
        self.spec = spec
        devs = spec.devices
        self.n = n = len(devs)
        self.ids = [d.device_id for d in devs]
        self.index = {d: i for i, d in enumerate(self.ids)}
        self.p = {name: _col(devs, name) for name in _PARAMS}
        self.proportional = np.array([d.control == "proportional" for d in devs])
        self.streams = _Streams(spec.seed)
        self.interval = float(spec.interval_s)
        self.n_sub = max(1, math.ceil(self.interval / spec.max_substep_s))
        self.step_index = 0
        self.t_next = float(spec.start_s)
        self.faults = self._faults_by_kind(spec.faults)
        self.events = [(self.index[e.device_id], e) for e in spec.events]
        self.sensors = SensorModel(
            devs, self.faults, self.interval, self.streams.gen, enabled=spec.sensors
        )
        # state: start at the setpoint, faces at rest, weather anomaly from its stationary law
        p = self.p
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

    def _faults_by_kind(self, faults: Sequence[Fault]) -> dict[str, list[tuple[int, Fault]]]:
        by_kind: dict[str, list[tuple[int, Fault]]] = {}
        for f in faults:
            if f.kind not in FAULT_KINDS:
                raise ValueError(f"unknown fault kind {f.kind!r}")
            by_kind.setdefault(f.kind, []).append((self.index[f.device_id], f))
        return by_kind

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
        out = {name: np.ones((m, self.n)) for name in set(FAULT_PARAM.values())}
        for kind, param in FAULT_PARAM.items():
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

    # -- stepping -------------------------------------------------------------

    def run(self, n_steps: int) -> Chunk:
        """Advance ``n_steps`` output intervals and return what happened."""
        m, n = int(n_steps), self.n
        t = self.t_next + self.interval * np.arange(m, dtype=np.float64)
        t_amb_all, rh_all = self._ambient(t)
        fac = self._factors(t)
        door_start, load_all, cut_start = self._use(t)
        tr = {k: np.empty((m, n)) for k in _STATE_KEYS}
        en = {k: np.zeros((m, n)) for k in _ENERGY_KEYS}
        door_s_all, powered_all = self._door_and_power(door_start, cut_start)
        paths = self._paths(fac, door_s_all, powered_all)
        co = self._coefficients()
        for j in range(m):
            x = self._step_inputs(co, paths, j, t_amb_all[j])
            self._output_step(co, x, j, float(t[j]), load_all[j], tr, en)
        tr["t_ambient"][:] = t_amb_all
        tr["on"][:] = tr["current"] > 0.0
        tr["door_s"][:] = door_s_all
        tr["powered"][:] = powered_all
        for key in ("t_air", "t_contents", "t_cold", "t_hot", "t_ambient"):
            tr[key] -= T0_K
        tr["rh"] = rh_all
        self._log_windows(t, tr, cut_start)
        return self._assemble(t, tr, en)

    def _door_and_power(
        self, door_start: FloatArray, cut_start: FloatArray
    ) -> tuple[FloatArray, BoolArray]:
        """Seconds the door is open in each interval and whether the device has power (m, n).

        Sequential along the chunk but cheap; everything that depends only on them is then
        vectorised over the chunk.
        """
        m, n = door_start.shape[0], self.n
        door_left, cut_left = self.door_left, self.cut_left
        door_s_all = np.empty((m, n))
        powered_all = np.empty((m, n), dtype=bool)
        for j in range(m):
            door_left = np.maximum(door_left, door_start[j])
            cut_left = np.maximum(cut_left, cut_start[j])
            door_s_all[j] = np.minimum(door_left, self.interval)
            door_left = door_left - door_s_all[j]
            powered_all[j] = cut_left <= 0.0
            cut_left = np.maximum(cut_left - self.interval, 0.0)
        self.door_left, self.cut_left = door_left, cut_left
        return door_s_all, powered_all

    def _paths(
        self, fac: dict[str, FloatArray], door_s_all: FloatArray, powered_all: BoolArray
    ) -> _Paths:
        p = self.p
        rh_all_res = p["r_hot"] * fac["r_hot"]
        rc_all = p["r_cold"] * fac["r_cold"]
        pw = powered_all.astype(np.float64)
        return _Paths(
            r25=p["r25"] * fac["r25"],
            vsup=p["v_supply"] * fac["v_supply"],
            ua_eff=p["ua"] * fac["ua"] + p["g_door"] * (door_s_all / self.interval),
            inv_rc=pw / rc_all + (1.0 - pw) / (rc_all * 2.5),  # inner fan stopped in a cut
            inv_rh=pw / rh_all_res + (1.0 - pw) / (rh_all_res * 3.0),  # hot fan stopped
            q_int=pw * p["q_internal"],
            pw=pw,
        )

    def _coefficients(self) -> _Coefficients:
        p = self.p
        ca, cn, g = p["c_air"], p["c_contents"], p["g_contents"]
        sp_k = p["setpoint_c"] + T0_K + p["ctrl_bias_k"]
        hyst = p["hysteresis_k"]
        h = self.interval / self.n_sub
        cn_h = cn / h
        cc_h, chs_h = p["c_cold_sink"] / h, p["c_hot_sink"] / h
        prop_f = self.proportional.astype(np.float64)
        return _Coefficients(
            s25=p["s25"],
            k_mod=p["k"],
            ca=ca,
            cn=cn,
            g=g,
            sp_k=sp_k,
            sp_hi=sp_k + hyst,
            sp_lo=sp_k - hyst,
            ilim=p["i_limit"],
            kp=p["kp_a_per_k"],
            ibias=p["i_bias_a"],
            prop_f=prop_f,
            volt_f=1.0 - prop_f,
            h=h,
            ca_h=ca / h,
            cn_h=cn_h,
            cc_h=cc_h,
            chs_h=chs_h,
            massive=(cc_h > 0.0) | (chs_h > 0.0),
            w1=g / (cn_h + g),
        )

    @staticmethod
    def _step_inputs(co: _Coefficients, paths: _Paths, j: int, t_amb: FloatArray) -> _StepInputs:
        ua, inv_rh = paths.ua_eff[j], paths.inv_rh[j]
        return _StepInputs(
            t_amb=t_amb,
            r25=paths.r25[j],
            vsup=paths.vsup[j],
            ua=ua,
            inv_rc=paths.inv_rc[j],
            inv_rh=inv_rh,
            q_int=paths.q_int[j],
            pw=paths.pw[j],
            ua_tamb=ua * t_amb,
            rh_tamb=t_amb * inv_rh,
            den0=co.ca_h + ua + co.g - co.g * co.w1,
        )

    def _output_step(
        self,
        co: _Coefficients,
        x: _StepInputs,
        j: int,
        t_j: float,
        load: FloatArray,
        tr: dict[str, FloatArray],
        en: dict[str, FloatArray],
    ) -> None:
        """Advance one output interval (``n_sub`` sub-steps) and record row ``j``."""
        ca, cn, h, cc_h, chs_h = co.ca, co.cn, co.h, co.cc_h, co.chs_h
        ta, tn, tc, th, on = self.t_air, self.t_cont, self.tc, self.th, self.on
        t_amb = x.t_amb
        if load.any():
            # warm goods arrive at room temperature and replace part of the contents
            en["loads"][j] = cn * load * (t_amb - tn)
            tn = tn + load * (t_amb - tn)
            for i in np.nonzero(load)[0]:
                self.truth.loads.setdefault(self.ids[i], []).append(t_j)
        e_stored0 = ca * ta + cn * tn + cc_h * h * tc + chs_h * h * th
        # the sub-steps' sums of heat flows [W]; float zero, then arrays over devices
        e_wall: float | FloatArray = 0.0
        e_el: float | FloatArray = 0.0
        e_rej: float | FloatArray = 0.0
        for _ in range(self.n_sub):
            dtm = 0.5 * (tc + th) - T25_K
            s = co.s25 * (1.0 + BETA_S * dtm)
            r = x.r25 * (1.0 + ALPHA_R * dtm)
            on = (ta > co.sp_hi) | (on & (ta > co.sp_lo))
            cur = _drive_current(co, x, s, r, ta, tc, th, on)
            ta, tn, tc, th = _implicit_update(co, x, s, r, cur, ta, tn, tc, th)
            e_wall = e_wall + x.ua * (t_amb - ta)
            e_el = e_el + cur * (s * (th - tc) + cur * r)
            e_rej = e_rej + (th * x.inv_rh - x.rh_tamb)
        en["wall"][j] = e_wall * h
        en["electrical"][j] = e_el * h
        en["rejected"][j] = e_rej * h
        en["internal"][j] = x.q_int * (h * self.n_sub)
        # the load's heat is stored in the contents too: counted as input and storage
        en["stored"][j] = (
            ca * ta + cn * tn + cc_h * h * tc + chs_h * h * th - e_stored0 + en["loads"][j]
        )
        tr["t_air"][j] = ta
        tr["t_contents"][j] = tn
        tr["t_cold"][j] = tc
        tr["t_hot"][j] = th
        tr["current"][j] = cur
        # The terminals show S and R at the faces' temperatures of this instant, not of the
        # sub-step's start: right after a switch those differ by kelvins.
        dtm = 0.5 * (tc + th) - T25_K
        tr["voltage"][j] = co.s25 * (1.0 + BETA_S * dtm) * (th - tc) + cur * x.r25 * (
            1.0 + ALPHA_R * dtm
        )
        self.t_air, self.t_cont, self.tc, self.th, self.on = ta, tn, tc, th, on

    # -- bookkeeping ----------------------------------------------------------

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

    def _assemble(
        self, t: FloatArray, tr: dict[str, FloatArray], en: dict[str, FloatArray]
    ) -> Chunk:
        """The sensors' view of the true state ``tr``, and the chunk of it."""
        m, n = t.shape[0], self.n
        measured, ts, present = self.sensors.measure(t, tr)
        self.t_next = float(t[-1] + self.interval) if m else self.t_next
        first = self.step_index
        self.step_index += m
        seq_arr = np.broadcast_to(
            np.arange(first, first + m, dtype=np.int64)[:, None], (m, n)
        ).copy()
        return Chunk(t, ts, seq_arr, present, tr, measured, en, self.ids)


def _drive_current(
    co: _Coefficients,
    x: _StepInputs,
    s: FloatArray,
    r: FloatArray,
    ta: FloatArray,
    tc: FloatArray,
    th: FloatArray,
    on: BoolArray,
) -> FloatArray:
    """The drive's current over a sub-step [A]: thermostat with hysteresis (``on``) on the
    supply voltage, or proportional current, nothing without power."""
    k_mod, ilim, vsup = co.k_mod, co.ilim, x.vsup
    i_now = np.minimum(np.maximum((vsup - s * (th - tc)) / r, 0.0), ilim)
    i_volt = i_now
    # predictor: faces at that current with the air as it is, then the current the
    # supply really drives across that temperature difference (damps the lag at
    # switch-on, when ΔT jumps by tens of kelvin)
    si = s * i_volt
    jh = 0.5 * i_volt * i_volt * r
    a22 = si - k_mod - x.inv_rh
    b2 = -jh - x.rh_tamb
    tc_p = ((ta * x.inv_rc + jh) * a22 + k_mod * b2) / (
        (si + k_mod + x.inv_rc) * a22 + k_mod * k_mod
    )
    th_p = (b2 - k_mod * tc_p) / a22
    i_volt = np.minimum(np.maximum((vsup - s * (th_p - tc_p)) / r, 0.0), ilim)
    # sinks that store heat keep ΔT through a switch: the faces as they are hold
    i_volt = np.where(co.massive, i_now, i_volt)
    i_prop = np.minimum(np.maximum(co.ibias + co.kp * (ta - co.sp_k), 0.0), i_volt)
    cur: FloatArray = (co.prop_f * i_prop + co.volt_f * on * i_volt) * x.pw
    return cur


def _implicit_update(
    co: _Coefficients,
    x: _StepInputs,
    s: FloatArray,
    r: FloatArray,
    cur: FloatArray,
    ta: FloatArray,
    tn: FloatArray,
    tc: FloatArray,
    th: FloatArray,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
    """Air, contents, cold and hot face at the end of a sub-step [K] (backward Euler)."""
    k_mod, inv_rc, inv_rh, cc_h, chs_h = co.k_mod, x.inv_rc, x.inv_rh, co.cc_h, co.chs_h
    g, cn_h = co.g, co.cn_h
    # faces (backward Euler on the sinks' heat), linear in the air temperature
    # at the end of the sub-step
    si = s * cur
    jh = 0.5 * cur * cur * r
    a11 = si + k_mod + inv_rc + cc_h
    a22 = si - k_mod - inv_rh - chs_h
    b2 = -jh - x.rh_tamb - chs_h * th
    det = a11 * a22 + k_mod * k_mod
    mcoef = a22 * inv_rc / det  # dTc/dTair
    tc0 = ((jh + cc_h * tc) * a22 + k_mod * b2) / det
    # backward Euler on air and contents
    w0 = cn_h * tn / (cn_h + g)
    ta = (co.ca_h * ta + x.ua_tamb + g * w0 + x.q_int + tc0 * inv_rc) / (
        x.den0 + (1.0 - mcoef) * inv_rc
    )
    tn = w0 + co.w1 * ta
    tc = tc0 + mcoef * ta
    th = (b2 - k_mod * tc) / a22
    return ta, tn, tc, th


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
