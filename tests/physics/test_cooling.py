"""Cooling options: correlations, radiation, coolant loop, thermostats, ambient profiles, soak.

Sources:
- the radiation coefficient of the project's validation notes §3 (Incropera Eq. 1.9);
- the general-purpose library ``ht`` (Caleb Bell, PyPI) for the Nusselt number
  of the independent cooling solution, called by its named function;
- ``scipy.integrate.solve_ivp`` on the same nonlinear equations written here;
- lumped-capacitance closed forms (Incropera et al., 6th ed., §5.3) derived here.
"""

import math

import ht
import numpy as np
import pytest
from scipy.constants import Stefan_Boltzmann
from scipy.integrate import solve_ivp

from thermoelec.physics import correlations, thermal
from thermoelec.physics.constants import STANDARD_GRAVITY, ZERO_CELSIUS

from ..helpers import cell_section, scenario, simulate

# ---------------------------------------------------------------------------
# Radiation (the correlations are in test_correlations.py)
# ---------------------------------------------------------------------------

def test_radiation_coefficient_worked_value():
    # validation notes §3: h_rad = eps sigma (Ts + Tsur)(Ts^2 + Tsur^2) = 5.5177 W/m^2/K at 0.9, 310/290 K
    q = thermal.radiation_heat(0.9, 1.0, 310.0, 290.0)
    assert q / 20.0 == pytest.approx(5.5177, rel=1e-4)
    assert q == pytest.approx(0.9 * Stefan_Boltzmann * (310.0**4 - 290.0**4), rel=1e-14)


# ---------------------------------------------------------------------------
# Through the engine
# ---------------------------------------------------------------------------

def hot_pack_cooling(**thermal_changes) -> dict:
    th = {"ambient_temperature": "20 degC", "initial_cell_temperature": "60 degC",
          "initial_sink_temperature": "55 degC", "sink_heat_capacity": "300 J/K", "cell_to_sink": "2 W/K",
          "convection": {"natural": "vertical_plate", "length": "0.15 m", "area": "0.05 m^2"},
          "radiation": {"emissivity": 0.85, "area": "0.05 m^2"}}
    th.update(thermal_changes)
    return scenario(thermal=th, segments=[{"mode": "rest", "duration": "2 h"}],
                    solver={"rtol": 1e-9, "output_interval": "60 s"})


def test_cooling_down_matches_an_independent_nonlinear_solution():
    result = simulate(hot_pack_cooling())
    c_cell = 0.070 * 900.0
    ta = 293.15

    def h_natural(ts):
        # Churchill-Chu vertical plate from ht, Table A.4 air by linear interpolation at the film temperature
        film = 0.5 * (ts + ta)
        nu = np.interp(film, correlations.AIR_TEMPERATURE, correlations.AIR_KINEMATIC_VISCOSITY)
        k = np.interp(film, correlations.AIR_TEMPERATURE, correlations.AIR_CONDUCTIVITY)
        pr = np.interp(film, correlations.AIR_TEMPERATURE, correlations.AIR_PRANDTL)
        gr = STANDARD_GRAVITY / film * abs(ts - ta) * 0.15**3 / nu**2
        return ht.Nu_vertical_plate_Churchill(pr, gr) * k / 0.15

    def rates(t, y):
        tc, ts = y
        q_cs = 2.0 * (tc - ts)
        q_out = h_natural(ts) * 0.05 * (ts - ta) + 0.85 * Stefan_Boltzmann * 0.05 * (ts**4 - ta**4)
        return [-q_cs / c_cell, (q_cs - q_out) / 300.0]

    times = result.series["time_s"]
    ref = solve_ivp(rates, (0, times[-1]), [333.15, 328.15], method="DOP853", rtol=1e-12, atol=1e-12,
                    t_eval=times)
    np.testing.assert_allclose(result.series["cell_temperature_degC"] + ZERO_CELSIUS, ref.y[0], atol=1e-3)
    np.testing.assert_allclose(result.series["sink_temperature_degC"] + ZERO_CELSIUS, ref.y[1], atol=1e-3)
    assert result.summary["heat_radiated_Wh"] > 0


