"""Single-stage thermoelectric (Peltier) module physics, constant-property model.

Pure functions on numbers and numpy arrays, SI units throughout, temperatures
in kelvin.

Sign conventions (used by every function here and in :mod:`.heat_paths`):

* ``t_cold`` (Tc) and ``t_hot`` (Th) are the temperatures of the two ceramic
  faces [K]; ΔT = Th - Tc [K].
* ``current`` (I) is positive when it flows in the direction that pumps heat
  from the cold face to the hot face [A]. A negative current reverses the
  module (heating mode); the formulas still hold.
* ``seebeck`` (S) is the module Seebeck coefficient, the sum over all couples
  of (αp - αn) [V/K]; ``resistance`` (R) the electrical resistance between the
  terminals [ohm]; ``conductance`` (K) the thermal conductance between the faces
  with no current flowing [W/K]. All three are effective module values.
* ``Qc`` is heat absorbed at the cold face from the load, positive when the
  module cools [W]; ``Qh`` heat released at the hot face into the hot-side sink
  [W]; ``P = V·I`` the electrical power taken by the module [W]. Energy is
  conserved: Qh = Qc + P.

The model is the standard one of

* A. F. Ioffe, *Semiconductor Thermoelements and Thermoelectric Cooling*,
  Infosearch, London, 1957;
* H. J. Goldsmid, *Introduction to Thermoelectricity*, Springer, 2010, ch. 2
  (chapter number from memory);
* D. M. Rowe (ed.), *CRC Handbook of Thermoelectrics*, CRC Press, 1995,
  the chapters on thermoelectric refrigeration.

It neglects the Thomson effect and the temperature dependence of S, R and K
across the legs; :func:`module_at_temperature` evaluates S and R at the mean
module temperature, which is the usual first correction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import least_squares

from ._validate import (
    T_25C_K,
    T_MAX_K,
    T_MIN_K,
    FloatArray,
    FloatOrArray,
    finite,
    out,
    positive,
    temperature,
)
from .errors import (
    InconsistentRatingsError,
    NoConvergenceError,
    OutOfDomainError,
    PhysicsError,
)

__all__ = [
    "BI2TE3_RESISTANCE_TEMPCO",
    "BI2TE3_SEEBECK_TEMPCO",
    "InconsistentRatingsError",
    "ModuleParameters",
    "ModuleRatings",
    "NoConvergenceError",
    "OutOfDomainError",
    "PhysicsError",
    "best_cop",
    "carnot_cop",
    "cold_side_heat",
    "cop",
    "cop_fraction_of_best",
    "current_for_best_cop",
    "current_for_max_cooling",
    "current_fraction_of_best",
    "dimensionless_figure_of_merit",
    "figure_of_merit",
    "hot_side_heat",
    "input_power",
    "max_cooling",
    "max_delta_t",
    "max_delta_t_at_hot_side",
    "module_at_temperature",
    "module_from_leg_properties",
    "module_voltage",
    "modules_in_parallel",
    "modules_in_series",
    "parameters_from_ratings",
    "ratings_from_parameters",
    "resistance_at_25c",
    "resistance_at_temperature",
    "seebeck_at_temperature",
]


# ---------------------------------------------------------------------------
# Module model
# ---------------------------------------------------------------------------


def _electrical_inputs(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray, FloatArray]:
    """Checked current, face temperatures, S and R, in that order."""
    return (
        finite(current, "current"),
        temperature(t_cold, "t_cold"),
        temperature(t_hot, "t_hot"),
        positive(seebeck, "seebeck"),
        positive(resistance, "resistance"),
    )


def module_voltage(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
) -> FloatOrArray:
    """Terminal voltage of a module, V = S·ΔT + I·R.

    Goldsmid (2010), ch. 2; Ioffe (1957).

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].

    Returns
    -------
    Terminal voltage [V].
    """
    i, tc, th, s, r = _electrical_inputs(current, t_cold, t_hot, seebeck, resistance)
    return out(s * (th - tc) + i * r)


def cold_side_heat(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Heat pumped at the cold face, Qc = S·I·Tc - ½·I²·R - K·ΔT.

    Peltier heat minus half the Joule heat minus conduction back from the hot
    face. Ioffe (1957); Goldsmid (2010), ch. 2.

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Heat absorbed at the cold face, positive when cooling [W].
    """
    i, tc, th, s, r = _electrical_inputs(current, t_cold, t_hot, seebeck, resistance)
    k = positive(conductance, "conductance")
    return out(_qc(i, tc, th, s, r, k))


