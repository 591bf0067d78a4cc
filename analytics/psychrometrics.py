"""Moist-air relations needed around a cooler: dew point and air properties.

Wraps psychrolib (D. Meyer and D. Thevenard, "PsychroLib: a library of
psychrometric functions to calculate thermodynamic properties of air",
Journal of Open Source Software 4(33), 1137, 2019), which implements the
formulas of ASHRAE Handbook—Fundamentals (2017), ch. 1 "Psychrometrics".
Here temperatures are in kelvin and relative humidity is a fraction 0..1;
psychrolib itself works in °C, so conversions happen at this boundary.
"""

from __future__ import annotations

import numpy as np
import psychrolib

from ._validate import FloatArray, FloatOrArray, finite, out, positive, temperature
from .errors import OutOfDomainError

__all__ = ["condensation_margin", "dew_point", "dry_air_density", "dry_air_specific_heat"]

_KELVIN_OFFSET = 273.15

#: Standard atmospheric pressure at sea level [Pa] (ASHRAE Handbook—Fundamentals ch. 1).
STANDARD_PRESSURE = 101325.0


def _ensure_si() -> None:
    # psychrolib keeps its unit system in module state; set it only when needed
    # because setting it recompiles functions when numba is installed.
    if getattr(psychrolib, "PSYCHROLIB_UNITS", None) != psychrolib.SI:
        psychrolib.SetUnitSystem(psychrolib.SI)


def _relative_humidity(x: FloatOrArray) -> FloatArray:
    rh = finite(x, "relative_humidity")
    if np.any(rh <= 0.0) or np.any(rh > 1.0):
        raise OutOfDomainError(
            f"relative_humidity must be a fraction in (0, 1], got {x!r} "
            "(a value like 65 is a percentage: divide by 100)"
        )
    return rh


def _dew_point_c(t_c: float, rh: float) -> float:
    return float(psychrolib.GetTDewPointFromRelHum(t_c, rh))


_dew_point_c_vec = np.vectorize(_dew_point_c, otypes=[np.float64])


def dew_point(t_dry_bulb: FloatOrArray, relative_humidity: FloatOrArray) -> FloatOrArray:
    """Dew-point temperature of moist air.

    Solves pw(Td) = RH·pws(T) with the saturation pressure of Hyland and Wexler
    (ASHRAE Handbook—Fundamentals 2017, ch. 1, eqs. 5 and 6), inverted
    numerically by ``psychrolib.GetTDewPointFromRelHum`` (tolerance 0.001 K).
    Below 0 °C the saturation pressure is taken over ice, so the result there
    is the frost point.

    Parameters
    ----------
    t_dry_bulb : Dry-bulb air temperature, within 213.15..423.15 K [K].
    relative_humidity : Relative humidity as a fraction in (0, 1] [-].

    Returns
    -------
    Dew-point temperature [K]; arrays broadcast.
    """
    t = temperature(t_dry_bulb, "t_dry_bulb")
    rh = _relative_humidity(relative_humidity)
    _ensure_si()
    td_c = np.asarray(_dew_point_c_vec(t - _KELVIN_OFFSET, rh), dtype=np.float64)
    return out(td_c + _KELVIN_OFFSET)


def condensation_margin(
    t_surface: FloatOrArray, t_dry_bulb: FloatOrArray, relative_humidity: FloatOrArray
) -> FloatOrArray:
    """How far a surface is above the dew point of the air around it.

    Moisture condenses on a surface colder than the dew point of the air in
    contact with it (ASHRAE Handbook—Fundamentals 2017, ch. 1), so a negative
    margin on the cold-side sink or cabinet wall means it is wetting.

    Parameters
    ----------
    t_surface : Surface temperature [K].
    t_dry_bulb : Dry-bulb temperature of the surrounding air [K].
    relative_humidity : Relative humidity of that air as a fraction in (0, 1] [-].

    Returns
    -------
    Surface temperature minus dew point [K].
    """
    ts = temperature(t_surface, "t_surface")
    td = np.asarray(dew_point(t_dry_bulb, relative_humidity), dtype=np.float64)
    return out(ts - td)


def dry_air_density(t_dry_bulb: float, pressure: float = STANDARD_PRESSURE) -> float:
    """Density of dry air from the perfect-gas relation, ρ = p / (Rda·T).

    ASHRAE Handbook—Fundamentals 2017, ch. 1, eq. 14, via
    ``psychrolib.GetDryAirDensity``.

    Parameters
    ----------
    t_dry_bulb : Air temperature [K].
    pressure : Absolute pressure [Pa].

    Returns
    -------
    Density [kg/m³].
    """
    t = float(temperature(t_dry_bulb, "t_dry_bulb"))
    p = float(positive(pressure, "pressure"))
    _ensure_si()
    return float(psychrolib.GetDryAirDensity(t - _KELVIN_OFFSET, p))


def dry_air_specific_heat(t_dry_bulb: float) -> float:
    """Specific heat of dry air at constant pressure.

    Taken as the slope of the dry-air enthalpy of ASHRAE Handbook—Fundamentals
    2017, ch. 1, eq. 28 (h = 1.006 kJ/kg per °C), via
    ``psychrolib.GetDryAirEnthalpy``.

    Parameters
    ----------
    t_dry_bulb : Air temperature [K].

    Returns
    -------
    Specific heat [J/(kg·K)].
    """
    t_c = float(temperature(t_dry_bulb, "t_dry_bulb")) - _KELVIN_OFFSET
    _ensure_si()
    # Central difference over 1 K: the enthalpy is linear in t, so this is exact.
    return float(psychrolib.GetDryAirEnthalpy(t_c + 0.5) - psychrolib.GetDryAirEnthalpy(t_c - 0.5))