def heat_balance_error(summary: dict) -> float:
    generated = summary["heat_generated_Wh"] + summary["heater_energy_Wh"]
    removed = summary["heat_stored_Wh"] + summary["heat_to_ambient_Wh"] + summary["heat_to_coolant_Wh"]
    return abs(generated - removed) / max(abs(generated), 1e-12)


@pytest.mark.parametrize("coolant", [
    {"inlet_temperature": "18 degC", "flow_rate": "0.01 kg/s", "specific_heat": "3500 J/kg/K",
     "plate_conductance": "15 W/K", "heat_capacity": "200 J/K"},
    {"inlet_temperature": "18 degC", "flow_rate": "0.01 kg/s", "plate_conductance": "15 W/K"},
    {"inlet_temperature": "18 degC", "conductance": "8 W/K"},
])
def test_coolant_loop_heat_balance_closes(coolant):
    th = {"ambient_temperature": "30 degC", "sink_heat_capacity": "300 J/K", "cell_to_sink": "3 W/K",
          "sink_to_ambient": "0.3 W/K", "coolant": coolant}
    data = scenario(cell=cell_section(capacity="5 Ah", initial_soc=0.9, r0={"value": "40 mohm"}), thermal=th,
                    segments=[{"mode": "current", "value": "15 A", "duration": "15 min"},
                              {"mode": "rest", "duration": "15 min"}])
    s = simulate(data).summary
    assert s["heat_to_coolant_Wh"] > 0.3 * s["heat_generated_Wh"]
    assert heat_balance_error(s) < 1e-4


def test_coolant_effectiveness_closed_form():
    # massless channel: q = (1 - exp(-UA / mdot cp)) mdot cp (Ts - Tin), Ts held by a huge sink
    th = {"ambient_temperature": "25 degC", "initial_sink_temperature": "40 degC", "sink_heat_capacity": "1e12 J/K",
          "cell_to_sink": "0 W/K", "sink_to_ambient": "0 W/K",
          "coolant": {"inlet_temperature": "20 degC", "flow_rate": "0.02 kg/s", "specific_heat": "4000 J/kg/K",
                      "plate_conductance": "50 W/K"}}
    result = simulate(scenario(thermal=th, segments=[{"mode": "rest", "duration": "10 s"}]))
    rate = 0.02 * 4000
    expected = (1 - math.exp(-50 / rate)) * rate * 20.0
    assert result.series["heat_to_coolant_W"][0] == pytest.approx(expected, rel=1e-9)
    outlet = 20.0 + (1 - math.exp(-50 / rate)) * 20.0
    assert result.series["coolant_temperature_degC"][0] == pytest.approx(outlet, rel=1e-9)


def fan_case() -> dict:
    # a 1 Ah cell at 4C heats up; the fan adds 1.5 W/K above 32 degC and stops below 29 degC
    cell = cell_section(capacity="1 Ah", initial_soc=1.0, ocv={"soc": [0, 1], "voltage": [3.3, 4.1]},
                        r0={"value": "80 mohm"})
    th = {"ambient_temperature": "25 degC", "sink_heat_capacity": "40 J/K", "cell_to_sink": "1 W/K",
          "sink_to_ambient": "0.05 W/K", "fan": {"on_above": "32 degC", "off_below": "29 degC",
                                                  "conductance": "1.5 W/K"}}
    segments = [{"mode": "current", "value": "4 A", "duration": "12 min"}, {"mode": "rest", "duration": "30 min"}]
    return scenario(cell=cell, thermal=th, segments=segments, solver={"rtol": 1e-9})


def test_fan_switches_exactly_at_its_thresholds_without_chattering():
    result = simulate(fan_case())
    s = result.series
    switches = [e for e in result.events if e["event"] == "fan_switch"]
    assert [e["state"] for e in switches] == ["on", "off"]  # once on, once off: no chattering
    for event, threshold in zip(switches, (32.0, 29.0), strict=True):
        rows = np.flatnonzero(np.isclose(s["time_s"], event["time_s"], rtol=0, atol=1e-9))
        assert s["cell_temperature_degC"][rows] == pytest.approx(threshold, abs=1e-6)
    on, off = switches[0]["time_s"], switches[1]["time_s"]
    g = s["sink_to_air_conductance_W_per_K"]
    t = s["time_s"]
    assert np.all(g[(t > on + 1e-6) & (t < off - 1e-6)] == pytest.approx(1.55))
    assert np.all(g[(t < on - 1e-6) | (t > off + 1e-6)] == pytest.approx(0.05))
    # between the thresholds the cell goes above 29 degC with the fan still off before it starts
    assert result.summary["thermostat_switches"] == 2