def hot_side_heat(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Heat released at the hot face, Qh = S·I·Th + ½·I²·R - K·ΔT.

    Ioffe (1957); Goldsmid (2010), ch. 2.

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Heat released at the hot face [W].
    """
    i, tc, th, s, r = _electrical_inputs(current, t_cold, t_hot, seebeck, resistance)
    k = positive(conductance, "conductance")
    return out(_qh(i, tc, th, s, r, k))


def input_power(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
) -> FloatOrArray:
    """Electrical input power, P = V·I = S·I·ΔT + I²·R.

    Goldsmid (2010), ch. 2.

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].

    Returns
    -------
    Electrical power taken by the module [W].
    """
    i, tc, th, s, r = _electrical_inputs(current, t_cold, t_hot, seebeck, resistance)
    return out(_power(i, tc, th, s, r))


def cop(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Coefficient of performance for cooling, COP = Qc / P.

    Goldsmid (2010), ch. 2. Undefined where no power is taken, so a current
    giving P <= 0 (zero current, or a module driven backwards by a reversed
    temperature difference) is refused.

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    COP, heat pumped per unit electrical input [-] (negative when the module
    takes power but the load gains heat).
    """
    i, tc, th, s, r = _electrical_inputs(current, t_cold, t_hot, seebeck, resistance)
    k = positive(conductance, "conductance")
    p = _power(i, tc, th, s, r)
    if np.any(p <= 0.0):
        raise OutOfDomainError("COP is undefined where the electrical input power is <= 0")
    return out(_qc(i, tc, th, s, r, k) / p)


def _qc(
    i: FloatArray, tc: FloatArray, th: FloatArray, s: FloatArray, r: FloatArray, k: FloatArray
) -> FloatArray:
    return s * i * tc - 0.5 * i**2 * r - k * (th - tc)


def _qh(
    i: FloatArray, tc: FloatArray, th: FloatArray, s: FloatArray, r: FloatArray, k: FloatArray
) -> FloatArray:
    return s * i * th + 0.5 * i**2 * r - k * (th - tc)


def _power(
    i: FloatArray, tc: FloatArray, th: FloatArray, s: FloatArray, r: FloatArray
) -> FloatArray:
    return i * (s * (th - tc) + i * r)


# ---------------------------------------------------------------------------
# Derived figures
# ---------------------------------------------------------------------------


def figure_of_merit(
    seebeck: FloatOrArray, resistance: FloatOrArray, conductance: FloatOrArray
) -> FloatOrArray:
    """Module figure of merit, Z = S² / (R·K).

    Ioffe (1957); Goldsmid (2010), ch. 2.

    Parameters
    ----------
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Z [1/K].
    """
    s = positive(seebeck, "seebeck")
    r = positive(resistance, "resistance")
    k = positive(conductance, "conductance")
    return out(s**2 / (r * k))


