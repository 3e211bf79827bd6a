"""Warnings (each triggered once and not triggered once) and the stress indicators.

Sources: the Biot number and its 0.1 limit, Incropera et al., Fundamentals of Heat
and Mass Transfer, 6th ed., Eqs. 5.10-5.11; plausibility ranges, the project's
validation notes §5 (common practice, from memory); the Arrhenius equivalent time
at constant temperature and the time above a threshold of a linear ramp are
closed forms derived here.
"""

import math

import numpy as np
import pytest

from thermoelec.analysis import diagnostics

from ..helpers import cell_section, scenario, simulate

GAS_CONSTANT = 8.314462618


def warnings_with(text: str, result) -> list[str]:
    return [w for w in result.warnings if text in w]


def two_d_r0() -> dict:
    return {"soc": [0.0, 1.0], "temperature": ["-10 degC", "45 degC"],
            "values": [[0.05, 0.05], [0.02, 0.02]]}


@pytest.mark.parametrize("ambient, expected", [("-25 degC", 1), ("25 degC", 0)])
def test_temperature_outside_resistance_table(ambient, expected):
    data = scenario(cell=cell_section(r0=two_d_r0()),
                    thermal={"ambient_temperature": ambient, "sink_heat_capacity": "200 J/K",
                             "cell_to_sink": "0.5 W/K", "sink_to_ambient": "0.5 W/K"})
    found = warnings_with("outside the cell.r0 table's temperature range", simulate(data))
    assert len(found) == expected
    if expected:
        assert "clamped" in found[0] and "-10.0..45.0 degC" in found[0]


@pytest.mark.parametrize("initial_soc, expected", [(0.25, 1), (0.9, 0)])
def test_soc_outside_rc_table(initial_soc, expected):
    # 1 Ah cell, 1 A for 5 min: SoC falls by 0.083; the RC table starts at SoC 0.2
    cell = cell_section(capacity="1 Ah", initial_soc=initial_soc,
                        rc=[{"resistance": {"soc": [0.2, 1.0], "values": [0.01, 0.01]}, "time_constant": "20 s"}])
    data = scenario(cell=cell, segments=[{"mode": "current", "value": "1 A", "duration": "300 s"}])
    assert len(warnings_with("outside the cell.rc[1].resistance table's SoC range", simulate(data))) == expected


def cylinder_biot(h: float, diameter: float, length: float, k: float) -> float:
    r = diameter / 2
    characteristic = r * length / (2 * (length + r))  # V/A of a closed cylinder, ends included
    return h * characteristic / k


@pytest.mark.parametrize("cell_to_sink, expected", [("0.5 W/K", 1), ("0.02 W/K", 0)])
def test_biot_number_of_a_cylindrical_cell(cell_to_sink, expected):
    cell = cell_section(diameter="21 mm", length="70 mm", thermal_conductivity="0.3 W/m/K")
    thermal = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": cell_to_sink,
               "sink_to_ambient": "0.5 W/K"}
    result = simulate(scenario(cell=cell, thermal=thermal))
    area = math.pi * 0.021 * 0.070 + math.pi * 0.021**2 / 2
    h = float(cell_to_sink.split()[0]) / area
    assert result.summary["biot_number"] == pytest.approx(cylinder_biot(h, 0.021, 0.070, 0.3), rel=1e-12)
    assert len(warnings_with("Biot number", result)) == expected


def test_biot_number_of_a_prismatic_cell_and_without_geometry():
    cell = cell_section(thickness="10 mm", width="100 mm", height="200 mm", thermal_conductivity="1 W/m/K")
    thermal = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "10 W/K",
               "sink_to_ambient": "0.5 W/K"}
    result = simulate(scenario(cell=cell, thermal=thermal))
    area = 2 * (0.1 * 0.2 + 0.01 * 0.1 + 0.01 * 0.2)
    volume = 0.01 * 0.1 * 0.2
    assert result.summary["biot_number"] == pytest.approx(10 / area * volume / area / 1.0, rel=1e-12)
    assert warnings_with("Biot number", result)
    assert simulate(scenario()).summary["biot_number"] is None


@pytest.mark.parametrize("changes, key", [
    ({"specific_heat": "400 J/kg/K"}, "cell.specific_heat"),
    ({"r0": {"value": "20 mohm", "activation_energy": "90 kJ/mol"}}, "cell.r0.activation_energy"),
    ({"rc": [{"resistance": "10 mohm", "time_constant": "20 s", "activation_energy": "5 kJ/mol"}]},
     "cell.rc[1].activation_energy"),
    ({"ocv": {"soc": [0, 1], "voltage": [3.7, 3.7], "entropic": [0.0, 2e-3]}}, "cell.ocv.entropic"),
    ({"diameter": "21 mm", "length": "70 mm", "thermal_conductivity": "200 W/m/K"}, "cell.thermal_conductivity"),
])
def test_implausible_parameters_are_named(changes, key):
    result = simulate(scenario(cell=cell_section(**changes)))
    found = warnings_with("plausible range", result)
    assert len(found) == 1 and key in found[0]


def test_plausible_parameters_give_no_warning():
    cell = cell_section(r0={"value": "20 mohm", "activation_energy": "30 kJ/mol"},
                        ocv={"soc": [0, 1], "voltage": [3.7, 3.7], "entropic": [-2e-4, 1e-4]},
                        diameter="21 mm", length="70 mm", thermal_conductivity="0.5 W/m/K")
    thermal = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "0.02 W/K",
               "sink_to_ambient": "0.5 W/K"}
    result = simulate(scenario(cell=cell, thermal=thermal))
    assert result.warnings == []


