"""The metrics contract: one function for the solo summary and the batched rows.

Sources: the unit definitions (1 Wh = 3600 J, 1 Ah = 3600 C, 0 degC = 273.15 K;
SI brochure, 9th ed., tables 4 and 8), and the energy balance of the
accounting itself (efficiency = energy out / energy in).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis import metrics
from thermoelec.analysis.metrics import METRICS, Extremes, mission_metrics
from thermoelec.analysis.results import DEMAND_MODES, REST_MODE, THERMOSTAT_EVENTS
from thermoelec.engine import layout as L
from thermoelec.engine.batch import EXTREMES
from thermoelec.physics.loads import COMPOSITE_MODES, LOAD_MODES

from ..helpers import cell_section, scenario


@pytest.fixture(scope="module")
def problem():
    cell = cell_section(voltage_min="3.0 V")
    data = scenario(cell=cell, limits={"cell_temperature_max": "60 degC"})
    return thermoelec.scenario_from_dict(data).problem()


def test_unit_constants_are_the_si_definitions():
    assert metrics.JOULES_PER_WH == 3600.0 and metrics.COULOMBS_PER_AH == 3600.0
    assert metrics.ZERO_CELSIUS == 273.15


def test_extremes_follow_the_batch_kernels_order():
    assert tuple(f.name for f in dataclasses.fields(Extremes)) == EXTREMES
    row = np.arange(len(EXTREMES), dtype=float)
    assert Extremes.from_batch(row).equivalent_time_at_reference == row[EXTREMES.index(
        "equivalent_time_at_reference")]


def test_mission_metrics_from_hand_made_states(problem):
    n = L.n_states(problem.n_rc)
    start, end = np.zeros(n), np.zeros(n)
    start[L.cell_temperature_index(problem.n_rc)] = 298.15
    end[0] = 0.25
    q = L.quadrature_index(problem.n_rc)
    end[q + L.Q_BATTERY_DISCHARGE] = 2 * 3600.0   # 2 Wh drawn from the cells
    end[q + L.Q_LOAD_DISCHARGE] = 1.5 * 3600.0    # 1.5 Wh to the load
    end[q + L.Q_HEAT] = 0.5 * 3600.0
    end[q + L.Q_THROUGHPUT] = 7200.0              # 2 Ah
    extremes = Extremes(318.15, 308.15, 10.0, 3.4, 12.0, 42.0, 4.1, 150.0, 0.0)
    got = mission_metrics(problem, start, end, extremes, 600.0, "end_of_profile")
    assert set(METRICS) <= set(got)
    assert got["completed"] is True
    assert got["cell_temperature_max_degC"] == pytest.approx(45.0, abs=1e-12)
    assert got["sink_temperature_max_degC"] == pytest.approx(35.0, abs=1e-12)
    assert got["cell_temperature_rise_K"] == pytest.approx(20.0, abs=1e-12)
    assert got["temperature_margin_K"] == pytest.approx(15.0, abs=1e-12)   # 60 degC limit
    assert got["voltage_margin_min_V"] == pytest.approx(0.4, abs=1e-12)    # 3.0 V limit
    assert got["energy_battery_Wh"] == pytest.approx(2.0) and got["energy_load_Wh"] == pytest.approx(1.5)
    assert got["energy_dissipated_Wh"] == pytest.approx(0.5)
    assert got["efficiency"] == pytest.approx(0.75)
    # the directions apart: 2 Wh drawn, 1.5 Wh delivered, 0.5 Wh lost in discharge; nothing charged
    assert got["energy_battery_discharged_Wh"] == pytest.approx(2.0)
    assert got["energy_discharged_Wh"] == pytest.approx(1.5)
    assert got["energy_dissipated_discharge_Wh"] == pytest.approx(0.5)
    assert got["efficiency_discharge"] == pytest.approx(0.75)
    assert got["efficiency_charge"] is None and got["efficiency_round_trip"] is None
    # no negative zero where nothing flowed (-0.0 == 0.0, so the sign is checked)
    for key in ("energy_charged_Wh", "energy_battery_charged_Wh", "energy_dissipated_charge_Wh"):
        assert got[key] == 0.0 and np.copysign(1.0, got[key]) == 1.0, key
    assert got["verdict"] == "pass" and got["failed_checks"] == ""
    # a cold charge fails the verdict on its own check
    cold = mission_metrics(problem, start, end, dataclasses.replace(extremes, cold_charging_time=5.0), 600.0,
                           "end_of_profile")
    assert cold["verdict"] == "fail" and cold["failed_checks"] == "charge_temperature_min"
    assert got["charge_throughput_Ah"] == pytest.approx(2.0)
    assert got["soc_end"] == 0.25 and got["equivalent_time_at_reference_s"] == 42.0
    failed = mission_metrics(problem, start, end, extremes, 600.0, "end_of_profile", status="failed")
    assert failed["completed"] is False


def test_the_solo_summary_is_mission_metrics_of_its_rows():
    # the summary's shared metrics are mission_metrics of the output rows' extremes, to the bit
    data = scenario(segments=[{"mode": "current", "value": "20 A", "duration": "120 s"}])
    result = thermoelec.simulate(data)
    s = result.series
    discharging = s["current_A"] > 0
    extremes = Extremes(s["cell_temperature_degC"].max() + 273.15, s["sink_temperature_degC"].max() + 273.15,
                        s["voltage_V"].min(), s["cell_voltage_V"].min(), np.abs(s["current_A"]).max(),
                        result.summary["equivalent_time_at_reference_s"], s["cell_voltage_V"].max(),
                        s["power_W"].max(), result.summary["time_charging_below_limit_s"],
                        # one cell, no limits set, never charging, no derating
                        cell_discharge_current_max=max(s["current_A"].max(), 0.0),
                        charge_power_max=max(-s["power_W"].min(), 0.0),
                        discharging_temperature_min=s["cell_temperature_degC"][discharging].min() + 273.15)
    again = mission_metrics(thermoelec.scenario_from_dict(data).problem(), result.states[0], result.states[-1],
                            extremes, s["time_s"][-1], result.stop_reason)
    for key in METRICS:
        if result.summary[key] is None:  # an efficiency of a direction that moved nothing
            assert again[key] is None, key
        else:
            assert again[key] == pytest.approx(result.summary[key], rel=1e-12, abs=1e-12), key
    assert again["verdict"] == result.summary["verdict"]


def test_labels_come_from_the_registries():
    assert REST_MODE in COMPOSITE_MODES
    assert DEMAND_MODES == (REST_MODE, *LOAD_MODES, "cccv") and "cccv" in COMPOSITE_MODES
    assert THERMOSTAT_EVENTS == ("fan_switch", "heater_switch", "pump_switch")