def dimensionless_figure_of_merit(
    t_mean: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Dimensionless figure of merit, ZT = S²·T / (R·K).

    Goldsmid (2010), ch. 2.

    Parameters
    ----------
    t_mean : Temperature at which ZT is quoted, usually the mean of the faces [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    ZT [-].
    """
    t = temperature(t_mean, "t_mean")
    z = np.asarray(figure_of_merit(seebeck, resistance, conductance))
    return out(z * t)


def max_delta_t(t_cold: FloatOrArray, z: FloatOrArray) -> FloatOrArray:
    """Largest temperature difference with no heat load, ΔTmax = ½·Z·Tc².

    Ioffe (1957); Goldsmid (2010), ch. 2. Reached at I = S·Tc/R.

    Parameters
    ----------
    t_cold : Cold-face temperature [K].
    z : Module figure of merit Z [1/K].

    Returns
    -------
    ΔTmax [K].
    """
    tc = temperature(t_cold, "t_cold")
    zz = positive(z, "z")
    return out(0.5 * zz * tc**2)


def max_delta_t_at_hot_side(t_hot: FloatOrArray, z: FloatOrArray) -> FloatOrArray:
    """ΔTmax for a given hot-face temperature, as modules are rated.

    Solves ½·Z·Tc² = Th - Tc for Tc, which gives
    Tc = (sqrt(1 + 2·Z·Th) - 1) / Z and ΔTmax = Th - Tc.
    Goldsmid (2010), ch. 2 (ΔTmax = ½·Z·Tc² rearranged).

    Parameters
    ----------
    t_hot : Hot-face temperature [K].
    z : Module figure of merit Z [1/K].

    Returns
    -------
    ΔTmax [K].
    """
    th = temperature(t_hot, "t_hot")
    zz = positive(z, "z")
    return out(th - _tc_at_dt_max(th, zz))


def _tc_at_dt_max(th: FloatArray, z: FloatArray) -> FloatArray:
    # Written as 2·Th / (1 + sqrt(1 + 2·Z·Th)) to avoid cancellation for small Z.
    return 2.0 * th / (1.0 + np.sqrt(1.0 + 2.0 * z * th))


def current_for_max_cooling(
    t_cold: FloatOrArray, seebeck: FloatOrArray, resistance: FloatOrArray
) -> FloatOrArray:
    """Current giving the most cooling at a given cold-face temperature, I = S·Tc / R.

    From dQc/dI = 0; Ioffe (1957); Goldsmid (2010), ch. 2.

    Parameters
    ----------
    t_cold : Cold-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].

    Returns
    -------
    Current [A].
    """
    tc = temperature(t_cold, "t_cold")
    s = positive(seebeck, "seebeck")
    r = positive(resistance, "resistance")
    return out(s * tc / r)


def max_cooling(
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Most heat the module can pump between two face temperatures.

    Qc,max = S²·Tc² / (2·R) - K·ΔT, at I = S·Tc/R. Ioffe (1957);
    Goldsmid (2010), ch. 2.

    Parameters
    ----------
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Cooling [W]; negative when ΔT exceeds ΔTmax.
    """
    tc = temperature(t_cold, "t_cold")
    th = temperature(t_hot, "t_hot")
    s = positive(seebeck, "seebeck")
    r = positive(resistance, "resistance")
    k = positive(conductance, "conductance")
    return out(s**2 * tc**2 / (2.0 * r) - k * (th - tc))


def _ioffe_m(
    tc: FloatArray, th: FloatArray, s: FloatArray, r: FloatArray, k: FloatArray
) -> FloatArray:
    # M = sqrt(1 + Z·Tm), Tm the arithmetic mean of the face temperatures.
    return np.sqrt(1.0 + s**2 / (r * k) * 0.5 * (tc + th))


def _checked_faces(t_cold: FloatOrArray, t_hot: FloatOrArray) -> tuple[FloatArray, FloatArray]:
    tc = temperature(t_cold, "t_cold")
    th = temperature(t_hot, "t_hot")
    if np.any(th <= tc):
        raise OutOfDomainError("needs t_hot > t_cold (the best-COP figures diverge at ΔT <= 0)")
    return tc, th


def current_for_best_cop(
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Current giving the highest COP, I = S·ΔT / (R·(M - 1)), M = sqrt(1 + Z·Tm).

    Ioffe (1957); Goldsmid (2010), ch. 2. Tm = (Tc + Th)/2.

    Parameters
    ----------
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature, > t_cold [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Current [A].
    """
    tc, th = _checked_faces(t_cold, t_hot)
    s = positive(seebeck, "seebeck")
    r = positive(resistance, "resistance")
    k = positive(conductance, "conductance")
    m = _ioffe_m(tc, th, s, r, k)
    return out(s * (th - tc) / (r * (m - 1.0)))


def best_cop(
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Highest COP between two face temperatures.

    COPmax = Tc·(M - Th/Tc) / (ΔT·(M + 1)), M = sqrt(1 + Z·Tm).
    Ioffe (1957); Goldsmid (2010), ch. 2.

    Parameters
    ----------
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature, > t_cold [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    COP [-]; negative when ΔT exceeds what the module can hold at any current.
    """
    tc, th = _checked_faces(t_cold, t_hot)
    s = positive(seebeck, "seebeck")
    r = positive(resistance, "resistance")
    k = positive(conductance, "conductance")
    m = _ioffe_m(tc, th, s, r, k)
    return out(tc * (m - th / tc) / ((th - tc) * (m + 1.0)))


def carnot_cop(t_cold: FloatOrArray, t_hot: FloatOrArray) -> FloatOrArray:
    """Carnot (reversible) cooling COP, Tc / (Th - Tc).

    Any textbook of thermodynamics; Goldsmid (2010), ch. 2 uses it as the
    limit of the thermoelectric COP as Z -> infinity.

    Parameters
    ----------
    t_cold : Cold-side temperature [K].
    t_hot : Hot-side temperature, > t_cold [K].

    Returns
    -------
    COP [-].
    """
    tc, th = _checked_faces(t_cold, t_hot)
    return out(tc / (th - tc))


def cop_fraction_of_best(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """COP at this current divided by the best COP at these face temperatures.

    1 means the module runs at Ioffe's optimum; see :func:`best_cop`.

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature, > t_cold [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Ratio [-], at most 1 where the best COP is positive.
    """
    best = np.asarray(best_cop(t_cold, t_hot, seebeck, resistance, conductance))
    now = np.asarray(cop(current, t_cold, t_hot, seebeck, resistance, conductance))
    if np.any(best <= 0.0):
        raise OutOfDomainError("ΔT exceeds what the module can hold; best COP is not positive")
    return out(now / best)


def current_fraction_of_best(
    current: FloatOrArray,
    t_cold: FloatOrArray,
    t_hot: FloatOrArray,
    seebeck: FloatOrArray,
    resistance: FloatOrArray,
    conductance: FloatOrArray,
) -> FloatOrArray:
    """Current divided by the best-COP current at these face temperatures.

    Above 1 the module is driven harder than its most efficient point (more
    cooling, lower COP); see :func:`current_for_best_cop`.

    Parameters
    ----------
    current : Module current, positive when cooling [A].
    t_cold : Cold-face temperature [K].
    t_hot : Hot-face temperature, > t_cold [K].
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].

    Returns
    -------
    Ratio [-].
    """
    i = finite(current, "current")
    best = np.asarray(current_for_best_cop(t_cold, t_hot, seebeck, resistance, conductance))
    return out(i / best)


# ---------------------------------------------------------------------------
# Module parameters, ratings, construction
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ModuleParameters:
    """Effective constant-property parameters of one module (or a fixed array).

    Attributes
    ----------
    seebeck : Module Seebeck coefficient S [V/K].
    resistance : Module electrical resistance R [ohm].
    conductance : Module thermal conductance K [W/K].
    n_couples : Number of p-n couples, when known [-].
    """

    seebeck: float
    resistance: float
    conductance: float
    n_couples: int | None = None

    def __post_init__(self) -> None:
        positive(self.seebeck, "seebeck")
        positive(self.resistance, "resistance")
        positive(self.conductance, "conductance")
        if self.n_couples is not None and self.n_couples < 1:
            raise OutOfDomainError(f"n_couples must be >= 1, got {self.n_couples}")

    @property
    def z(self) -> float:
        """Figure of merit Z = S²/(R·K) [1/K]."""
        return self.seebeck**2 / (self.resistance * self.conductance)


@dataclass(frozen=True)
class ModuleRatings:
    """Datasheet-style ratings of a module at a rated hot-face temperature.

    Conventions: ``dt_max`` is the largest ΔT with no heat load; ``i_max`` the
    current that gives it and ``v_max`` the voltage then; ``q_max`` the heat
    pumped at ``i_max`` with ΔT = 0.

    Attributes
    ----------
    i_max : Current at ΔTmax [A].
    v_max : Voltage at ΔTmax and i_max [V].
    dt_max : Largest temperature difference with no load [K].
    q_max : Heat pumped at i_max and ΔT = 0 [W].
    t_hot : Hot-face temperature the ratings refer to [K].
    """

    i_max: float
    v_max: float
    dt_max: float
    q_max: float
    t_hot: float


def ratings_from_parameters(module: ModuleParameters, t_hot: float) -> ModuleRatings:
    """Ratings (Imax, Vmax, ΔTmax, Qmax) that a module would show at ``t_hot``.

    With Tc the cold face at ΔTmax (:func:`max_delta_t_at_hot_side`):
    Imax = S·Tc/R, Vmax = S·ΔTmax + Imax·R = S·Th,
    Qmax = S·Imax·Th - ½·Imax²·R (ΔT = 0). The same relations, inverted, are in
    S. Lineykin and S. Ben-Yaakov, "Modeling and analysis of thermoelectric
    modules", IEEE Trans. Industry Applications 43(2), 505-512, 2007.

    Parameters
    ----------
    module : Effective module parameters.
    t_hot : Rated hot-face temperature [K].

    Returns
    -------
    The ratings.
    """
    th = float(temperature(t_hot, "t_hot"))
    s, r = module.seebeck, module.resistance
    tc = float(_tc_at_dt_max(np.asarray(th), np.asarray(module.z)))
    i_max = s * tc / r
    return ModuleRatings(
        i_max=i_max,
        v_max=s * th,
        dt_max=th - tc,
        q_max=s * i_max * th - 0.5 * i_max**2 * r,
        t_hot=th,
    )


#: Plausible Seebeck coefficient of one bismuth-telluride couple [V/K]:
#: 200..600 µV/K (common practice, no source; a couple is typically ~400 µV/K).
_COUPLE_SEEBECK_RANGE = (200e-6, 600e-6)

_RATING_NAMES = {"i_max": "Imax", "v_max": "Vmax", "dt_max": "ΔTmax", "q_max": "Qmax"}
_RATING_UNITS = {"i_max": "A", "v_max": "V", "dt_max": "K", "q_max": "W"}


def parameters_from_ratings(
    i_max: float,
    v_max: float,
    dt_max: float,
    t_hot: float,
    q_max: float | None = None,
    n_couples: int | None = None,
    rtol: float = 0.10,
) -> ModuleParameters:
    """Effective S, R, K from datasheet ratings.

    From Imax, Vmax and ΔTmax alone the inversion is exact (Lineykin and
    Ben-Yaakov, IEEE Trans. Ind. Appl. 43(2), 2007):
    S = Vmax/Th, R = Vmax·(Th - ΔTmax)/(Imax·Th),
    K = Imax·Vmax·(Th - ΔTmax)/(2·Th·ΔTmax).

    With Qmax as well there are four numbers for three unknowns. Within the
    model they must satisfy Qmax = Imax·Vmax·(Th + ΔTmax)/(2·Th) (follows from
    the relations above). If they miss that by more than ``rtol`` the ratings
    are refused, naming the rating whose smallest single change would reconcile
    them (a single redundancy cannot prove which number is wrong; the message
    lists every alternative). Otherwise S, R, K are fitted to all four by least
    squares on relative residuals (``scipy.optimize.least_squares``).

    Parameters
    ----------
    i_max : Rated current at ΔTmax [A].
    v_max : Rated voltage at ΔTmax [V].
    dt_max : Rated largest temperature difference [K].
    t_hot : Hot-face temperature of the ratings [K] (e.g. 300.15 for 27 °C).
    q_max : Rated heat pumped at Imax and ΔT = 0 [W], optional.
    n_couples : Number of couples, optional; checks that Vmax gives a plausible
        Seebeck coefficient per couple [-].
    rtol : Largest relative disagreement of Qmax accepted [-]. The default 10 %
        covers datasheet rounding and the few-percent error of the
        constant-property model against measured modules.

    Returns
    -------
    Effective module parameters.

    Raises
    ------
    InconsistentRatingsError : the ratings cannot come from one module.
    NoConvergenceError : the least-squares reconciliation failed.
    """
    th = float(temperature(t_hot, "t_hot"))
    for name, value in (("i_max", i_max), ("v_max", v_max), ("dt_max", dt_max)):
        _positive_rating(name, value)
    if q_max is not None:
        _positive_rating("q_max", q_max)
    if th - dt_max < T_MIN_K:
        raise InconsistentRatingsError(
            f"ΔTmax = {dt_max} K at Th = {th} K puts the cold face below "
            f"{T_MIN_K} K (-60 °C), outside the single-stage model's domain",
            "dt_max",
        )
    tc = th - dt_max
    s = v_max / th
    r = v_max * tc / (i_max * th)
    k = i_max * v_max * tc / (2.0 * th * dt_max)
    if n_couples is not None:
        _check_couple_seebeck(s, v_max, th, n_couples)
    if q_max is None:
        return ModuleParameters(s, r, k, n_couples)

    rated = {"i_max": i_max, "v_max": v_max, "dt_max": dt_max, "q_max": q_max}
    _check_consistent(rated, th, rtol)
    s_fit, r_fit, k_fit = _fit_to_ratings(rated, th, (s, r, k))
    return ModuleParameters(s_fit, r_fit, k_fit, n_couples)


def _check_couple_seebeck(s: float, v_max: float, th: float, n_couples: int) -> None:
    if n_couples < 1:
        raise OutOfDomainError(f"n_couples must be >= 1, got {n_couples}")
    per_couple = s / n_couples
    lo, hi = _COUPLE_SEEBECK_RANGE
    if not lo <= per_couple <= hi:
        raise InconsistentRatingsError(
            f"Vmax = {v_max} V at Th = {th} K gives {per_couple * 1e6:.0f} µV/K per couple "
            f"for {n_couples} couples, outside the plausible {lo * 1e6:.0f}.."
            f"{hi * 1e6:.0f} µV/K",
            "v_max",
        )


def _fit_to_ratings(
    rated: dict[str, float], th: float, start: tuple[float, float, float]
) -> tuple[float, float, float]:
    """S, R, K fitted to all four ratings by least squares on relative residuals."""
    target = np.array(
        [rated["i_max"], rated["v_max"], rated["dt_max"], rated["q_max"]], dtype=np.float64
    )

    def residuals(x: FloatArray) -> FloatArray:
        sx, rx, kx = (float(v) for v in np.exp(x))
        rt = ratings_from_parameters(ModuleParameters(sx, rx, kx), th)
        model = np.array([rt.i_max, rt.v_max, rt.dt_max, rt.q_max], dtype=np.float64)
        rel: FloatArray = model / target - 1.0
        return rel

    # Fit in log space so S, R, K stay positive whatever the optimiser tries.
    fit = least_squares(residuals, np.log(list(start)))
    if not fit.success or not np.all(np.isfinite(fit.x)):
        raise NoConvergenceError(f"least-squares reconciliation of ratings failed: {fit.message}")
    s_fit, r_fit, k_fit = (float(v) for v in np.exp(fit.x))
    return s_fit, r_fit, k_fit


def _positive_rating(name: str, value: float) -> None:
    if not math.isfinite(value) or value <= 0.0:
        raise InconsistentRatingsError(
            f"{_RATING_NAMES[name]} must be a positive number, got {value!r}", name
        )


def _check_consistent(rated: dict[str, float], th: float, rtol: float) -> None:
    i, v, dt, q = rated["i_max"], rated["v_max"], rated["dt_max"], rated["q_max"]
    # Value each rating would need, the other three held: from
    # Qmax = Imax·Vmax·(Th + ΔTmax) / (2·Th).
    needed = {
        "i_max": 2.0 * th * q / (v * (th + dt)),
        "v_max": 2.0 * th * q / (i * (th + dt)),
        "dt_max": 2.0 * th * q / (i * v) - th,
        "q_max": i * v * (th + dt) / (2.0 * th),
    }
    change = {n: needed[n] / rated[n] - 1.0 for n in needed}
    if abs(change["q_max"]) <= rtol:
        return
    culprit = min(change, key=lambda n: abs(change[n]))
    alternatives = ", ".join(
        f"{_RATING_NAMES[n]} -> {needed[n]:.3g} {_RATING_UNITS[n]} ({change[n]:+.0%})"
        for n in sorted(change, key=lambda n: abs(change[n]))
    )
    raise InconsistentRatingsError(
        f"ratings disagree: {_RATING_NAMES[culprit]} = {rated[culprit]:.4g} "
        f"{_RATING_UNITS[culprit]} does not fit the other three, which need "
        f"{needed[culprit]:.4g} {_RATING_UNITS[culprit]} ({change[culprit]:+.0%}); "
        f"single changes that would reconcile them: {alternatives}",
        culprit,
    )


def module_from_leg_properties(
    seebeck_leg: float,
    resistivity: float,
    thermal_conductivity: float,
    leg_area: float,
    leg_length: float,
    n_couples: int,
    contact_resistance: float = 0.0,
) -> ModuleParameters:
    """Module parameters from leg material and geometry, p and n legs alike.

    S = 2·n·α, R = 2·n·ρ·L/A + Rc, K = 2·n·λ·A/L for n couples of legs of
    cross-section A and length L. Goldsmid (2010), ch. 2; Rowe (1995).

    Parameters
    ----------
    seebeck_leg : Magnitude of the Seebeck coefficient of one leg α [V/K].
    resistivity : Electrical resistivity of the leg material ρ [ohm·m].
    thermal_conductivity : Thermal conductivity of the leg material λ [W/(m·K)].
    leg_area : Cross-section of one leg A [m²].
    leg_length : Length of one leg L [m].
    n_couples : Number of couples n [-].
    contact_resistance : Total electrical contact and interconnect resistance
        added in series [ohm].

    Returns
    -------
    Effective module parameters.
    """
    a = float(positive(seebeck_leg, "seebeck_leg"))
    rho = float(positive(resistivity, "resistivity"))
    lam = float(positive(thermal_conductivity, "thermal_conductivity"))
    area = float(positive(leg_area, "leg_area"))
    length = float(positive(leg_length, "leg_length"))
    rc = float(finite(contact_resistance, "contact_resistance"))
    if rc < 0.0:
        raise OutOfDomainError(f"contact_resistance must be >= 0, got {rc}")
    if n_couples < 1:
        raise OutOfDomainError(f"n_couples must be >= 1, got {n_couples}")
    legs = 2 * n_couples
    return ModuleParameters(
        seebeck=legs * a,
        resistance=legs * rho * length / area + rc,
        conductance=legs * lam * area / length,
        n_couples=n_couples,
    )


def modules_in_series(module: ModuleParameters, n: int) -> ModuleParameters:
    """``n`` identical modules, electrically in series, thermally in parallel.

    Same current through each and the same face temperatures, so the
    energy-balance terms add: S -> n·S, R -> n·R, K -> n·K.
    Rowe (1995), module arrays.

    Parameters
    ----------
    module : One module.
    n : Number of modules [-].

    Returns
    -------
    Equivalent single module (drive it with the string current and voltage).
    """
    if n < 1:
        raise OutOfDomainError(f"n must be >= 1, got {n}")
    couples = None if module.n_couples is None else module.n_couples * n
    return ModuleParameters(
        module.seebeck * n, module.resistance * n, module.conductance * n, couples
    )


def modules_in_parallel(module: ModuleParameters, n: int) -> ModuleParameters:
    """``n`` identical modules, electrically in parallel, thermally in parallel.

    Same voltage across each, current shared: S -> S, R -> R/n, K -> n·K.
    ``n_couples`` is dropped because S no longer scales with the couple count.
    Rowe (1995), module arrays.

    Parameters
    ----------
    module : One module.
    n : Number of modules [-].

    Returns
    -------
    Equivalent single module (drive it with the total current).
    """
    if n < 1:
        raise OutOfDomainError(f"n must be >= 1, got {n}")
    return ModuleParameters(module.seebeck, module.resistance / n, module.conductance * n, None)


# ---------------------------------------------------------------------------
# Temperature dependence
# ---------------------------------------------------------------------------

#: Relative change of module resistance per kelvin of mean temperature near
#: room temperature for bismuth-telluride modules [1/K]. From memory: not fitted to
#: measured data or to a named datasheet family. For orientation only: with the
#: carrier density fixed by doping and acoustic-phonon scattering, one parabolic
#: band gives ρ ∝ T^p, from p = 3/2 for non-degenerate carriers (mobility ∝ T^(-3/2))
#: down to p = 1 for degenerate ones (mobility ∝ T^(-1)) (standard transport theory,
#: from memory), i.e. 1/T..1.5/T = 0.0034..0.0050 /K at 25 °C. The figure lies in
#: that bracket, as expected for the partly degenerate carriers of alloys doped for
#: best ZT (from memory); real alloys may depart from the one-band picture.
BI2TE3_RESISTANCE_TEMPCO = 4.5e-3

#: Relative change of the module Seebeck coefficient per kelvin near room
#: temperature for bismuth-telluride modules [1/K]. From memory (α of the
#: alloys rises towards a maximum near 350-400 K).
BI2TE3_SEEBECK_TEMPCO = 1.5e-3

# |coefficient| above this makes 1 + c·(T - 25 °C) reach zero inside the domain.
_TEMPCO_LIMIT = 1.0 / (T_MAX_K - T_25C_K)


def _linear_factor(t_mean_k: FloatOrArray, coefficient: float, name: str) -> FloatArray:
    t = temperature(t_mean_k, "t_mean_k")
    c = float(finite(coefficient, name))
    if abs(c) >= _TEMPCO_LIMIT:
        raise OutOfDomainError(f"|{name}| must be < {_TEMPCO_LIMIT:.4g} 1/K, got {c}")
    return 1.0 + c * (t - T_25C_K)


def resistance_at_temperature(
    r_25c: FloatOrArray, t_mean_k: FloatOrArray, alpha: float = BI2TE3_RESISTANCE_TEMPCO
) -> FloatOrArray:
    """Module resistance at a mean temperature, R = R25·(1 + α·(Tm - 298.15 K)).

    Linear expansion about 25 °C; adequate within a few tens of kelvin.

    Parameters
    ----------
    r_25c : Resistance at a mean module temperature of 25 °C [ohm].
    t_mean_k : Mean module temperature (Tc + Th)/2 [K].
    alpha : Temperature coefficient of resistance [1/K].

    Returns
    -------
    Resistance [ohm].
    """
    r = positive(r_25c, "r_25c")
    return out(r * _linear_factor(t_mean_k, alpha, "alpha"))


def resistance_at_25c(
    r_measured: FloatOrArray, t_mean_k: FloatOrArray, alpha: float = BI2TE3_RESISTANCE_TEMPCO
) -> FloatOrArray:
    """Correct a measured module resistance to a mean temperature of 25 °C.

    Inverse of :func:`resistance_at_temperature`: R25 = R / (1 + α·(Tm - 298.15 K)).
    Comparing R25 over months separates wear (R25 rises) from a seasonal
    ambient swing (R rises with Tm, R25 does not).

    Parameters
    ----------
    r_measured : Resistance measured at mean module temperature ``t_mean_k`` [ohm].
    t_mean_k : Mean module temperature during the measurement [K].
    alpha : Temperature coefficient of resistance [1/K].

    Returns
    -------
    Resistance referred to 25 °C [ohm].
    """
    r = positive(r_measured, "r_measured")
    return out(r / _linear_factor(t_mean_k, alpha, "alpha"))


def seebeck_at_temperature(
    s_25c: FloatOrArray, t_mean_k: FloatOrArray, beta: float = BI2TE3_SEEBECK_TEMPCO
) -> FloatOrArray:
    """Module Seebeck coefficient at a mean temperature, S = S25·(1 + β·(Tm - 298.15 K)).

    Parameters
    ----------
    s_25c : Seebeck coefficient at a mean module temperature of 25 °C [V/K].
    t_mean_k : Mean module temperature (Tc + Th)/2 [K].
    beta : Relative temperature coefficient of S [1/K].

    Returns
    -------
    Seebeck coefficient [V/K].
    """
    s = positive(s_25c, "s_25c")
    return out(s * _linear_factor(t_mean_k, beta, "beta"))


def module_at_temperature(
    module_25c: ModuleParameters,
    t_mean_k: float,
    alpha: float = BI2TE3_RESISTANCE_TEMPCO,
    beta: float = BI2TE3_SEEBECK_TEMPCO,
) -> ModuleParameters:
    """Module parameters evaluated at a mean temperature.

    S and R follow :func:`seebeck_at_temperature` and
    :func:`resistance_at_temperature`; K is kept, as the thermal conductivity
    of the alloys varies little near room temperature (from memory).

    Parameters
    ----------
    module_25c : Parameters at a mean module temperature of 25 °C.
    t_mean_k : Mean module temperature [K].
    alpha : Temperature coefficient of resistance [1/K].
    beta : Relative temperature coefficient of S [1/K].

    Returns
    -------
    Parameters at ``t_mean_k``.
    """
    s = float(seebeck_at_temperature(module_25c.seebeck, t_mean_k, beta))
    r = float(resistance_at_temperature(module_25c.resistance, t_mean_k, alpha))
    return replace(module_25c, seebeck=s, resistance=r)
