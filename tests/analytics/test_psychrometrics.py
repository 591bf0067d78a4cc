"""Dew point checked against psychrolib and the Magnus formula.

References: ASHRAE Handbook—Fundamentals (2017) ch. 1 as implemented by
psychrolib (Meyer & Thevenard, JOSS 4(33) 1137, 2019); O. A. Alduchov and
R. E. Eskridge, "Improved Magnus form approximation of saturation vapor
pressure", J. Appl. Meteor. 35, 601-609, 1996.
"""

from __future__ import annotations

import math

import numpy as np
import psychrolib
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tecfleet.analytics.errors import OutOfDomainError
from tecfleet.analytics.psychrometrics import (
    condensation_margin,
    dew_point,
    dry_air_density,
    dry_air_specific_heat,
)

POINTS = [(-20.0, 0.7), (0.5, 0.95), (12.0, 0.4), (25.0, 0.6), (38.0, 0.85), (60.0, 0.2)]


@pytest.mark.parametrize(("t_c", "rh"), POINTS)
def test_dew_point_matches_psychrolib(t_c: float, rh: float) -> None:
    # Reference library in its own (°C) units; only the K <-> °C conversion
    # differs, so agreement to 1e-9 K.
    psychrolib.SetUnitSystem(psychrolib.SI)
    expected = psychrolib.GetTDewPointFromRelHum(t_c, rh) + 273.15
    assert dew_point(t_c + 273.15, rh) == pytest.approx(expected, abs=1e-9)


def _magnus_dew_point_c(t_c: float, rh: float) -> float:
    # Alduchov & Eskridge (1996) AERK constants over water: a = 17.625,
    # b = 243.04 °C; Td = b·γ/(a - γ), γ = ln(RH) + a·t/(b + t).
    g = math.log(rh) + 17.625 * t_c / (243.04 + t_c)
    return 243.04 * g / (17.625 - g)


@pytest.mark.parametrize(("t_c", "rh"), [(25.0, 0.6), (20.0, 0.5), (30.0, 0.8), (10.0, 0.9)])
def test_dew_point_matches_magnus_within_its_accuracy(t_c: float, rh: float) -> None:
    # AERK's saturation pressure is within about 0.4 % of the reference over
    # -40..50 °C (Alduchov & Eskridge 1996). Near 20 °C, d(ln es)/dT ≈ 0.06 /K,
    # so 0.4 % is about 0.07 K of dew point: allow 0.1 K. Dew points above 0 °C
    # only, since Magnus here is over water and psychrolib goes over ice below.
    td = _magnus_dew_point_c(t_c, rh)
    assert td > 0.0
    assert dew_point(t_c + 273.15, rh) == pytest.approx(td + 273.15, abs=0.1)


def test_dew_point_at_25c_60_percent_worked_example() -> None:
    # 25 °C at 60 % RH, worked here from the two published forms: Magnus with
    # the AERK constants (Alduchov & Eskridge 1996, as above) gives 16.70 °C,
    # psychrolib (ASHRAE Handbook—Fundamentals 2017 ch. 1, Hyland-Wexler) the
    # same to 0.01 K. The 16.7 °C often quoted for this case is from memory;
    # both forms round to it at one decimal.
    magnus_c = _magnus_dew_point_c(25.0, 0.6)
    psychrolib.SetUnitSystem(psychrolib.SI)
    ashrae_c = psychrolib.GetTDewPointFromRelHum(25.0, 0.6)
    td_c = dew_point(298.15, 0.6) - 273.15
    assert td_c == pytest.approx(ashrae_c, abs=1e-9)
    assert td_c == pytest.approx(magnus_c, abs=0.1)
    assert round(magnus_c, 1) == round(td_c, 1) == 16.7


def test_vectorised_over_arrays() -> None:
    t = np.array([[273.15 + 5.0, 273.15 + 25.0], [273.15 + 35.0, 273.15 - 10.0]])
    rh = np.array([0.9, 0.5])
    out = dew_point(t, rh)
    assert isinstance(out, np.ndarray) and out.shape == (2, 2)
    psychrolib.SetUnitSystem(psychrolib.SI)
    for idx in np.ndindex(2, 2):
        ref = psychrolib.GetTDewPointFromRelHum(t[idx] - 273.15, rh[idx[1]]) + 273.15
        assert out[idx] == pytest.approx(ref, abs=1e-9)


def test_saturated_air_dew_point_is_dry_bulb() -> None:
    # At RH = 1 the air is saturated, Td = T by definition (ASHRAE ch. 1);
    # psychrolib's solver tolerance is 0.001 K.
    assert dew_point(293.15, 1.0) == pytest.approx(293.15, abs=1e-3)


def test_condensation_margin_sign() -> None:
    # Cold-side sink at 5 °C in a 25 °C, 60 % room (dew point 16.7 °C, worked
    # from Magnus/AERK and psychrolib in the test above) wets; at 20 °C it stays dry.
    assert condensation_margin(278.15, 298.15, 0.6) < 0.0
    assert condensation_margin(293.15, 298.15, 0.6) > 0.0


def test_dry_air_density_matches_standard_atmosphere() -> None:
    # ISO 2533:1975 standard atmosphere at sea level: 1.225 kg/m³ at 15 °C and
    # 101325 Pa. The table is rounded to 4 significant figures: allow 0.1 %.
    assert dry_air_density(288.15) == pytest.approx(1.225, rel=1e-3)


def test_dry_air_specific_heat_matches_textbook_table() -> None:
    # Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed.,
    # Table A.4, air at 300 K: cp = 1.007 kJ/(kg·K) (from memory); ASHRAE's
    # constant 1.006 is within 0.2 % of it.
    assert dry_air_specific_heat(300.0) == pytest.approx(1007.0, rel=2e-3)


@pytest.mark.parametrize(("t", "rh"), [(298.15, 0.0), (298.15, 1.2), (298.15, 65.0), (100.0, 0.5)])
def test_out_of_domain_is_refused(t: float, rh: float) -> None:
    with pytest.raises(OutOfDomainError):
        dew_point(t, rh)


@settings(max_examples=60, deadline=None)
@given(
    st.floats(min_value=213.15, max_value=423.15),
    st.floats(min_value=0.01, max_value=0.99),
)
def test_dew_point_below_dry_bulb_and_rising_with_humidity(t: float, rh: float) -> None:
    td = dew_point(t, rh)
    assert math.isfinite(td)
    assert td < t
    assert dew_point(t, min(rh + 0.01, 1.0)) > td
