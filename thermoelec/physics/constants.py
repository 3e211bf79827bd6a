"""Physical constants and unit factors, each once, with the values of :mod:`scipy.constants`.

SI inside the package: these are the only places where a temperature in °C, a
charge in Ah or an energy in Wh meets its SI value. The values are those of
scipy (CODATA 2018; the SI of 2019 fixes R and σ exactly through the Boltzmann,
Avogadro and Planck constants), written out to the last bit rather than imported:
``import scipy.constants`` builds the whole CODATA table, a seventh of a second
of every command's start-up. ``tests/physics/test_constants.py`` holds each to
scipy's value.
"""

from __future__ import annotations

__all__ = [
    "COULOMBS_PER_AH",
    "GAS_CONSTANT",
    "JOULES_PER_WH",
    "SECONDS_PER_HOUR",
    "STANDARD_GRAVITY",
    "STEFAN_BOLTZMANN",
    "ZERO_CELSIUS",
]

#: 0 °C in kelvin [K] (definition of the Celsius scale; ``scipy.constants.zero_Celsius``).
ZERO_CELSIUS: float = 273.15
#: One hour in seconds [s/h] (``scipy.constants.hour``).
SECONDS_PER_HOUR: float = 3600.0
#: One watt-hour in joules [J/Wh]: 1 W held for one hour (``scipy.constants.hour``).
JOULES_PER_WH: float = SECONDS_PER_HOUR
#: One ampere-hour in coulombs [C/Ah]: 1 A held for one hour (``scipy.constants.hour``).
COULOMBS_PER_AH: float = SECONDS_PER_HOUR
#: Molar gas constant [J/(mol K)]: N_A k (CODATA 2018, exact in the SI of 2019; ``scipy.constants.R``).
GAS_CONSTANT: float = 8.31446261815324
#: Stefan-Boltzmann constant [W/(m² K⁴)]: 2 π⁵ k⁴ / (15 h³ c²) (CODATA 2018, exact in the SI of 2019;
#: ``scipy.constants.Stefan_Boltzmann``).
STEFAN_BOLTZMANN: float = 5.6703744191844314e-08
#: Standard acceleration of gravity [m/s²] (3rd CGPM, 1901; ``scipy.constants.g``).
STANDARD_GRAVITY: float = 9.80665
