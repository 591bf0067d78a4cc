"""Unit conversions and physical constants of the alert rules."""

from __future__ import annotations

from tecfleet.analytics._validate import T_0C_K

#: 0 °C in kelvin [K].
T0 = T_0C_K
#: Milliseconds in a minute, an hour and a day [ms].
MS_MIN = 60_000
MS_HOUR = 3_600_000
MS_DAY = 86_400_000
#: Activation energy of USP <1079> mean kinetic temperature, 83.144 kJ/mol, so that
#: ΔH/R = 10 000 K with R = 8.3144 J/(mol·K) (USP <1079>; from memory) [J/mol].
MKT_ACTIVATION_J_PER_MOL = 83_144.0
#: The gas constant as USP <1079> states it for the MKT [J/(mol·K)].
MKT_GAS_CONSTANT = 8.3144
