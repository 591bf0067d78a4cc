"""The thermal model of every cooler: module, faces and sinks, cabinet air, contents, drive.

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

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tecfleet.analytics import physics
from tecfleet.analytics._validate import T_25C_K

from .specs import T0_K

__all__ = ["ALPHA_R", "BETA_S", "SUMMARY_KEYS", "T25_K", "ThermalModel"]

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]

T25_K = T_25C_K
ALPHA_R = physics.BI2TE3_RESISTANCE_TEMPCO
BETA_S = physics.BI2TE3_SEEBECK_TEMPCO


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


class ThermalModel:
    """Temperatures and drive state of every cooler, advanced one output step at a time.

    ``p`` holds the device columns, ``proportional`` which devices use proportional current
    control; ``n_sub`` sub-steps per output interval of ``interval_s``. State starts at the
    setpoint, the faces at rest; ``warm`` starts everything at the room's mean temperature, as
    a unit just switched on. ``summaries`` also records each interval's means over its
    sub-steps (``SUMMARY_KEYS``).
    """

    def __init__(
        self,
        p: dict[str, FloatArray],
        proportional: BoolArray,
        interval_s: float,
        n_sub: int,
        *,
        warm: bool = False,
        summaries: bool = False,
    ) -> None:
        self.p = p
        self.summaries = summaries
        self.proportional = proportional
        self.interval = interval_s
        self.n_sub = n_sub
        n = proportional.shape[0]
        amb0 = p["t_amb_mean_c"] + T0_K
        sp_k = amb0.copy() if warm else p["setpoint_c"] + T0_K
        self.t_air = sp_k.copy()
        self.t_cont = sp_k.copy()
        self.tc = amb0.copy() if warm else sp_k - 2.0
        self.th = amb0.copy() if warm else amb0 + 2.0
        self.on = np.ones(n, dtype=bool)

    def advance(
        self,
        fac: dict[str, FloatArray],
        door_s_all: FloatArray,
        powered_all: BoolArray,
        t_amb_all: FloatArray,
        load_all: FloatArray,
        tr: dict[str, FloatArray],
        en: dict[str, FloatArray],
    ) -> None:
        """Advance every output step of a chunk, filling rows of ``tr`` and ``en``.

        ``fac`` multiplies the faulted parameters, ``door_s_all`` the seconds the door is
        open, ``powered_all`` the supply, ``t_amb_all`` the ambient [K], ``load_all`` the
        fraction of the contents replaced; arrays (m, n).
        """
        paths = _paths(self.p, fac, door_s_all, powered_all, self.interval)
        co = _coefficients(self.p, self.proportional, self.interval, self.n_sub)
        for j in range(t_amb_all.shape[0]):
            x = _step_inputs(co, paths, j, t_amb_all[j])
            self._step(co, x, j, load_all[j], tr, en)

    def _step(
        self,
        co: _Coefficients,
        x: _StepInputs,
        j: int,
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
        e_stored0 = ca * ta + cn * tn + cc_h * h * tc + chs_h * h * th
        # the sub-steps' sums of heat flows [W]; float zero, then arrays over devices
        e_wall: float | FloatArray = 0.0
        e_el: float | FloatArray = 0.0
        e_rej: float | FloatArray = 0.0
        acc = _Means(ta) if self.summaries else None
        for _ in range(self.n_sub):
            dtm = 0.5 * (tc + th) - T25_K
            s = co.s25 * (1.0 + BETA_S * dtm)
            r = x.r25 * (1.0 + ALPHA_R * dtm)
            on = (ta > co.sp_hi) | (on & (ta > co.sp_lo))
            cur = _drive_current(co, x, s, r, ta, tc, th, on)
            ta, tn, tc, th = _implicit_update(co, x, s, r, cur, ta, tn, tc, th)
            e_wall = e_wall + x.ua * (t_amb - ta)
            p_el = cur * (s * (th - tc) + cur * r)
            e_el = e_el + p_el
            e_rej = e_rej + (th * x.inv_rh - x.rh_tamb)
            if acc is not None:
                acc.add(ta, tc, th, cur, p_el, s * (th - tc) + cur * r)
        if acc is not None:
            acc.record(tr, j, self.n_sub)
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


#: The interval summaries recorded where ``summaries`` is set: means over the sub-steps of the
#: air, the faces [K], the current [A], its square [A²], the electrical power [W], the on
#: share [-] and the terminal voltage while on times that share [V], and the air's extremes [K].
SUMMARY_KEYS = (
    "mean_t_air",
    "mean_t_cold",
    "mean_t_hot",
    "mean_current",
    "mean_current_sq",
    "mean_power",
    "on_share",
    "mean_v_on",
    "min_t_air",
    "max_t_air",
)


class _Means:
    """Sums over the sub-steps of one output interval, arrays (n,)."""

    def __init__(self, ta: FloatArray) -> None:
        z = np.zeros_like(ta)
        self.sums = {k: z.copy() for k in SUMMARY_KEYS[:8]}
        self.low, self.high = np.full_like(ta, np.inf), np.full_like(ta, -np.inf)

    def add(
        self,
        ta: FloatArray,
        tc: FloatArray,
        th: FloatArray,
        cur: FloatArray,
        p_el: FloatArray,
        v_term: FloatArray,
    ) -> None:
        on = (cur > 0.0).astype(np.float64)
        for k, v in zip(
            SUMMARY_KEYS[:8], (ta, tc, th, cur, cur * cur, p_el, on, v_term * on), strict=True
        ):
            self.sums[k] += v
        self.low, self.high = np.minimum(self.low, ta), np.maximum(self.high, ta)

    def record(self, tr: dict[str, FloatArray], j: int, n_sub: int) -> None:
        for k, v in self.sums.items():
            tr[k][j] = v / n_sub
        tr["min_t_air"][j], tr["max_t_air"][j] = self.low, self.high


def _paths(
    p: dict[str, FloatArray],
    fac: dict[str, FloatArray],
    door_s_all: FloatArray,
    powered_all: BoolArray,
    interval: float,
) -> _Paths:
    rh_all_res = p["r_hot"] * fac["r_hot"]
    rc_all = p["r_cold"] * fac["r_cold"]
    pw = powered_all.astype(np.float64)
    return _Paths(
        r25=p["r25"] * fac["r25"],
        vsup=p["v_supply"] * fac["v_supply"],
        ua_eff=p["ua"] * fac["ua"] + p["g_door"] * (door_s_all / interval),
        inv_rc=pw / rc_all + (1.0 - pw) / (rc_all * 2.5),  # inner fan stopped in a cut
        inv_rh=pw / rh_all_res + (1.0 - pw) / (rh_all_res * 3.0),  # hot fan stopped
        q_int=pw * p["q_internal"],
        pw=pw,
    )


def _coefficients(
    p: dict[str, FloatArray], proportional: BoolArray, interval: float, n_sub: int
) -> _Coefficients:
    ca, cn, g = p["c_air"], p["c_contents"], p["g_contents"]
    sp_k = p["setpoint_c"] + T0_K + p["ctrl_bias_k"]
    hyst = p["hysteresis_k"]
    h = interval / n_sub
    cn_h = cn / h
    cc_h, chs_h = p["c_cold_sink"] / h, p["c_hot_sink"] / h
    prop_f = proportional.astype(np.float64)
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
