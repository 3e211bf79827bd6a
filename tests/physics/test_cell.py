"""Cell physics functions against closed forms and published check values."""

import numpy as np
import pytest
from scipy.optimize import brentq

from thermoelec.physics import cell, loads, tables

# Values: circuit theory, derived in the project's validation notes (§4), source U - I R0
U, R0 = 3.7, 0.05


def test_maximum_power_point():
    # maximum power transfer theorem: U^2/(4R) = 68.45 W at I = U/(2R) = 37 A
    assert loads.maximum_power(U, R0) == pytest.approx(68.45, rel=1e-12)
    i_mp = loads.current_for_power(U, R0, loads.maximum_power(U, R0))
    assert i_mp == pytest.approx(37.0, rel=1e-7)
    assert loads.power_deliverable_margin(U, R0, 68.45) == pytest.approx(0.0, abs=1e-12)
    assert loads.power_deliverable_margin(U, R0, 68.46) < 0


@pytest.mark.parametrize(("vmin", "power", "current"), [(2.5, 60.0, 24.0), (3.0, 42.0, 14.0)])
def test_voltage_limited_power(vmin, power, current):
    # Vmin (U - Vmin) / R0 (circuit theory): 60 W at 2.5 V (24 A), 42 W at 3.0 V (14 A)
    assert loads.voltage_limited_power(U, R0, vmin) == pytest.approx(power, rel=1e-12)
    assert loads.current_for_power(U, R0, power) == pytest.approx(current, rel=1e-9)


def test_constant_power_lower_root():
    # 20 W: I = 5.871235 A, V = 3.406438 V (lower root); cross-checked with scipy's brentq
    i = loads.current_for_power(U, R0, 20.0)
    assert i == pytest.approx(5.871235, abs=1e-6)
    assert U - i * R0 == pytest.approx(3.406438, abs=1e-6)
    root = brentq(lambda x: R0 * x * x - U * x + 20.0, 0.0, U / (2 * R0))
    assert i == pytest.approx(root, rel=1e-12)


def test_constant_power_regeneration_is_the_charging_root():
    # P < 0 (regeneration): the same formula gives the physical negative current
    i = loads.current_for_power(U, R0, -20.0)
    assert i < 0
    assert (U - i * R0) * i == pytest.approx(-20.0, rel=1e-12)


def test_constant_resistance():
    # 0.5 ohm load: I = 6.727273 A, V = 3.363636 V (circuit theory)
    i = loads.current_for_resistance(U, R0, 0.5)
    assert i == pytest.approx(6.727273, abs=1e-6)
    assert U - i * R0 == pytest.approx(3.363636, abs=1e-6)


def test_constant_voltage_current():
    assert loads.current_for_voltage(U, R0, 3.2) == pytest.approx(10.0, rel=1e-12)
    assert loads.current_for_voltage(U, R0, 4.2) == pytest.approx(-10.0, rel=1e-12)


def test_bernardi_heat():
    # Bernardi et al. 1985 check case: I = 5 A, U = 3.7, V = 3.55, T = 298.15 K, dU/dT = -0.1 mV/K
    # irreversible 0.75 W, reversible 0.149075 W, total 0.899075 W
    total = cell.bernardi_heat(5.0, 3.7, 3.55, 298.15, -1e-4)
    assert total == pytest.approx(0.899075, abs=1e-9)
    assert cell.bernardi_heat(5.0, 3.7, 3.55, 298.15, 0.0) == pytest.approx(0.75, abs=1e-12)


@pytest.mark.parametrize(
    ("ea_kj", "factors"),
    [(20, (4.196091, 2.092614, 0.602194)), (30, (8.595424, 3.027147, 0.467309)),
     (50, (36.06718, 6.334649, 0.281410))],
)
def test_arrhenius_factor_table(ea_kj, factors):
    # exp(Ea/Rg (1/T - 1/298.15)), Rg = 8.314462618 J/mol/K, at -20, 0, 45 degC (validation notes §4)
    temperatures = np.array([253.15, 273.15, 318.15])
    got = cell.arrhenius_factor(temperatures, ea_kj * 1e3, 298.15)
    np.testing.assert_allclose(got, factors, rtol=2e-6)


def test_interpolation_is_linear_and_clamped():
    grid = np.array([0.0, 0.5, 1.0])
    values = np.array([3.0, 3.6, 4.2])
    assert tables.interpolate_1d(grid, values, 0.25) == pytest.approx(np.interp(0.25, grid, values))
    assert tables.interpolate_1d(grid, values, -0.1) == 3.0
    assert tables.interpolate_1d(grid, values, 1.2) == 4.2


def test_bilinear_matches_scipy_regular_grid():
    from scipy.interpolate import RegularGridInterpolator

    soc = np.array([0.0, 0.3, 1.0])
    temps = np.array([253.15, 298.15, 318.15])
    table = np.array([[0.09, 0.08, 0.07], [0.02, 0.016, 0.014], [0.015, 0.012, 0.01]])
    reference = RegularGridInterpolator((temps, soc), table)
    for z, t in [(0.1, 260.0), (0.7, 300.0), (0.3, 298.15), (0.99, 317.0)]:
        got = tables.interpolate_2d(soc, temps, table.ravel(), z, t)
        assert got == pytest.approx(float(reference([t, z])[0]), rel=1e-12)
    # clamped beyond the grid
    assert tables.interpolate_2d(soc, temps, table.ravel(), 0.0, 200.0) == pytest.approx(0.09)


def test_rc_zero_order_hold_matches_closed_form():
    # v <- v e^(-dt/tau) + R I (1 - e^(-dt/tau)) (Plett 2015); compared with the
    # analytic solution of dv/dt = I/C - v/(RC)
    r, tau, i = 0.015, 30.0, 5.0
    v = cell.rc_zero_order_hold(0.0, r, tau, i, 10.0)
    assert v == pytest.approx(r * i * (1 - np.exp(-10.0 / tau)), rel=1e-14)


@pytest.mark.parametrize("n", [1, 2, 7, 32, 33, 500])
def test_kernel_tables_read_in_place_match_numpy_interp(n):
    # the kernels' in-place reads (a scan on short grids, bisection on long ones) against numpy.interp,
    # which also holds the end values beyond the grid
    rng = np.random.default_rng(n)
    grid = np.cumsum(rng.uniform(0.1, 2.0, n))
    values = rng.normal(size=n)
    p = np.concatenate([[9.0, 9.0], grid, values, [9.0]])
    for x in np.concatenate([rng.uniform(grid[0] - 1.0, grid[-1] + 1.0, 200), grid]):
        assert tables.interpolate_1d_at(p, 2, p, 2 + n, n, x) == pytest.approx(np.interp(x, grid, values),
                                                                  abs=1e-12)