@pytest.mark.parametrize("interval, expected", [("10 s", 1), ("1 s", 0)])
def test_output_interval_longer_than_rc_time_constant(interval, expected):
    cell = cell_section(rc=[{"resistance": "10 mohm", "time_constant": "4 s"}])
    result = simulate(scenario(cell=cell, solver={"rtol": 1e-8, "output_interval": interval}))
    assert len(warnings_with("shortest RC time constant", result)) == expected


def test_time_above_a_linear_ramp():
    # T rises linearly 0 -> 10 over 0..100 s: above 7.5 for the last 25 s, exactly
    times = np.array([0.0, 40.0, 100.0])
    values = np.array([0.0, 4.0, 10.0])
    assert diagnostics.time_above(times, values, 7.5) == pytest.approx(25.0, rel=1e-12)
    assert diagnostics.time_above(times, values, 11.0) == 0.0
    assert diagnostics.time_above(times, -values, -2.0) == pytest.approx(20.0, rel=1e-12)  # below 2


def test_isothermal_stress_indicators():
    # 1 Ah cell at 1 A (1C) for 10 min, held at 45 degC by a huge conductance:
    # t_eq = t exp(-Ea/R (1/T - 1/T_ref)), closed form at constant T
    cell = cell_section(capacity="1 Ah", initial_soc=0.9)
    thermal = {"ambient_temperature": "45 degC", "sink_heat_capacity": "1e9 J/K", "cell_to_sink": "1e6 W/K",
               "sink_to_ambient": "1e9 W/K"}
    data = scenario(cell=cell, thermal=thermal, segments=[{"mode": "current", "value": "1 A", "duration": "600 s"},
                                                          {"mode": "current", "value": "-2 A", "duration": "60 s"}],
                    stress={"activation_energy": "50 kJ/mol", "hot_temperature": "40 degC"})
    s = simulate(data).summary
    expected = 660 * math.exp(-50e3 / GAS_CONSTANT * (1 / 318.15 - 1 / 298.15))
    assert s["equivalent_time_at_reference_s"] == pytest.approx(expected, rel=1e-6)
    assert s["ageing_acceleration_factor"] == pytest.approx(expected / 660, rel=1e-6)
    assert s["time_above_hot_temperature_s"] == pytest.approx(660, rel=1e-9)
    assert s["time_above_temperature_limit_s"] == 0.0
    assert s["c_rate_discharge_max"] == pytest.approx(1.0, rel=1e-12)
    assert s["c_rate_charge_max"] == pytest.approx(2.0, rel=1e-12)
    assert s["time_charging_below_10degC_s"] == 0.0


def test_cold_charging_time_counts_only_charging():
    # 25 min rest at -5 degC ambient, then 2 min of charge: only the charge counts
    cell = cell_section(capacity="1 Ah", initial_soc=0.5)
    thermal = {"ambient_temperature": "-5 degC", "sink_heat_capacity": "1e9 J/K", "cell_to_sink": "1e6 W/K",
               "sink_to_ambient": "1e9 W/K"}
    data = scenario(cell=cell, thermal=thermal, segments=[{"mode": "rest", "duration": "1500 s"},
                                                          {"mode": "current", "value": "-0.5 A", "duration": "120 s"}])
    s = simulate(data).summary
    assert s["time_charging_below_0degC_s"] == pytest.approx(120, rel=1e-9)
    assert s["time_charging_below_10degC_s"] == pytest.approx(120, rel=1e-9)
    assert s["time_charging_below_limit_s"] == pytest.approx(120, rel=1e-9)


def cccv_without_duration(cutoff: str) -> dict:
    # flat OCV 3.7 V, R0 20 mohm: at 3.8 V the CV current holds at 5 A, above a 1 A cutoff, so
    # only the cap (ten full charges at the 1000 A CC rate: 10 x 1000 Ah / 1000 A = 10 h) ends it
    return scenario(cell=cell_section(initial_soc=0.2), segments=[
        {"mode": "cccv", "current": "-1000 A", "voltage": "3.8 V", "cutoff_current": cutoff}],
        solver={"rtol": 1e-6})


@pytest.mark.parametrize("cutoff, expected", [("1 A", 1), ("6 A", 0)])
def test_cccv_duration_cap_warning(cutoff, expected):
    result = simulate(cccv_without_duration(cutoff))
    found = warnings_with("reached its duration cap", result)
    assert len(found) == expected
    if expected:
        assert result.summary["duration_s"] == pytest.approx(36_000, rel=1e-9)


@pytest.mark.parametrize("max_steps, expected", [(1, 1), (50_000, 0)])
def test_solver_failure_warning(max_steps, expected):
    import thermoelec

    data = scenario(cell=cell_section(rc=[{"resistance": "10 mohm", "time_constant": "20 s"}]),
                    segments=[{"mode": "current", "value": "5 A", "duration": "600 s"}],
                    solver={"rtol": 1e-8, "max_steps": max_steps})
    result = thermoelec.simulate(data)
    assert (result.status == "failed") == bool(expected)
    assert len(warnings_with("solver failure", result)) == expected
