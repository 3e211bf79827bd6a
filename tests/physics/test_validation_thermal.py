"""Thermal network through the whole engine against closed-form solutions.

Sources: Incropera, DeWitt, Bergman, Lavine, Fundamentals of Heat and Mass
Transfer, §5.3 (lumped capacitance with generation; equation number from
memory) and the two-node linear network solved by linear ODE theory; both
tabulated in the project's validation notes, cross-checked there against
scipy.linalg.expm and solve_ivp.
"""

import numpy as np
import pytest
from scipy.linalg import expm

from ..helpers import cell_section, scenario, simulate, value_at

H, AREA = 10.0, 5.310856e-3  # W/m^2/K; cylinder 21 x 70 mm with end caps [m^2]


def lumped_case(initial_degc: float) -> dict:
    # Q = I^2 R0 = 1 A^2 x 0.5 ohm = 0.5 W; C = 0.070 kg x 900 J/kg/K = 63 J/K; G = hA
    cell = cell_section(r0={"value": "0.5 ohm"}, mass="0.070 kg", specific_heat="900 J/kg/K")
    thermal = {"ambient_temperature": "25 degC", "initial_cell_temperature": f"{initial_degc} degC",
               "sink_heat_capacity": "100 J/K", "cell_to_sink": 0.0, "sink_to_ambient": 0.0,
               "cell_to_ambient": f"{H * AREA} W/K"}
    return scenario(cell=cell, thermal=thermal,
                    segments=[{"mode": "current", "value": "1 A", "duration": "7200 s"}])


@pytest.mark.parametrize(
    ("initial", "expected"),
    [(25.0, {600: 28.73739, 1800: 32.35018, 3600: 33.96196, 7200: 34.39290}),
     (40.0, {600: 37.78276, 1800: 35.63944, 3600: 34.68324})],
)
def test_lumped_capacitance_with_generation(initial, expected):
    # T(t) = Tinf + Q/(hA) + (Ti - Tinf - Q/(hA)) exp(-t/tau), tau = 1186.25 s (Incropera §5.3)
    result = simulate(lumped_case(initial))
    # The table has 5 decimals; its Ti = 40 degC row sits 1.0e-5 to 1.1e-5 K below the formula
    # evaluated in double precision (34.683251 vs 34.68324 at 3600 s), hence 2e-5 K; the
    # formula itself is checked to 2e-6 K below.
    for t, temperature in expected.items():
        assert value_at(result, "cell_temperature_degC", t) == pytest.approx(temperature, abs=2e-5)


def test_lumped_capacitance_matches_the_formula_everywhere():
    result = simulate(lumped_case(25.0))
    g, q, c = H * AREA, 0.5, 63.0
    t = result.series["time_s"]
    exact = 25.0 + q / g * (1 - np.exp(-t * g / c))
    np.testing.assert_allclose(result.series["cell_temperature_degC"], exact, atol=2e-6)


TWO_NODE = {
    10: (25.275830, 25.003431), 60: (26.408083, 25.101778), 300: (29.159447, 26.171034),
    600: (30.743411, 27.288239), 1800: (32.711173, 28.780397), 3600: (32.986746, 28.989922),
    7200: (32.999972, 28.999979),
}


def two_node_case() -> dict:
    # C1 = 70 J/K, C2 = 200 J/K, R12 = R2a = 2 K/W, Q = 2 A^2 x 0.5 ohm = 2 W, both start at 25 degC
    cell = cell_section(r0={"value": "0.5 ohm"}, mass="0.070 kg", specific_heat="1000 J/kg/K")
    thermal = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K",
               "cell_to_sink": "0.5 W/K", "sink_to_ambient": "0.5 W/K"}
    return scenario(cell=cell, thermal=thermal,
                    segments=[{"mode": "current", "value": "2 A", "duration": "7200 s"}])


def test_two_node_network_table():
    # eigenvalues -1.7119444e-3 and -1.0430913e-2 1/s; steady 33 / 29 degC (validation notes §2)
    result = simulate(two_node_case())
    for t, (t1, t2) in TWO_NODE.items():
        assert value_at(result, "cell_temperature_degC", t) == pytest.approx(t1, abs=2e-6)
        assert value_at(result, "sink_temperature_degC", t) == pytest.approx(t2, abs=2e-6)


def test_two_node_network_matches_matrix_exponential():
    # x' = A x + b solved exactly with scipy.linalg.expm of the augmented matrix
    c1, c2, g12, g2a, q = 70.0, 200.0, 0.5, 0.5, 2.0
    a = np.array([[-g12 / c1, g12 / c1, q / c1], [g12 / c2, -(g12 + g2a) / c2, 0.0], [0.0, 0.0, 0.0]])
    result = simulate(two_node_case())
    for t in (5.0, 123.0, 999.0, 4321.0):
        exact = expm(a * t) @ np.array([0.0, 0.0, 1.0])
        assert value_at(result, "cell_temperature_degC", t) - 25.0 == pytest.approx(exact[0], abs=2e-6)
        assert value_at(result, "sink_temperature_degC", t) - 25.0 == pytest.approx(exact[1], abs=2e-6)


def test_convection_section_gives_h_times_area():
    # Newton's law of cooling, G = h A (Incropera Eq. 1.3a): same answer as the conductance form
    base = two_node_case()
    conv = two_node_case()
    del conv["thermal"]["sink_to_ambient"]
    conv["thermal"]["convection"] = {"coefficient": "20 W/m^2/K", "area": "0.025 m^2"}
    a, b = simulate(base), simulate(conv)
    np.testing.assert_allclose(a.series["sink_temperature_degC"], b.series["sink_temperature_degC"], atol=1e-9)