def test_heater_preheats_a_cold_pack_at_the_analytic_time():
    # one node: C dT/dt = P - G (T - Ta), T(0) = Ta = -20 degC -> T(t) = Ta + P/G (1 - exp(-t G / C));
    # the heater stops at 5 degC: t* = -C/G ln(1 - (T_set - Ta) G / P)
    c_cell, g, power = 0.070 * 900.0, 0.2, 12.0
    th = {"ambient_temperature": "-20 degC", "sink_heat_capacity": "100 J/K", "cell_to_sink": "0 W/K",
          "sink_to_ambient": "1 W/K", "cell_to_ambient": f"{g} W/K",
          "heater": {"power": f"{power} W", "on_below": "2 degC", "off_above": "5 degC"}}
    result = simulate(scenario(thermal=th, segments=[{"mode": "rest", "duration": "2 h"}],
                               solver={"rtol": 1e-10}))
    expected = -c_cell / g * math.log(1 - 25.0 * g / power)
    first = next(e for e in result.events if e["event"] == "heater_switch")
    assert first["state"] == "off"
    assert first["time_s"] == pytest.approx(expected, rel=1e-7)
    s = result.summary
    assert s["heater_energy_Wh"] > power * expected / 3600  # it cycles on again later
    assert heat_balance_error(s) < 1e-6


def test_heater_fed_from_the_pack_draws_its_power_from_the_cells():
    cell = cell_section(capacity="2 Ah", initial_soc=0.8)
    th = {"ambient_temperature": "-10 degC", "sink_heat_capacity": "100 J/K", "cell_to_sink": "0.1 W/K",
          "sink_to_ambient": "0.5 W/K",
          "heater": {"power": "5 W", "on_below": "0 degC", "off_above": "10 degC", "source": "pack"}}
    result = simulate(scenario(cell=cell, thermal=th, segments=[{"mode": "rest", "duration": "10 min"}]))
    s = result.series
    heating = s["heater_power_W"] > 0
    np.testing.assert_allclose(s["power_W"][heating], 5.0, rtol=1e-9)  # the pack delivers the heater power
    assert result.summary["energy_load_Wh"] == pytest.approx(result.summary["heater_energy_from_pack_Wh"],
                                                             rel=1e-6)
    assert result.summary["soc_end"] < 0.8


def test_ambient_profile_is_linear_in_time(tmp_path):
    # one node, Ta(t) = a + b t: T(t) = a + b t - b tau + (T0 - a + b tau) exp(-t / tau), tau = C / G
    (tmp_path / "day.csv").write_text("time_s,ambient_temperature_degC\n0,10\n3600,28\n")
    c_cell, g = 0.070 * 900.0, 0.1
    th = {"ambient_profile": "day.csv", "sink_heat_capacity": "100 J/K", "cell_to_sink": "0 W/K",
          "sink_to_ambient": "1 W/K", "cell_to_ambient": f"{g} W/K"}
    import thermoelec

    data = scenario(thermal=th, segments=[{"mode": "rest", "duration": "1 h"}], solver={"rtol": 1e-10})
    result = thermoelec.simulate(thermoelec.scenario_from_dict(data, base_dir=tmp_path))
    t = result.series["time_s"]
    a, b, tau = 10.0, 18.0 / 3600, c_cell / g
    expected = a + b * t - b * tau + (10.0 - a + b * tau) * np.exp(-t / tau)
    np.testing.assert_allclose(result.series["cell_temperature_degC"], expected, atol=1e-6)
    np.testing.assert_allclose(result.series["ambient_temperature_degC"], a + b * t, atol=1e-9)


