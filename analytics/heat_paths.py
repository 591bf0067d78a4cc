"""Heat paths around a thermoelectric module: sinks, cabinet, whole cooler.

Pure functions in SI units, temperatures in kelvin; the sign conventions are
those of :mod:`.physics` (Qc heat drawn from the cold side, Qh heat rejected to
the hot side, both [W]).

The cooler is the thermal network

    ambient --UA-- cabinet air --r_cold-- cold face [module] hot face --r_hot-- ambient

with the cabinet also holding an internal load ``q_internal`` [W] (fans,
lamps, warm contents). Its steady state is found with ``scipy.optimize.root``.

Sources:

* F. P. Incropera, D. P. DeWitt, T. L. Bergman, A. S. Lavine, *Fundamentals of
  Heat and Mass Transfer*, 6th ed., Wiley, 2007: thermal resistance, fins
  (ch. 3), conduction shape factors (Table 4.1), lumped capacitance (ch. 5).
* J. P. Holman, *Heat Transfer*, 10th ed., McGraw-Hill, 2010: conduction
  shape factors (Table 3-1) for walls, edges and corners of a box.
* The module model of :mod:`.physics` (Ioffe 1957; Goldsmid 2010).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq, minimize_scalar, root

from ._validate import T_25C_K, T_MAX_K, T_MIN_K, FloatArray, finite, positive, temperature
from .errors import NoConvergenceError, OutOfDomainError
from .physics import ModuleParameters
from .psychrometrics import STANDARD_PRESSURE, dry_air_density, dry_air_specific_heat

__all__ = [
    "OperatingPoint",
    "SetpointCapacity",
    "air_heat_capacity",
    "box_shape_factor",
    "cabinet_rhs",
    "cabinet_ua",
    "capacity_at_setpoint",
    "operating_point",
    "overall_surface_efficiency",
    "sink_resistance",
    "straight_fin_efficiency",
]


# ---------------------------------------------------------------------------
# Sinks
# ---------------------------------------------------------------------------


def straight_fin_efficiency(
    h: float, fin_thickness: float, fin_length: float, k_fin: float
) -> float:
    """Efficiency of a straight rectangular fin, η = tanh(m·Lc) / (m·Lc).

    m = sqrt(2·h / (k·t)) for a thin fin, and the corrected length
    Lc = L + t/2 accounts for convection from the tip. Incropera et al. (2007),
    ch. 3, Table 3.5 and the corrected-length approximation.

    Parameters
    ----------
    h : Convection coefficient on the fin surface [W/(m²·K)].
    fin_thickness : Fin thickness t [m].
    fin_length : Fin length from base to tip L [m].
    k_fin : Thermal conductivity of the fin material [W/(m·K)].

    Returns
    -------
    Fin efficiency [-], in (0, 1].
    """
    hh = float(positive(h, "h"))
    t = float(positive(fin_thickness, "fin_thickness"))
    length = float(positive(fin_length, "fin_length"))
    k = float(positive(k_fin, "k_fin"))
    mlc = math.sqrt(2.0 * hh / (k * t)) * (length + 0.5 * t)
    return math.tanh(mlc) / mlc


def overall_surface_efficiency(fin_area: float, total_area: float, fin_efficiency: float) -> float:
    """Overall surface efficiency of a finned array, ηo = 1 - (Af/At)·(1 - ηf).

    Incropera et al. (2007), ch. 3, section on fin arrays.

    Parameters
    ----------
    fin_area : Surface area of all fins [m²].
    total_area : Fin area plus exposed base area [m²].
    fin_efficiency : Efficiency of one fin [-].

    Returns
    -------
    Overall surface efficiency [-].
    """
    af = float(positive(fin_area, "fin_area"))
    at = float(positive(total_area, "total_area"))
    eta = float(positive(fin_efficiency, "fin_efficiency"))
    if af > at:
        raise OutOfDomainError(f"fin_area {af} m² exceeds total_area {at} m²")
    if eta > 1.0:
        raise OutOfDomainError(f"fin_efficiency must be <= 1, got {eta}")
    return 1.0 - af / at * (1.0 - eta)


def sink_resistance(
    h: float,
    total_area: float,
    overall_efficiency: float = 1.0,
    contact_resistance: float = 0.0,
) -> float:
    """Thermal resistance from a module face to the air, R = 1/(ηo·h·At) + Rc.

    Incropera et al. (2007), ch. 3, resistance of a fin array; the contact
    (interface material, spreading) resistance adds in series.

    Parameters
    ----------
    h : Convection coefficient on the sink surface [W/(m²·K)].
    total_area : Total wetted area of the sink [m²].
    overall_efficiency : Overall surface efficiency ηo [-].
    contact_resistance : Face-to-sink-base resistance [K/W].

    Returns
    -------
    Resistance [K/W].
    """
    hh = float(positive(h, "h"))
    at = float(positive(total_area, "total_area"))
    eta = float(positive(overall_efficiency, "overall_efficiency"))
    rc = float(finite(contact_resistance, "contact_resistance"))
    if eta > 1.0:
        raise OutOfDomainError(f"overall_efficiency must be <= 1, got {eta}")
    if rc < 0.0:
        raise OutOfDomainError(f"contact_resistance must be >= 0, got {rc}")
    return 1.0 / (eta * hh * at) + rc


# ---------------------------------------------------------------------------
# Cabinet
# ---------------------------------------------------------------------------


def box_shape_factor(
    inner_length: float, inner_width: float, inner_height: float, wall_thickness: float
) -> float:
    """Conduction shape factor of a box with uniform walls.

    S = Σ A_wall/Δx + 0.54·Σ D_edge + 8·0.15·Δx: plane walls on the inner
    face areas, 12 edges of two adjoining walls (0.54·D each, D the inner edge
    length) and 8 corners of three walls (0.15·Δx each). Holman (2010),
    Table 3-1; Incropera et al. (2007), Table 4.1. The edge term requires every
    inner dimension > Δx/5.

    Parameters
    ----------
    inner_length, inner_width, inner_height : Inner dimensions [m].
    wall_thickness : Insulation thickness Δx [m].

    Returns
    -------
    Shape factor S [m]; heat flow is k·S·ΔT.
    """
    dims = [
        float(positive(v, n))
        for v, n in (
            (inner_length, "inner_length"),
            (inner_width, "inner_width"),
            (inner_height, "inner_height"),
        )
    ]
    dx = float(positive(wall_thickness, "wall_thickness"))
    if min(dims) <= dx / 5.0:
        raise OutOfDomainError(
            f"every inner dimension must exceed wall_thickness/5 = {dx / 5.0} m "
            "for the edge shape factor to hold"
        )
    a, b, c = dims
    walls = 2.0 * (a * b + b * c + a * c) / dx
    edges = 0.54 * 4.0 * (a + b + c)
    corners = 8.0 * 0.15 * dx
    return walls + edges + corners


def cabinet_ua(
    inner_length: float,
    inner_width: float,
    inner_height: float,
    wall_thickness: float,
    k_insulation: float,
    h_inside: float | None = None,
    h_outside: float | None = None,
) -> float:
    """Heat-loss conductance UA of an insulated box, edges and corners included.

    UA = 1 / (1/(h_i·A_i) + 1/(k·S) + 1/(h_o·A_o)), with S from
    :func:`box_shape_factor`, A_i the inner and A_o the outer surface area.
    Omitted film coefficients are taken as infinite (surface at air
    temperature). Holman (2010), Table 3-1; Incropera et al. (2007), ch. 3
    (resistances in series) and Table 4.1. Typical still-air film coefficients
    are about 5-10 W/(m²·K) (from memory).

    Parameters
    ----------
    inner_length, inner_width, inner_height : Inner dimensions [m].
    wall_thickness : Insulation thickness [m].
    k_insulation : Thermal conductivity of the insulation [W/(m·K)]; about
        0.022-0.025 for polyurethane foam (ASHRAE Handbook—Fundamentals,
        insulation property tables; from memory).
    h_inside : Inside film coefficient [W/(m²·K)], optional.
    h_outside : Outside film coefficient [W/(m²·K)], optional.

    Returns
    -------
    UA [W/K].
    """
    k = float(positive(k_insulation, "k_insulation"))
    s = box_shape_factor(inner_length, inner_width, inner_height, wall_thickness)
    a, b, c, dx = (
        float(inner_length),
        float(inner_width),
        float(inner_height),
        float(wall_thickness),
    )
    resistance = 1.0 / (k * s)
    if h_inside is not None:
        area_in = 2.0 * (a * b + b * c + a * c)
        resistance += 1.0 / (float(positive(h_inside, "h_inside")) * area_in)
    if h_outside is not None:
        ao, bo, co = a + 2 * dx, b + 2 * dx, c + 2 * dx
        area_out = 2.0 * (ao * bo + bo * co + ao * co)
        resistance += 1.0 / (float(positive(h_outside, "h_outside")) * area_out)
    return 1.0 / resistance


def air_heat_capacity(
    volume: float, t_air: float = T_25C_K, pressure: float = STANDARD_PRESSURE
) -> float:
    """Heat capacity of the air filling a volume, C = ρ·cp·V.

    ρ and cp of dry air from ASHRAE Handbook—Fundamentals 2017, ch. 1, via
    :mod:`.psychrometrics` (the moisture adds well under 1 % near room
    temperature).

    Parameters
    ----------
    volume : Air volume [m³].
    t_air : Air temperature [K].
    pressure : Absolute pressure [Pa].

    Returns
    -------
    Heat capacity [J/K].
    """
    v = float(positive(volume, "volume"))
    return dry_air_density(t_air, pressure) * dry_air_specific_heat(t_air) * v


def cabinet_rhs(
    t: float,
    y: FloatArray,
    t_ambient: float,
    q_cooling: float | Callable[[float, FloatArray], float],
    ua: float,
    c_air: float,
    c_contents: float,
    g_air_contents: float,
    q_internal: float = 0.0,
) -> FloatArray:
    """Right-hand side of the two-node lumped cabinet model.

    C_air·dT_air/dt = UA·(T_amb - T_air) + G·(T_cont - T_air) + q_internal - Qc
    C_cont·dT_cont/dt = G·(T_air - T_cont)

    Lumped-capacitance energy balances (Incropera et al. 2007, ch. 5) on the
    cabinet air and its contents, coupled by conductance G. The signature
    suits ``scipy.integrate.solve_ivp(cabinet_rhs, ..., args=(...))``.

    Parameters
    ----------
    t : Time [s] (passed to ``q_cooling`` when it is a function).
    y : State [T_air, T_contents] [K].
    t_ambient : Ambient temperature [K].
    q_cooling : Heat drawn by the cold side Qc [W], or a function (t, y) -> Qc.
    ua : Cabinet heat-loss conductance [W/K].
    c_air : Heat capacity of the cabinet air (and light fittings) [J/K].
    c_contents : Heat capacity of the contents [J/K].
    g_air_contents : Air-to-contents conductance, h·A of the contents [W/K];
        0 decouples them.
    q_internal : Heat released inside the cabinet [W].

    Returns
    -------
    [dT_air/dt, dT_contents/dt] [K/s].
    """
    state = finite(y, "y")
    if state.shape != (2,):
        raise OutOfDomainError(f"y must be [T_air, T_contents], got shape {state.shape}")
    ta = float(finite(t_ambient, "t_ambient"))
    u = float(positive(ua, "ua"))
    ca = float(positive(c_air, "c_air"))
    cc = float(positive(c_contents, "c_contents"))
    g = float(finite(g_air_contents, "g_air_contents"))
    if g < 0.0:
        raise OutOfDomainError(f"g_air_contents must be >= 0, got {g}")
    qc = float(q_cooling(t, state)) if callable(q_cooling) else float(q_cooling)
    t_air, t_cont = float(state[0]), float(state[1])
    exchange = g * (t_cont - t_air)
    d_air = (u * (ta - t_air) + exchange + float(q_internal) - qc) / ca
    d_cont = -exchange / cc
    return np.array([d_air, d_cont], dtype=np.float64)


# ---------------------------------------------------------------------------
# Whole cooler, steady state
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class OperatingPoint:
    """Steady state of a cooler.

    Attributes
    ----------
    tc : Cold-face temperature [K].
    th : Hot-face temperature [K].
    t_cabinet : Cabinet air temperature [K].
    current : Module current [A].
    voltage : Module voltage [V].
    qc : Heat drawn at the cold face [W].
    qh : Heat rejected at the hot face [W].
    power : Electrical input [W].
    cop : qc / power [-].
    """

    tc: float
    th: float
    t_cabinet: float
    current: float
    voltage: float
    qc: float
    qh: float
    power: float
    cop: float


@dataclass(frozen=True)
class _Props:
    module: ModuleParameters
    alpha: float
    beta: float

    def s_r(self, tc: float, th: float) -> tuple[float, float]:
        # Raw evaluation (no domain checks): the solver may probe odd states.
        dt = 0.5 * (tc + th) - T_25C_K
        m = self.module
        return m.seebeck * (1.0 + self.beta * dt), m.resistance * (1.0 + self.alpha * dt)


def _qc_qh(i: float, tc: float, th: float, s: float, r: float, k: float) -> tuple[float, float]:
    joule = 0.5 * i * i * r
    cond = k * (th - tc)
    return s * i * tc - joule - cond, s * i * th + joule - cond


def _linear_state(
    i: float, ta: float, m: ModuleParameters, r_hot: float, r_cold: float, ua: float, q_int: float
) -> FloatArray:
    # At fixed current and constant S, R, K the network is linear in
    # [tc, th, t_cab]; used as the starting guess.
    s, r, k = m.seebeck, m.resistance, m.conductance
    j = 0.5 * i * i * r
    a = np.array(
        [
            [(s * i + k) * r_cold + 1.0, -k * r_cold, -1.0],
            [k * r_hot, (s * i - k) * r_hot - 1.0, 0.0],
            [s * i + k, -k, ua],
        ]
    )
    b = np.array([j * r_cold, -j * r_hot - ta, j + ua * ta + q_int])
    return np.asarray(np.linalg.solve(a, b), dtype=np.float64)


def _finish(
    tc: float, th: float, tcab: float, i: float, props: _Props, what: str
) -> OperatingPoint:
    for name, value in (("cold face", tc), ("hot face", th), ("cabinet", tcab)):
        if not T_MIN_K <= value <= T_MAX_K:
            raise OutOfDomainError(
                f"{what}: {name} temperature {value:.2f} K lies outside the model's "
                f"{T_MIN_K}..{T_MAX_K} K (-60..150 °C) domain"
            )
    s, r = props.s_r(tc, th)
    qc, qh = _qc_qh(i, tc, th, s, r, props.module.conductance)
    v = s * (th - tc) + i * r
    p = v * i
    if p <= 0.0:
        raise OutOfDomainError(f"{what}: the module takes no electrical power (P = {p:.3g} W)")
    return OperatingPoint(tc, th, tcab, i, v, qc, qh, p, qc / p)


def _check_network(t_ambient: float, r_hot: float, r_cold: float, ua: float) -> None:
    temperature(t_ambient, "t_ambient")
    for name, value in (("r_hot", r_hot), ("r_cold", r_cold)):
        if not math.isfinite(value) or value < 0.0:
            raise OutOfDomainError(f"{name} must be a finite resistance >= 0 K/W, got {value!r}")
    positive(ua, "ua")


def operating_point(
    t_ambient: float,
    module: ModuleParameters,
    r_hot: float,
    r_cold: float,
    ua: float,
    *,
    current: float | None = None,
    voltage: float | None = None,
    q_internal: float = 0.0,
    alpha: float = 0.0,
    beta: float = 0.0,
) -> OperatingPoint:
    """Steady operating point of a whole cooler at a given ambient and drive.

    Unknowns Tc, Th, T_cab solve (Qc, Qh from :mod:`.physics`)

        Qc·r_cold = T_cab - Tc,   Qh·r_hot = Th - T_amb,
        Qc = UA·(T_amb - T_cab) + q_internal,

    with I given, or I = (V - S·ΔT)/R for a given voltage. Solved with
    ``scipy.optimize.root`` (hybrid Powell), started from the exact solution
    of the constant-property network at fixed current.

    Parameters
    ----------
    t_ambient : Ambient air temperature [K].
    module : Module parameters (at 25 °C when ``alpha``/``beta`` are non-zero).
    r_hot : Hot face to ambient resistance [K/W].
    r_cold : Cabinet air to cold face resistance [K/W].
    ua : Cabinet heat-loss conductance [W/K].
    current : Drive current, > 0 [A]; give exactly one of current or voltage.
    voltage : Drive voltage, > 0 [V].
    q_internal : Heat released inside the cabinet [W].
    alpha : Temperature coefficient of R about 25 °C mean module temperature
        [1/K]; 0 keeps R constant (see :func:`.physics.resistance_at_temperature`).
    beta : Temperature coefficient of S about 25 °C [1/K]; 0 keeps S constant.

    Returns
    -------
    The operating point.

    Raises
    ------
    NoConvergenceError : the solver did not converge.
    OutOfDomainError : bad inputs, or a solution outside -60..150 °C.
    """
    _check_network(t_ambient, r_hot, r_cold, ua)
    if current is not None and voltage is None:
        drive = float(positive(current, "current"))
    elif voltage is not None and current is None:
        drive = float(positive(voltage, "voltage"))
    else:
        raise OutOfDomainError("give exactly one of current or voltage")
    q_int = float(finite(q_internal, "q_internal"))
    props = _Props(module, float(finite(alpha, "alpha")), float(finite(beta, "beta")))
    ta = float(t_ambient)
    k = module.conductance

    def current_at(tc: float, th: float) -> float:
        if current is not None:
            return drive
        s, r = props.s_r(tc, th)
        return (drive - s * (th - tc)) / r

    def residual(x: FloatArray) -> FloatArray:
        tc, th, tcab = float(x[0]), float(x[1]), float(x[2])
        s, r = props.s_r(tc, th)
        qc, qh = _qc_qh(current_at(tc, th), tc, th, s, r, k)
        # Each equation in kelvin so the residuals are comparable.
        return np.array(
            [qc * r_cold - (tcab - tc), qh * r_hot - (th - ta), (qc - q_int) / ua - (ta - tcab)]
        )

    i_guesses = (
        [drive] if current is not None else [drive / module.resistance * f for f in (0.5, 0.2, 0.9)]
    )
    message = ""
    for i0 in i_guesses:
        sol = root(residual, _linear_state(i0, ta, module, r_hot, r_cold, ua, q_int), method="hybr")
        if sol.success and np.all(np.isfinite(sol.x)) and np.max(np.abs(residual(sol.x))) < 1e-7:
            tc, th, tcab = (float(v) for v in sol.x)
            return _finish(tc, th, tcab, current_at(tc, th), props, "operating point")
        message = str(sol.message)
    raise NoConvergenceError(f"steady operating point not found: {message}")


@dataclass(frozen=True)
class SetpointCapacity:
    """Whether a cooler can hold a cabinet setpoint, and at what cost.

    Attributes
    ----------
    holdable : True when the most cooling available covers the heat load.
    heat_load : Heat to remove to hold the setpoint, UA·(T_amb - T_set) + q_internal [W].
    max_cooling : Most cooling available with the cabinet at the setpoint, within
        the current and voltage limits [W].
    margin : max_cooling - heat_load [W]; negative when not holdable.
    current : Current that holds the setpoint when holdable, otherwise the
        current of most cooling [A].
    cop : COP at that current [-].
    point : State at that current with the cabinet air at the setpoint (a true
        steady state only when holdable).
    """

    holdable: bool
    heat_load: float
    max_cooling: float
    margin: float
    current: float
    cop: float
    point: OperatingPoint


def capacity_at_setpoint(
    setpoint: float,
    t_ambient: float,
    module: ModuleParameters,
    r_hot: float,
    r_cold: float,
    ua: float,
    max_current: float,
    *,
    max_voltage: float | None = None,
    q_internal: float = 0.0,
    alpha: float = 0.0,
    beta: float = 0.0,
) -> SetpointCapacity:
    """Can a cooler hold a cabinet setpoint at a given ambient, and how.

    With the cabinet air fixed at the setpoint, the face temperatures at each
    current follow from Qc·r_cold = T_set - Tc and Qh·r_hot = Th - T_amb
    (``scipy.optimize.root``). The most cooling within the drive limits is found
    with ``scipy.optimize.minimize_scalar`` and the least current that meets
    the load with ``scipy.optimize.brentq``; Qc, Qh as in :mod:`.physics`
    (Ioffe 1957; Goldsmid 2010).

    Parameters
    ----------
    setpoint : Cabinet air setpoint, below ambient unless q_internal > 0 [K].
    t_ambient : Ambient air temperature [K].
    module : Module parameters (at 25 °C when ``alpha``/``beta`` are non-zero).
    r_hot : Hot face to ambient resistance [K/W].
    r_cold : Cabinet air to cold face resistance [K/W].
    ua : Cabinet heat-loss conductance [W/K].
    max_current : Largest current the supply or module allows [A].
    max_voltage : Largest voltage the supply allows [V], optional.
    q_internal : Heat released inside the cabinet [W].
    alpha : Temperature coefficient of R about 25 °C [1/K].
    beta : Temperature coefficient of S about 25 °C [1/K].

    Returns
    -------
    The capacity figures.

    Raises
    ------
    NoConvergenceError : a solver did not converge.
    OutOfDomainError : bad inputs, a setpoint needing no cooling, or a state
        outside -60..150 °C.
    """
    _check_network(t_ambient, r_hot, r_cold, ua)
    tset = float(temperature(setpoint, "setpoint"))
    ta = float(t_ambient)
    i_cap = float(positive(max_current, "max_current"))
    q_int = float(finite(q_internal, "q_internal"))
    props = _Props(module, float(finite(alpha, "alpha")), float(finite(beta, "beta")))
    load = ua * (ta - tset) + q_int
    if load <= 0.0:
        raise OutOfDomainError(
            f"setpoint {tset:.2f} K needs no cooling at ambient {ta:.2f} K (heat load {load:.3g} W)"
        )
    held = _HeldCabinet(props, tset, ta, r_hot, r_cold)
    i_lim = _current_limit(held, i_cap, max_voltage)
    i_best, q_best = _most_cooling(held, i_lim)
    holdable = q_best >= load
    i_use = (
        _brentq(lambda i: held.cooling(i) - load, 0.0, i_best, "current holding the setpoint")
        if holdable
        else i_best
    )
    tc, th = held.faces(i_use)
    point = _finish(tc, th, tset, i_use, props, "setpoint capacity")
    return SetpointCapacity(holdable, load, q_best, q_best - load, i_use, point.cop, point)


class _HeldCabinet:
    """The network with the cabinet air held at the setpoint: face temperatures per current.

    Qc·r_cold = T_set - Tc and Qh·r_hot = Th - T_amb fix (Tc, Th) at each current. The optimisers
    come back to currents already solved (their answers, the limits), so solutions are cached.
    """

    def __init__(self, props: _Props, tset: float, ta: float, r_hot: float, r_cold: float) -> None:
        self.props = props
        self.tset = tset
        self.ta = ta
        self.r_hot = r_hot
        self.r_cold = r_cold
        self.k = props.module.conductance
        self._solved: dict[float, tuple[float, float]] = {}

    def faces(self, i: float) -> tuple[float, float]:
        """(Tc, Th) at current ``i`` [K]."""
        if i not in self._solved:
            self._solved[i] = self._solve(i)
        return self._solved[i]

    def cooling(self, i: float) -> float:
        """Qc at current ``i`` [W]."""
        tc, th = self.faces(i)
        s, r = self.props.s_r(tc, th)
        return _qc_qh(i, tc, th, s, r, self.k)[0]

    def volts(self, i: float) -> float:
        """Module voltage at current ``i`` [V]."""
        tc, th = self.faces(i)
        s, r = self.props.s_r(tc, th)
        return s * (th - tc) + i * r

    def _residual(self, i: float, x: FloatArray) -> FloatArray:
        tc, th = float(x[0]), float(x[1])
        s, r = self.props.s_r(tc, th)
        qc, qh = _qc_qh(i, tc, th, s, r, self.k)
        return np.array([qc * self.r_cold - (self.tset - tc), qh * self.r_hot - (th - self.ta)])

    def _solve(self, i: float) -> tuple[float, float]:
        def residual(x: FloatArray) -> FloatArray:
            return self._residual(i, x)

        tc, th, settled = self._fixed_point(i, residual)
        if settled:
            return tc, th
        start = np.array([tc, th]) if math.isfinite(tc + th) else np.array([self.tset, self.ta])
        sol = root(residual, start, method="hybr")
        if not sol.success or np.max(np.abs(residual(sol.x))) > 1e-7:
            raise NoConvergenceError(f"face temperatures at {i:.4g} A not found: {sol.message}")
        return float(sol.x[0]), float(sol.x[1])

    def _fixed_point(
        self, i: float, residual: Callable[[FloatArray], FloatArray]
    ) -> tuple[float, float, bool]:
        """(Tc, Th, whether they solve the balances) from the closed-form iteration."""
        # At given S and R the two balances are linear in (Tc, Th): solve them in closed form,
        # update S and R at the new faces and repeat. S and R change by parts per thousand per
        # kelvin, so this contracts fast; scipy's root takes over if it does not settle.
        k, r_cold, r_hot, tset, ta = self.k, self.r_cold, self.r_hot, self.tset, self.ta
        s, r = self.props.module.seebeck, self.props.module.resistance
        tc = th = math.nan
        for _ in range(60):
            j = 0.5 * i * i * r
            a11, a12 = (s * i + k) * r_cold + 1.0, -k * r_cold
            a21, a22 = k * r_hot, (s * i - k) * r_hot - 1.0
            b1, b2 = j * r_cold + tset, -j * r_hot - ta
            det = a11 * a22 - a12 * a21
            if det == 0.0:
                break
            tc_new, th_new = (b1 * a22 - a12 * b2) / det, (a11 * b2 - a21 * b1) / det
            done = abs(tc_new - tc) < 1e-11 and abs(th_new - th) < 1e-11
            tc, th = tc_new, th_new
            if done:
                res = residual(np.array([tc, th]))
                return tc, th, abs(float(res[0])) <= 1e-7 and abs(float(res[1])) <= 1e-7
            s, r = self.props.s_r(tc, th)
        return tc, th, False


def _current_limit(held: _HeldCabinet, i_cap: float, max_voltage: float | None) -> float:
    """Largest current allowed by the current limit and, if given, the voltage limit [A]."""
    i_lim = i_cap
    if max_voltage is not None:
        v_cap = float(positive(max_voltage, "max_voltage"))
        if held.volts(0.0) >= v_cap:
            raise OutOfDomainError(f"max_voltage {v_cap} V cannot drive any current")
        if held.volts(i_cap) > v_cap:
            i_lim = _brentq(lambda i: held.volts(i) - v_cap, 0.0, i_cap, "voltage-limited current")
    return i_lim


def _most_cooling(held: _HeldCabinet, i_lim: float) -> tuple[float, float]:
    """(current [A], Qc [W]) of the most cooling at currents 0..i_lim."""
    best = minimize_scalar(
        lambda i: -held.cooling(float(i)),
        bounds=(0.0, i_lim),
        method="bounded",
        options={"xatol": 1e-6 * i_lim},
    )
    if not best.success:
        raise NoConvergenceError(f"current of most cooling not found: {best.message}")
    i_best = float(best.x)
    return i_best, held.cooling(i_best)


def _brentq(f: Callable[[float], float], lo: float, hi: float, what: str) -> float:
    try:
        x, info = brentq(f, lo, hi, xtol=1e-10, full_output=True)
    except (ValueError, RuntimeError) as exc:
        raise NoConvergenceError(f"{what} not found: {exc}") from exc
    if not info.converged:
        raise NoConvergenceError(f"{what} not found: {info.flag}")
    return float(x)
