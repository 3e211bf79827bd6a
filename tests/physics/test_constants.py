"""The constants of thermoelec.physics.constants against their definitions.

Sources: the SI Brochure, 9th ed. (BIPM 2019): the defining constants k, N_A,
h, c are exact, so R = N_A k and σ = 2 π⁵ k⁴ / (15 h³ c²) are exact too; 0 °C
is 273.15 K by the definition of the Celsius scale; standard gravity is
9.80665 m/s² (3rd CGPM, 1901); an hour is 3600 s. The values written in the
module are scipy.constants' to the last bit.
"""

import math

import pytest
import scipy.constants

from thermoelec.physics import cell, constants

BOLTZMANN = 1.380649e-23  # [J/K], exact
AVOGADRO = 6.02214076e23  # [1/mol], exact
PLANCK = 6.62607015e-34  # [J s], exact
LIGHT = 299792458.0  # [m/s], exact


def test_constants_are_their_definitions():
    assert constants.GAS_CONSTANT == pytest.approx(AVOGADRO * BOLTZMANN, rel=1e-15)
    sigma = 2 * math.pi**5 * BOLTZMANN**4 / (15 * PLANCK**3 * LIGHT**2)
    assert constants.STEFAN_BOLTZMANN == pytest.approx(sigma, rel=1e-14)
    assert constants.ZERO_CELSIUS == 273.15
    assert constants.STANDARD_GRAVITY == 9.80665
    assert constants.SECONDS_PER_HOUR == constants.JOULES_PER_WH == constants.COULOMBS_PER_AH == 3600.0


def test_constants_are_those_of_scipy_to_the_last_bit():
    assert constants.GAS_CONSTANT == scipy.constants.R
    assert constants.STEFAN_BOLTZMANN == scipy.constants.Stefan_Boltzmann
    assert constants.ZERO_CELSIUS == scipy.constants.zero_Celsius
    assert constants.STANDARD_GRAVITY == scipy.constants.g
    assert constants.SECONDS_PER_HOUR == scipy.constants.hour


def test_the_cell_laws_use_the_gas_constant():
    # Arrhenius with Ea = R: exp(1/T - 1/T_ref) exactly
    assert cell.arrhenius_factor(250.0, constants.GAS_CONSTANT, 300.0) == pytest.approx(
        math.exp(1 / 250 - 1 / 300), rel=1e-15)
