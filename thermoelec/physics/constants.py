"""Physical constants and unit factors, each once, from :mod:`scipy.constants`.

SI inside the package: these are the only places where a temperature in °C, a
charge in Ah or an energy in Wh meets its SI value. The values are those of
scipy (CODATA 2018; the SI of 2019 fixes R and σ exactly through the Boltzmann,
Avogadro and Planck constants).
"""

from __future__ import annotations

import scipy.constants as _si

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
ZERO_CELSIUS: float = _si.zero_Celsius
#: One hour in seconds [s/h] (``scipy.constants.hour``).
SECONDS_PER_HOUR: float = _si.hour
#: One watt-hour in joules [J/Wh]: 1 W held for one hour (``scipy.constants.hour``).
JOULES_PER_WH: float = _si.hour
#: One ampere-hour in coulombs [C/Ah]: 1 A held for one hour (``scipy.constants.hour``).
COULOMBS_PER_AH: float = _si.hour
#: Molar gas constant [J/(mol K)] (CODATA 2018, exact in the SI of 2019; ``scipy.constants.R``).
GAS_CONSTANT: float = _si.R
#: Stefan-Boltzmann constant [W/(m² K⁴)] (CODATA 2018, exact in the SI of 2019;
#: ``scipy.constants.Stefan_Boltzmann``).
STEFAN_BOLTZMANN: float = _si.Stefan_Boltzmann
#: Standard acceleration of gravity [m/s²] (3rd CGPM, 1901; ``scipy.constants.g``).
STANDARD_GRAVITY: float = _si.g