def test_soak_sets_the_mission_start():
    # a 2 h soak at 45 degC from 20 degC, one node: T = Ta + (T0 - Ta) exp(-t / tau)
    c_cell, g = 0.070 * 900.0, 0.05
    th = {"ambient_temperature": "20 degC", "sink_heat_capacity": "100 J/K", "cell_to_sink": "0 W/K",
          "sink_to_ambient": "1 W/K", "cell_to_ambient": f"{g} W/K"}
    segments = [{"mode": "soak", "duration": "2 h", "ambient_temperature": "45 degC"},
                {"mode": "current", "value": "1 A", "duration": "60 s"}]
    result = simulate(scenario(thermal=th, segments=segments, solver={"rtol": 1e-10}))
    expected = 45.0 + (20.0 - 45.0) * math.exp(-7200 / (c_cell / g))
    assert result.summary["soak"]["cell_temperature_end_degC"] == pytest.approx(expected, abs=1e-6)
    assert result.series["cell_temperature_degC"][0] == pytest.approx(expected, abs=1e-6)
    assert result.series["time_s"][0] == 0.0 and result.series["time_s"][-1] == pytest.approx(60.0)
    assert result.series["ambient_temperature_degC"][0] == pytest.approx(20.0)  # the mission's own ambient


@pytest.mark.parametrize("length, expected", [("0.02 m", 1), ("0.2 m", 0)])
def test_correlation_outside_its_range_is_named(length, expected):
    # a hot plate facing up: McAdams 0.54 Ra^1/4 holds for 1e4 <= Ra <= 1e7; a 2 cm plate 5-20 K above
    # the air has Ra of a few thousand (Ra ~ L^3), a 20 cm one a few million
    th = {"ambient_temperature": "20 degC", "initial_cell_temperature": "40 degC",
          "initial_sink_temperature": "40 degC", "sink_heat_capacity": "300 J/K", "cell_to_sink": "2 W/K",
          "convection": {"natural": "horizontal_plate_up", "length": length, "area": "0.05 m^2"}}
    result = simulate(scenario(thermal=th, segments=[{"mode": "rest", "duration": "10 min"}]))
    found = [w for w in result.warnings if "horizontal_plate_up correlation" in w]
    assert len(found) == expected
    if expected:
        assert "McAdams, hot surface facing up" in found[0] and "1e+04 <= Ra <= 1e+11" in found[0]
    assert result.series["rayleigh_number"].max() > 0


def test_demo_compares_still_air_fan_and_cold_plate():
    import thermoelec
    from thermoelec.analysis import compare

    from ..helpers import SCENARIOS

    loaded = thermoelec.load_scenario(SCENARIOS / "robot_cooling.toml")
    cases = {o.name: o.result.summary for o in compare.run_cases(loaded, compare.case_list(loaded))}
    still, fan, plate = cases["still air"], cases["fan"], cases["cold plate"]
    # the same mission: the more cooling, the cooler the cells
    assert still["energy_discharged_Wh"] == pytest.approx(fan["energy_discharged_Wh"], rel=1e-9)
    assert still["cell_temperature_max_degC"] > fan["cell_temperature_max_degC"] > plate["cell_temperature_max_degC"]
    assert fan["thermostat_switches"] >= 1 and plate["heat_to_coolant_Wh"] > 0
    freezer = cases["freezer aisle, heater"]
    assert freezer["soak"]["heater_energy_Wh"] > 0
    assert freezer["soak"]["cell_temperature_end_degC"] > 5.0  # pre-heated above the heater's on threshold
    for summary in cases.values():
        assert heat_balance_error(summary) < 1e-4


def test_cooling_keys_take_dotted_path_overrides():
    import thermoelec

    from ..helpers import SCENARIOS

    loaded = thermoelec.load_scenario(SCENARIOS / "robot_cooling.toml")
    still = thermoelec.simulate(loaded, overrides={"profile.repeat": 1})
    breeze = thermoelec.simulate(loaded, overrides={"profile.repeat": 1, "thermal.convection.air_speed": "2 m/s"})
    assert breeze.summary["cell_temperature_max_degC"] < still.summary["cell_temperature_max_degC"]
    assert breeze.series["reynolds_number"].max() == pytest.approx(2.0 * 0.30 / correlations.air_properties(
        0.5 * (breeze.series["sink_temperature_degC"][-1] + 32.0) + ZERO_CELSIUS)[0], rel=0.05)
