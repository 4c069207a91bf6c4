"""Physical constants and fixed coefficients used by the physics functions.

Universal constants come from :mod:`scipy.constants` (CODATA). Values that belong to a
particular method (FAO-56's rounded constants) are kept apart and named after their source,
so that worked examples can be reproduced with the constants their authors used.

Sources
-------
- Allen, R. G., Pereira, L. S., Raes, D. and Smith, M. (1998). Crop evapotranspiration:
  guidelines for computing crop water requirements. FAO Irrigation and Drainage Paper 56.
  FAO, Rome.
"""

import scipy.constants

SOLAR_CONSTANT = 1367.0
"""Solar constant for instantaneous shortwave. [W m-2]

The usual value in instantaneous surface-energy-balance work (common practice); FAO-56's
0.0820 MJ m-2 min-1 equals 1366.7 W m-2.
"""

FAO_SOLAR_CONSTANT = 0.0820
"""Solar constant as FAO-56 gives it for daily radiation, FAO-56 eq. 21. [MJ m-2 min-1]"""

STEFAN_BOLTZMANN = scipy.constants.Stefan_Boltzmann
"""Stefan–Boltzmann constant, CODATA via :mod:`scipy.constants`. [W m-2 K-4]"""

VON_KARMAN = 0.41
"""von Kármán constant, the value FAO-56 uses (eq. 4). [-]"""

GRAVITY = scipy.constants.g
"""Standard acceleration of gravity, :mod:`scipy.constants`. [m s-2]"""

SPECIFIC_HEAT_AIR = 1004.0
"""Specific heat of (dry) air at constant pressure (common practice). [J kg-1 K-1]"""

SPECIFIC_GAS_CONSTANT_AIR = 0.287
"""Specific gas constant of dry air as FAO-56 gives it, Annex 3 eq. 3-5. [kJ kg-1 K-1]"""

ZERO_CELSIUS = scipy.constants.zero_Celsius
"""0 °C expressed in kelvin, :mod:`scipy.constants`. [K]"""

SECONDS_PER_HOUR = 3600.0
"""Seconds in one hour. [s]"""

SECONDS_PER_DAY = 86400.0
"""Seconds in one day. [s]"""

STEFAN_BOLTZMANN_DAILY = STEFAN_BOLTZMANN * SECONDS_PER_DAY / 1e6
"""CODATA Stefan–Boltzmann constant as a daily energy sum. [MJ m-2 d-1 K-4]"""

FAO_STEFAN_BOLTZMANN_DAILY = 4.903e-9
"""Stefan–Boltzmann constant as FAO-56 rounds it (eq. 39). [MJ m-2 d-1 K-4]"""
