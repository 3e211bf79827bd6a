"""Pulse capability against closed forms, the limits that bind it, and the CVODE reference.

Sources: circuit theory for a source behind a resistance (voltage-limited current
``(U - V_min)/R0``, power ``V_min (U - V_min)/R0``, the maximum-power point ``U²/(4R0)`` by
the maximum power transfer theorem), the Thevenin step response of one RC pair
(``v1(t) = R1 I (1 - e^(-t/tau))``), the lumped capacitance of an adiabatic cell
(``dT/dt = I² R0 / C``, Incropera ch. 5); the check values of VALIDATION.md section 7
(35 A, 105 W, 171.125 W; 29.24625 A and 87.73875 W for a 10 s pulse with R1 = 10 mohm,
tau = 20 s). The tolerances: the capability is solved to 1e-10 relative on the demand,
and the events that decide it are located to 1e-9 of their scale (1 V: 5e-8 A at 20 mohm)
and 1e-7 s, so 1e-6 relative is met with a wide margin.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from thermoelec.analysis.capability import CapabilityGrid, capability, default_grid, solo_pulse_margin
from thermoelec.engine.options import SolverOptions
from thermoelec.scenario import scenario_from_dict

from ..helpers import cell_section, scenario

U, R0, R1, TAU = 3.7, 0.020, 0.010, 20.0
T25 = 298.15
OPTIONS = SolverOptions(rtol=1e-8)


def _problem(**cell_changes):
    """One cell: flat OCV 3.7 V, R0 20 mohm, voltage window 3.0..4.2 V (changes given), at SoC 0.5."""
    cell = cell_section(**{"voltage_min": "3.0 V", "voltage_max": "4.2 V", **cell_changes})
    return scenario_from_dict(scenario(cell=cell)).problem()


def _single(problem, durations=(10.0,), temperature=T25, soc=0.5, kinds=None):
    grid = CapabilityGrid(np.asarray(durations, float), np.array([temperature]), np.array([soc]))
    return capability(problem, grid, OPTIONS, kinds=kinds)


def test_no_rc_pair_gives_the_voltage_limited_current_and_power():
    # circuit theory (VALIDATION.md section 7): 35 A and 105 W, whatever the duration (nothing in the circuit moves)
    result = _single(_problem(), durations=(2.0, 10.0, 30.0))
    np.testing.assert_allclose(result.values["discharge_current"].ravel(), (U - 3.0) / R0, rtol=1e-6)
    np.testing.assert_allclose(result.values["discharge_power"].ravel(), 3.0 * (U - 3.0) / R0, rtol=1e-6)
    assert set(result.binding["discharge_current"].ravel()) == {"voltage_min"}
    # the charge side by the same law: (V_max - U)/R0 and V_max (V_max - U)/R0
    np.testing.assert_allclose(result.values["charge_current"].ravel(), (4.2 - U) / R0, rtol=1e-6)
    np.testing.assert_allclose(result.values["charge_power"].ravel(), 4.2 * (4.2 - U) / R0, rtol=1e-6)
    assert set(result.binding["charge_power"].ravel()) == {"voltage_max"}


def test_below_half_the_ocv_the_maximum_power_point_binds():
    # V_min = 1.0 V < U/2: the power is the maximum power transfer's U^2/(4 R0) = 171.125 W (VALIDATION.md 7),
    # while a current pulse still runs to the voltage limit, (U - 1.0)/R0 = 135 A
    result = _single(_problem(voltage_min="1.0 V"), durations=(2.0,))
    assert result.values["discharge_power"][0, 0, 0] == pytest.approx(U**2 / (4 * R0), rel=1e-6)
    assert result.binding["discharge_power"][0, 0, 0] == "power_limit"
    assert result.values["discharge_current"][0, 0, 0] == pytest.approx((U - 1.0) / R0, rel=1e-6)


def test_one_rc_pair_follows_the_thevenin_step_response():
    # I = (U - V_min) / (R0 + R1 (1 - e^(-t/tau))): 29.24625 A for 10 s; the power at the pulse's end
    # V_min I = 87.73875 W (VALIDATION.md section 7)
    problem = _problem(rc=[{"resistance": "10 mohm", "time_constant": "20 s"}])
    durations = np.array([2.0, 10.0, 30.0])
    result = _single(problem, durations=durations)
    expected = (U - 3.0) / (R0 + R1 * (1.0 - np.exp(-durations / TAU)))
    np.testing.assert_allclose(result.values["discharge_current"].ravel(), expected, rtol=1e-6)
    assert result.values["discharge_current"][1, 0, 0] == pytest.approx(29.24625, rel=1e-6)
    assert result.end_power["discharge_current"][1, 0, 0] == pytest.approx(87.73875, rel=1e-6)
    # longer pulses give less: the RC pair charges
    assert np.all(np.diff(result.values["discharge_current"].ravel()) < 0)


def test_the_batched_capability_is_the_root_of_the_cvode_pulse_margin():
    # the reference of the benchmark: brentq on the same margin over solo CVODE runs, on a 2-D R0 table with heat
    problem = scenario_from_dict(scenario(
        cell=cell_section(capacity="5 Ah", voltage_min="2.8 V", voltage_max="4.2 V",
                          ocv={"soc": [0.0, 0.5, 1.0], "voltage": [3.2, 3.7, 4.1]},
                          r0={"soc": [0, 1], "temperature": ["0 degC", "40 degC"], "values": [[0.04, 0.03],
                                                                                               [0.02, 0.015]]},
                          rc=[{"resistance": "12 mohm", "time_constant": "15 s"}]))).problem()
    result = _single(problem, durations=(10.0,), temperature=283.15, soc=0.6)
    solo = SolverOptions(rtol=1e-10)
    for kind in ("discharge_current", "charge_power"):
        found = result.values[kind][0, 0, 0]
        reference = brentq(lambda x, k=kind: solo_pulse_margin(problem, k, 10.0, 283.15, 0.6, x, solo)[0],
                           0.5 * found, 1.5 * found, xtol=1e-12, rtol=1e-12)
        assert found == pytest.approx(reference, rel=1e-6), kind
        assert solo_pulse_margin(problem, kind, 10.0, 283.15, 0.6, 1.01 * found, solo)[1] == \
            result.binding[kind][0, 0, 0]


def test_a_current_limit_binds_where_it_is_below_the_voltage_limit():
    # discharge_current_max 20 A below the voltage-limited 35 A: 20 A, and the power at 20 A, V I = (U - 20 R0) 20
    data = scenario(cell=cell_section(voltage_min="3.0 V", voltage_max="4.2 V"),
                    limits={"discharge_current_max": "20 A"})
    result = _single(scenario_from_dict(data).problem())
    assert result.values["discharge_current"][0, 0, 0] == pytest.approx(20.0, rel=1e-6)
    assert result.binding["discharge_current"][0, 0, 0] == "discharge_current_max"
    assert result.values["discharge_power"][0, 0, 0] == pytest.approx((U - 20 * R0) * 20, rel=1e-6)
    assert result.binding["discharge_power"][0, 0, 0] == "discharge_current_max"
    assert result.binding["charge_current"][0, 0, 0] == "voltage_max"  # a discharge limit binds no charge


def test_self_heating_makes_the_temperature_limit_bind():
    # an adiabatic cell (no path to the sink or the air) heats at I^2 R0 / C (flat OCV, no entropic heat): 1 K of
    # room below cell_temperature_max lasts a 30 s pulse at I = sqrt(1 K * C / (R0 * 30 s)), C = 0.07 kg * 900 J/kg/K
    data = scenario(cell=cell_section(voltage_min="3.0 V", voltage_max="4.2 V"),
                    thermal={"ambient_temperature": "59 degC", "sink_heat_capacity": "200 J/K",
                             "cell_to_sink": "0 W/K", "sink_to_ambient": "0.5 W/K"})
    result = _single(scenario_from_dict(data).problem(), durations=(30.0,), temperature=273.15 + 59.0,
                     kinds=("discharge_current",))
    expected = math.sqrt(1.0 * 0.07 * 900.0 / (R0 * 30.0))
    assert result.values["discharge_current"][0, 0, 0] == pytest.approx(expected, rel=1e-6)
    assert result.binding["discharge_current"][0, 0, 0] == "temperature_max"


def test_charge_at_zero_degrees_is_bounded_by_the_charge_temperature_and_voltage_limits():
    # charge_temperature_min 0 degC (the default): none below it; at 0 degC the voltage limit, (V_max - U)/R0 = 25 A;
    # with a charge current limit over temperature (0.5 C at 0 degC of a 1000 Ah cell: 500 A) the table reads past it,
    # while at 0.01 C (10 A) the table binds
    grid = CapabilityGrid(np.array([10.0]), np.array([268.15, 273.15, 298.15]), np.array([0.5]))
    plain = capability(_problem(), grid, OPTIONS, kinds=("charge_current",))
    assert plain.values["charge_current"][0, 0, 0] == 0.0
    assert plain.binding["charge_current"][0, 0, 0] == "charge_temperature_min"
    assert plain.values["charge_current"][0, 1, 0] == pytest.approx((4.2 - U) / R0, rel=1e-6)
    assert plain.binding["charge_current"][0, 1, 0] == "voltage_max"
    data = scenario(cell=cell_section(voltage_min="3.0 V", voltage_max="4.2 V"),
                    limits={"charge_c_rate_max": {"temperature": ["0 degC", "25 degC"], "values": [0.01, 1.0]}})
    limited = capability(scenario_from_dict(data).problem(), grid, OPTIONS, kinds=("charge_current",))
    assert limited.values["charge_current"][0, 1, 0] == pytest.approx(10.0, rel=1e-6)
    assert limited.binding["charge_current"][0, 1, 0] == "charge_current_max"
    assert limited.binding["charge_current"][0, 2, 0] == "voltage_max"  # 1 C = 1000 A: the voltage binds at 25 degC


def test_no_capability_where_a_pulse_fails_at_once():
    # below discharge_temperature_min, and with an empty cell (SoC 0): nothing, and the limit named
    data = scenario(cell=cell_section(voltage_min="3.0 V", voltage_max="4.2 V"),
                    limits={"discharge_temperature_min": "-10 degC"})
    grid = CapabilityGrid(np.array([2.0]), np.array([253.15, 298.15]), np.array([0.0, 0.5]))
    result = capability(scenario_from_dict(data).problem(), grid, OPTIONS, kinds=("discharge_power",))
    values, binding = result.values["discharge_power"][0], result.binding["discharge_power"][0]
    assert values[0, 1] == 0.0 and binding[0, 1] == "discharge_temperature_min"
    assert values[1, 0] == 0.0 and binding[1, 0] == "soc_limit"
    assert values[1, 1] == pytest.approx(105.0, rel=1e-6)


def test_a_resolved_pack_of_identical_cells_has_the_lumped_capability():
    # the resolved kernel computes the lumped equations term by term (tests/engine/test_resolved_pack.py)
    cell = cell_section(voltage_min="3.0 V", voltage_max="4.2 V",
                        rc=[{"resistance": "10 mohm", "time_constant": "20 s"}])
    lumped = scenario(cell=cell, pack={"series": 2, "parallel": 2})
    resolved = scenario(cell=cell, pack={"series": 2, "parallel": 2, "model": "resolved"})
    a = _single(scenario_from_dict(lumped).problem())
    b = _single(scenario_from_dict(resolved).problem())
    for kind in a.values:
        assert b.values[kind][0, 0, 0] == pytest.approx(a.values[kind][0, 0, 0], rel=1e-6), kind
        assert b.binding[kind][0, 0, 0] == a.binding[kind][0, 0, 0]
    # 2 in parallel carry twice the cell's 29.24625 A
    assert a.values["discharge_current"][0, 0, 0] == pytest.approx(2 * 29.24625, rel=1e-6)


def test_the_default_grid_comes_from_the_cell_tables():
    problem = scenario_from_dict(scenario(cell=cell_section(
        ocv={"soc": [0.0, 0.2, 0.5, 1.0], "voltage": [3.2, 3.5, 3.7, 4.1]},
        r0={"soc": [0, 1], "temperature": ["-10 degC", "25 degC"], "values": [[0.04, 0.03], [0.02, 0.015]]}))).problem()
    grid = default_grid(problem)
    np.testing.assert_array_equal(grid.durations, [2.0, 10.0, 30.0])
    np.testing.assert_array_equal(grid.socs, [0.0, 0.2, 0.5, 1.0])
    np.testing.assert_allclose(grid.temperatures, [263.15, 298.15])


def test_the_dataset_and_the_tidy_table_carry_every_entry_with_units(tmp_path):
    result = capability(_problem(), CapabilityGrid(np.array([2.0, 10.0]), np.array([273.15, 298.15]),
                                                   np.array([0.2, 0.8])), OPTIONS)
    ds = result.to_dataset()
    assert ds["discharge_power_W"].dims == ("duration", "temperature", "soc")
    assert ds["discharge_power_W"].attrs["units"] == "W" and ds["temperature"].attrs["units"] == "degC"
    table = result.table()
    assert len(table) == 8 and {"discharge_current_A", "charge_power_limit"} <= set(table.columns)
    written = result.write(tmp_path)
    assert [p.name for p in written] == ["capability.csv", "capability.nc"]
