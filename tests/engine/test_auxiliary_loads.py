"""Auxiliary loads: fans and pumps drawing power from the pack while on, in the energy accounting.

Sources: the demand's closed form (a power demand delivers exactly P to the load, so its
energy is P times the duration), the thermostat's located switch times (the fan's on-time),
Kirchhoff's current law (loads in parallel on the terminals add their powers), and the
heat quadrature (the cells' irreversible heat I (Ns U - V), an integral of its own) for the
energy balance: drawn from the cells = to the load + to the auxiliaries + lost in the cells.
"""

from __future__ import annotations

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis import sweep

from ..helpers import cell_section, scenario

DURATION = 1800.0
POWER = 40.0
FAN_POWER = 5.0


def fan_scenario(fan_power: float = FAN_POWER, **thermal) -> dict:
    return scenario(
        cell=cell_section(),
        thermal={"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "5 W/K",
                 "sink_to_ambient": "0.1 W/K",
                 "fan": {"on_above": "28 degC", "off_below": "27 degC", "conductance": "10 W/K",
                         "power": f"{fan_power} W"}, **thermal},
        segments=[{"mode": "power", "value": f"{POWER} W", "duration": f"{DURATION} s"}],
        solver={"rtol": 1e-9, "output_interval": "5 s"},
    )


def on_time(result: thermoelec.SimulationResult) -> float:
    """Seconds the fan ran, from its located switch events."""
    on, total = None, 0.0
    for event in result.events:
        if event["event"] == "fan_switch":
            if event["state"] == "on":
                on = event["time_s"]
            else:
                total += event["time_s"] - on
                on = None
    if on is not None:
        total += float(result.series["time_s"][-1]) - on
    return total


def test_a_5_W_fan_lowers_the_energy_to_the_load_by_its_on_time_and_the_balance_closes():
    result = thermoelec.simulate(fan_scenario())
    s = result.summary
    assert result.completed and s["thermostat_switches"] >= 4  # it cycles
    t_on = on_time(result)
    assert 0.05 * DURATION < t_on < 0.95 * DURATION
    wh = 3600.0
    assert s["energy_auxiliary_Wh"] == pytest.approx(FAN_POWER * t_on / wh, rel=1e-9)
    assert s["energy_to_load_Wh"] == pytest.approx(s["energy_discharged_Wh"] - FAN_POWER * t_on / wh, rel=1e-12)
    # the load gets its demand, whatever the fan draws (closed form of a power demand)
    assert s["energy_to_load_Wh"] == pytest.approx(POWER * DURATION / wh, rel=1e-6)
    # drawn from the cells = to the load + to the fan + the cells' irreversible heat (no entropic term here)
    irreversible = s["heat_generated_Wh"] - s["heat_reversible_Wh"]
    balance = s["energy_to_load_Wh"] + s["energy_auxiliary_Wh"] + irreversible
    assert balance == pytest.approx(s["energy_battery_discharged_Wh"], rel=1e-6)
    # while on, the pack delivers demand + fan at its terminals (Kirchhoff: the loads add)
    series = result.series
    running = series["auxiliary_power_W"] == FAN_POWER
    assert running.any() and (~running).any()
    np.testing.assert_allclose(series["power_W"][running], POWER + FAN_POWER, rtol=1e-9)
    np.testing.assert_allclose(series["power_W"][~running], POWER, rtol=1e-9)


def test_a_fan_without_power_draws_nothing_and_the_batch_agrees(tmp_path):
    quiet = thermoelec.simulate(fan_scenario(0.0)).summary
    assert quiet["energy_auxiliary_Wh"] == 0.0
    assert quiet["energy_to_load_Wh"] == pytest.approx(quiet["energy_discharged_Wh"], rel=1e-12)
    loaded = thermoelec.scenario.scenario_from_dict({**fan_scenario(), "sweep": {"thermal.fan.power": ["0 W", "5 W"]}})
    plan = sweep.plan_sweep(loaded)
    rows = sweep.run_chunk(loaded, plan, [0, 1])
    assert [r["engine"] for r in rows] == ["batch", "batch"]
    solo = thermoelec.simulate(loaded, overrides={"thermal.fan.power": "5 W"}).summary
    for key in ("energy_auxiliary_Wh", "energy_to_load_Wh", "energy_discharged_Wh"):
        assert rows[1][key] == pytest.approx(solo[key], rel=2e-5), key  # switch times located to 1e-7 s vs rtol 1e-9
    assert rows[0]["energy_auxiliary_Wh"] == 0.0


def test_a_pump_curve_over_the_flow_and_an_always_on_pump():
    thermal = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "0.5 W/K",
               "sink_to_ambient": "0.1 W/K",
               "coolant": {"inlet_temperature": "20 degC", "flow_rate": "0.01 kg/s", "plate_conductance": "5 W/K"},
               "pump": {"power": {"flow_rate": ["0.005 kg/s", "0.02 kg/s"], "power": ["2 W", "8 W"]}}}
    data = scenario(thermal=thermal, segments=[{"mode": "power", "value": f"{POWER} W", "duration": "600 s"}])
    s = thermoelec.simulate(data).summary
    # linear between (0.005, 2 W) and (0.02, 8 W): 4 W at 0.01 kg/s, all the time
    assert s["energy_auxiliary_Wh"] == pytest.approx(4.0 * 600 / 3600, rel=1e-12)


@pytest.mark.parametrize("thermal, key", [
    ({"fan": {"on_above": "27 degC", "off_below": "26 degC", "conductance": "10 W/K", "power": "-1 W"}},
     "thermal.fan.power"),
    ({"coolant": {"inlet_temperature": "20 degC", "flow_rate": "0.05 kg/s", "plate_conductance": "5 W/K"},
      "pump": {"power": {"flow_rate": ["0.005 kg/s", "0.02 kg/s"], "power": ["2 W", "8 W"]}}}, "thermal.pump"),
    ({"coolant": {"inlet_temperature": "20 degC", "flow_rate": "0.01 kg/s", "plate_conductance": "5 W/K"},
      "pump": {"on_above": "30 degC"}}, "thermal.pump"),
])
def test_bad_auxiliary_loads_name_the_key(thermal, key):
    base = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "0.5 W/K",
            "sink_to_ambient": "0.1 W/K"}
    with pytest.raises(thermoelec.ScenarioError) as err:
        thermoelec.simulate(scenario(thermal={**base, **thermal}))
    assert key in str(err.value)
