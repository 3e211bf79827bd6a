"""The limits of a pack specification as events, and a BMS's derating, against closed forms, on both drivers.

Sources: the two-node network of VALIDATION.md section 2 (the sink at 27.288239 degC after
600 s); an adiabatic lumped cell heated at ``I² R0`` (lumped capacitance, Incropera ch. 5:
``T = T0 + I² R0 t / C``); a linear OCV ``U = a + b SoC`` under a constant current (VALIDATION.md
section 4's CC-CV cell); Kirchhoff's current split in parallel (VALIDATION.md section 7: 10 and
20 mohm carry 2:1); a source behind a resistance (circuit theory: the current that holds the
cell at ``V_min`` is ``(U - V_min)/R0``). Event times are located to about 1e-9 of their scale
by CVODE and to 1e-7 s by the batched solver; the tolerances below allow for the closed form's
own rounding (the sink table gives 7 digits) and the integrator at rtol 1e-9.
"""

from __future__ import annotations

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis.metrics import batch_metrics
from thermoelec.engine.batch import solve_batch
from thermoelec.engine.options import SolverOptions
from thermoelec.scenario import scenario_from_dict

from ..helpers import cell_section, scenario, simulate

ADIABATIC = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "0 W/K",
             "sink_to_ambient": "0.5 W/K"}
C_CELL = 0.070 * 900.0  # J/K, the helpers' cell
LINEAR_CELL = dict(capacity="5 Ah", ocv={"soc": [0.0, 1.0], "voltage": [3.2, 4.2]}, voltage_max="4.5 V",
                   voltage_min="3.0 V")


def _batch(data: dict) -> dict:
    """The batched solver's metrics of a scenario (at its tolerance)."""
    problem = scenario_from_dict(data).problem()
    outcome = solve_batch([problem], SolverOptions(rtol=data["solver"]["rtol"]))
    assert outcome.status == ["ok"]
    return {**batch_metrics(problem, outcome, 0), "duration_s": float(outcome.duration[0])}


def _stop(data: dict) -> tuple[thermoelec.SimulationResult, dict]:
    return simulate(data), _batch(data)


def test_sink_temperature_limit_stops_at_the_two_node_closed_form():
    # VALIDATION.md section 2: C1 70 J/K, C2 200 J/K, 0.5 W/K and 0.5 W/K, 2 W in the cells (10 A through 20 mohm,
    # a flat OCV, a 1000 Ah cell whose SoC hardly moves): the sink passes 27.288239 degC at t = 600 s
    data = scenario(cell=cell_section(mass="0.070 kg", specific_heat="1000 J/kg/K"),
                    segments=[{"mode": "current", "value": "10 A", "duration": "2000 s"}],
                    limits={"sink_temperature_max": "27.288239 degC"})
    result, batch = _stop(data)
    assert result.stop_reason == batch["stop_reason"] == "sink_temperature_max"
    # the table's 7 digits: 1e-6 K over the sink's 1.2e-3 K/s there is 1e-3 s
    assert result.summary["duration_s"] == pytest.approx(600.0, abs=2e-3)
    # the batched solver's sink after 600 s at rtol 1e-9 within about 1e-7 K of CVODE's: 1e-4 s at 1.2e-3 K/s
    assert batch["duration_s"] == pytest.approx(result.summary["duration_s"], abs=5e-4)
    check = next(c for c in result.summary["checks"] if c["check"] == "sink_temperature_max")
    assert not check["passed"] and check["limit"] == pytest.approx(27.288239)
    assert "sink (housing) reached sink_temperature_max" in result.summary["stop_explanation"]


def test_charge_temperature_limit_stops_an_adiabatic_charge_and_not_a_discharge():
    # 10 A through 20 mohm heat 2 W into 63 J/K: 35 degC at t = 10 K * 63 J/K / 2 W = 315 s while charging
    limits = {"charge_temperature_max": "35 degC"}
    charge = scenario(thermal=ADIABATIC, segments=[{"mode": "current", "value": "-10 A", "duration": "600 s"}],
                      limits=limits)
    result, batch = _stop(charge)
    assert result.stop_reason == batch["stop_reason"] == "charge_temperature_max"
    assert result.summary["duration_s"] == pytest.approx(10.0 * C_CELL / 2.0, rel=1e-6)
    assert batch["duration_s"] == pytest.approx(result.summary["duration_s"], rel=1e-8)
    discharge = scenario(thermal=ADIABATIC, segments=[{"mode": "current", "value": "10 A", "duration": "600 s"}],
                         limits=limits)
    passed = simulate(discharge)
    assert passed.completed and passed.summary["cell_temperature_max_degC"] > 35.0
    assert passed.summary["charge_temperature_margin_K"] is None  # never charged


def test_discharge_temperature_limit_stops_a_cold_discharge_as_it_begins():
    data = scenario(thermal={**ADIABATIC, "ambient_temperature": "-15 degC"},
                    segments=[{"mode": "rest", "duration": "30 s"},
                              {"mode": "power", "value": "20 W", "duration": "60 s", "name": "take-off"}],
                    limits={"discharge_temperature_min": "-10 degC"})
    result, batch = _stop(data)
    assert result.stop_reason == batch["stop_reason"] == "discharge_temperature_min"
    assert result.summary["duration_s"] == batch["duration_s"] == 30.0
    assert '"take-off"' in result.summary["stop_explanation"] and "-15 degC" in result.summary["stop_explanation"]
    assert result.summary["verdict"] == "fail"


def test_a_current_limit_over_temperature_stops_where_the_table_meets_the_current():
    # 20 A heat 8 W into 63 J/K; the limit falls from 30 A at 20 degC to 10 A at 40 degC: 20 A at 30 degC,
    # reached at t = 5 K * 63 J/K / 8 W = 39.375 s
    data = scenario(thermal=ADIABATIC, segments=[{"mode": "current", "value": "20 A", "duration": "120 s"}],
                    limits={"discharge_current_max": {"temperature": ["20 degC", "40 degC"],
                                                      "values": ["30 A", "10 A"]}})
    result, batch = _stop(data)
    assert result.stop_reason == batch["stop_reason"] == "discharge_current_max"
    assert result.summary["duration_s"] == pytest.approx(5.0 * C_CELL / 8.0, rel=1e-6)
    assert batch["duration_s"] == pytest.approx(result.summary["duration_s"], rel=1e-8)
    check = next(c for c in result.summary["checks"] if c["check"] == "discharge_current_max")
    assert check["limit"] == "table" and check["worst"] == pytest.approx(20.0) and not check["passed"]


def test_a_charge_power_limit_stops_a_linear_cell_at_the_closed_form():
    # U = 3.2 + 1.0 SoC, 5 Ah, charged at 5 A from SoC 0.2 through 20 mohm: |P| = 5 (3.5 + t / 3600) W, 18 W at 360 s
    data = scenario(cell=cell_section(initial_soc=0.2, **LINEAR_CELL),
                    segments=[{"mode": "current", "value": "-5 A", "duration": "600 s"}],
                    limits={"charge_power_max": "18 W"})
    result, batch = _stop(data)
    assert result.stop_reason == batch["stop_reason"] == "charge_power_max"
    assert result.summary["duration_s"] == pytest.approx(360.0, rel=1e-6)
    assert batch["duration_s"] == pytest.approx(result.summary["duration_s"], rel=1e-8)


def test_a_resolved_pack_names_the_cell_at_its_current_limit():
    # 1s2p, one cell at half the resistance: it carries 2/3 of the pack current (Kirchhoff, VALIDATION.md 7), so a
    # 20 A cell limit stops the pack at 30 A; a power demand ramping the current makes it cross
    data = scenario(pack={"series": 1, "parallel": 2, "model": "resolved", "cell": [{"cell": 2, "r0_factor": 0.5}]},
                    segments=[{"mode": "current", "value": "29 A", "duration": "10 s"},
                              {"mode": "current", "value": "31 A", "duration": "10 s"}],
                    limits={"discharge_current_max": "20 A"})
    result = simulate(data)
    assert result.stop_reason == "discharge_current_max" and result.summary["duration_s"] == 10.0
    assert result.summary["first_limit_cell"] == 2
    assert result.cells["cells_current_A"][-2, 1] == pytest.approx(29.0 * 2 / 3, rel=1e-9)


def test_the_voltage_limiter_holds_the_cell_at_its_minimum_and_the_mission_goes_on():
    # a 40 A demand on U = 3.7 V behind 20 mohm asks 2.9 V: held at 3.0 V the cell gives (3.7 - 3.0)/0.02 = 35 A;
    # the demand asked (3.7 - 0.8) 40 = 116 W, the pack gives 105 W: 11 W short for the 60 s
    data = scenario(cell=cell_section(voltage_min="3.0 V"),
                    segments=[{"mode": "current", "value": "40 A", "duration": "60 s"},
                              {"mode": "current", "value": "10 A", "duration": "60 s"}],
                    derating={"voltage_limiter": True, "cutoff_current": "0.1 A"})  # (C/20 of 1000 Ah is 50 A)
    result = simulate(data)
    assert result.completed and result.stop_reason == "end_of_profile"
    held = result.series["time_s"] < 60.0
    np.testing.assert_allclose(result.series["current_A"][held], 35.0, rtol=1e-9)
    np.testing.assert_allclose(result.series["cell_voltage_V"][held], 3.0, rtol=1e-12)
    summary = result.summary
    assert summary["energy_not_delivered_Wh"] == pytest.approx(11.0 * 60.0 / 3600.0, rel=1e-7)
    assert summary["time_voltage_held_s"] == pytest.approx(60.0, rel=1e-9)
    assert summary["time_derated_s"] == pytest.approx(60.0, rel=1e-9)
    assert summary["power_shortfall_max_W"] == pytest.approx(11.0, rel=1e-9)
    assert [e["event"] for e in result.events] == ["hold_voltage_min", "hold_release"]
    # the second segment's 10 A is delivered in full
    free = result.series["time_s"] > 60.0
    np.testing.assert_array_equal(result.series["current_A"][free], result.series["current_demanded_A"][free])


def test_allowances_hold_the_current_and_the_power():
    # 30 A asked, 25 A allowed; 120 W asked, 100 W allowed: the lower root of R I^2 - U I + 100 = 0
    segments = [{"mode": "current", "value": "30 A", "duration": "10 s"},
                {"mode": "power", "value": "120 W", "duration": "10 s"}]
    current = simulate(scenario(segments=segments, derating={"discharge_current": "25 A", "cutoff_current": "0.1 A"}))
    power = simulate(scenario(segments=segments, derating={"discharge_power": "100 W", "cutoff_current": "0.1 A"}))
    assert current.completed and power.completed
    t = current.series["time_s"]
    np.testing.assert_allclose(current.series["current_A"][t < 10.0], 25.0, rtol=1e-12)
    np.testing.assert_allclose(current.series["current_A"][t > 10.0], 25.0, rtol=1e-12)  # 120 W asks 32.9 A
    t = power.series["time_s"]
    np.testing.assert_allclose(power.series["current_A"][t < 10.0], 30.0, rtol=1e-12)  # 93 W: inside 100 W
    np.testing.assert_allclose(power.series["power_W"][t > 10.0], 100.0, rtol=1e-9)
    expected = 2 * 100.0 / (3.7 + np.sqrt(3.7**2 - 4 * 0.02 * 100.0))
    np.testing.assert_allclose(power.series["current_A"][t > 10.0], expected, rtol=1e-9)
    asked = (3.7 - 0.02 * 30) * 30 * 10 + 120.0 * 10
    for result in (current, power):
        assert result.summary["energy_demanded_Wh"] * 3600 == pytest.approx(asked, rel=1e-9)
    assert power.summary["energy_not_delivered_Wh"] * 3600 == pytest.approx(20.0 * 10, rel=1e-9)


def test_a_ramp_limits_the_rise_of_the_current():
    # 0 -> 30 A at 5 A/s: 10 A after 2 s, the demand after 6 s; not delivered over the ramp
    # integral_0^6 [(3.7 - 0.6) 30 - (3.7 - 0.02 * 5t) 5t] dt = 558 - 333 + 36 = 261 J
    data = scenario(segments=[{"mode": "current", "value": "30 A", "duration": "20 s"}],
                    derating={"ramp_rate": "5 A/s"}, solver={"rtol": 1e-9, "output_interval": "0.5 s"})
    result = simulate(data)
    s = result.series
    assert s["current_A"][np.flatnonzero(s["time_s"] == 2.0)[0]] == pytest.approx(10.0, rel=1e-12)
    assert np.all(s["current_A"][s["time_s"] >= 6.0] == 30.0)
    assert result.summary["energy_not_delivered_Wh"] * 3600 == pytest.approx(261.0, rel=1e-7)
    assert result.summary["time_derated_s"] == pytest.approx(6.0, rel=1e-9)


def test_a_derated_mission_stays_inside_its_limits_and_its_energy_balance_closes():
    # a heating cell on a temperature- and SoC-dependent allowance below its limits, the voltage limiter on, on both
    # drivers; the demand and the shortfall are integrated by the integrator, and the series' trapezoid at 0.02 s
    # agrees to 1e-6 (the shortfall is smooth between the located holds and releases)
    cell = cell_section(initial_soc=0.9, rc=[{"resistance": "10 mohm", "time_constant": "20 s"}], **LINEAR_CELL)
    data = scenario(cell=cell,
                    segments=[{"mode": "power", "value": "120 W", "duration": "300 s"},
                              {"mode": "rest", "duration": "30 s"},
                              {"mode": "power", "value": "-60 W", "duration": "120 s"},
                              {"mode": "power", "value": "150 W", "duration": "400 s"}],
                    limits={"discharge_current_max": "31 A", "charge_current_max": "10 A"},
                    derating={"discharge_current": {"soc": [0.0, 0.2, 1.0], "temperature": ["20 degC", "40 degC"],
                                                    "values": [["5 A", "25 A", "30 A"], ["2 A", "12 A", "15 A"]]},
                              "charge_current": "8 A", "ramp_rate": "20 A/s"},
                    solver={"rtol": 1e-9, "output_interval": "0.02 s"})
    result = simulate(data)
    s, summary = result.series, result.summary
    assert summary["verdict"] == "pass", summary["failed_checks"] if "failed_checks" in summary else summary["checks"]
    assert s["current_A"].max() <= 31.0 and -s["current_A"].min() <= 8.0 + 1e-12
    assert s["cell_voltage_V"].min() >= 3.0 - 1e-9
    assert summary["energy_not_delivered_Wh"] > 1.0 and summary["energy_not_accepted_Wh"] > 0.1
    # the balance: demanded = delivered + not delivered, in the integrator's own sums
    assert summary["energy_demanded_Wh"] == pytest.approx(summary["energy_discharged_Wh"]
                                                          + summary["energy_not_delivered_Wh"], rel=1e-12)
    shortfall = s["power_demanded_W"] - s["power_W"]
    discharge = np.where(s["current_demanded_A"] > 0, shortfall, 0.0)
    trapezoid = float(np.sum(0.5 * (discharge[1:] + discharge[:-1]) * np.diff(s["time_s"]))) / 3600.0
    assert summary["energy_not_delivered_Wh"] == pytest.approx(trapezoid, rel=1e-6)
    # full demand wherever nothing holds it back: the current is the demand's to the bit
    free = np.abs(s["current_A"]) < np.abs(s["current_demanded_A"])
    assert free.any() and (~free).any()
    # the heat balance still closes (generated = stored + to ambient)
    assert summary["heat_generated_Wh"] == pytest.approx(summary["heat_stored_Wh"] + summary["heat_to_ambient_Wh"],
                                                         rel=1e-6)
    batch = _batch(data)
    for key in ("energy_not_delivered_Wh", "energy_not_accepted_Wh", "energy_demanded_Wh"):
        assert batch[key] == pytest.approx(summary[key], rel=1e-6), key
    assert batch["time_derated_s"] == pytest.approx(summary["time_derated_s"], abs=0.05)
    assert batch["cell_discharge_current_max_A"] <= 31.0 and batch["verdict"] == "pass"


def test_a_pack_with_nothing_left_to_deliver_stops_and_says_so():
    # held at 3.0 V the linear cell's current (3.2 + SoC - 3.0) / 0.02 falls to the cutoff (C/20 = 0.25 A) at
    # SoC = 0.25 * 0.02 - 0.2 = ... below 0: with voltage_min 3.3 V, SoC_stop = 3.3 + 0.25 * 0.02 - 3.2 = 0.105
    cell = cell_section(initial_soc=0.5, **{**LINEAR_CELL, "voltage_min": "3.3 V"})
    data = scenario(cell=cell, segments=[{"mode": "current", "value": "20 A", "duration": "3 h"}],
                    derating={"voltage_limiter": True})
    result, batch = _stop(data)
    assert result.stop_reason == batch["stop_reason"] == "nothing_deliverable"
    assert result.summary["soc_end"] == pytest.approx(0.105, abs=1e-6)
    assert result.series["current_A"][-1] == pytest.approx(0.25, rel=1e-6)
    assert "nothing deliverable" in result.summary["stop_explanation"]
    assert not next(c for c in result.summary["checks"] if c["check"] == "nothing_deliverable")["passed"]


def test_the_limiter_holds_a_regenerating_cell_at_its_maximum():
    # regeneration of 60 W into a nearly full linear cell: held at voltage_max the charge current is
    # (4.15 - U) / R0 where U = 3.2 + SoC; the load's power not accepted is counted on the charge side
    cell = cell_section(initial_soc=0.9, **{**LINEAR_CELL, "voltage_max": "4.15 V"})
    data = scenario(cell=cell, segments=[{"mode": "power", "value": "-60 W", "duration": "300 s"}],
                    derating={"voltage_limiter": True})
    result = simulate(data)
    assert result.completed and result.events[0]["event"] == "hold_voltage_max"
    held = result.series["time_s"] > result.events[0]["time_s"]
    np.testing.assert_allclose(result.series["cell_voltage_V"][held], 4.15, rtol=1e-12)
    assert result.summary["energy_not_accepted_Wh"] > 0.0 and result.summary["energy_not_delivered_Wh"] == 0.0


def test_a_resolved_pack_of_identical_cells_derates_as_the_lumped_one():
    # the resolved kernel's bounds on the pack current reduce to the lumped ones for identical cells
    segments = [{"mode": "power", "value": "450 W", "duration": "200 s"}, {"mode": "power", "value": "-200 W",
                                                                            "duration": "100 s"}]
    cell = cell_section(initial_soc=0.6, **LINEAR_CELL)
    derating = {"discharge_current": {"soc": [0.0, 1.0], "values": ["10 A", "30 A"]}, "charge_current": "8 A",
                "discharge_power": "400 W"}
    lumped = simulate(scenario(cell=cell, pack={"series": 2, "parallel": 2}, segments=segments, derating=derating))
    resolved = simulate(scenario(cell=cell, pack={"series": 2, "parallel": 2, "model": "resolved"},
                                 segments=segments, derating=derating))
    for key in ("energy_discharged_Wh", "energy_not_delivered_Wh", "energy_not_accepted_Wh", "time_derated_s"):
        assert resolved.summary[key] == pytest.approx(lumped.summary[key], rel=1e-7), key
    # with a spread of R0 each cell stays within its own allowance
    spread = simulate(scenario(cell=cell, pack={"series": 2, "parallel": 2, "model": "resolved",
                                                "spread": {"r0": 0.1, "seed": 3}},
                               segments=segments, derating={"discharge_current": "20 A", "charge_current": "8 A"}))
    currents = spread.cells["cells_current_A"]
    assert currents.max() <= 20.0 * (1 + 1e-9) and currents.min() >= -8.0 * (1 + 1e-9)
    assert currents.max() == pytest.approx(20.0, rel=1e-9)  # one cell sits on its allowance


def test_a_cell_resting_past_its_voltage_limit_is_not_held_while_it_discharges():
    # an OCV of 4.21 V over a voltage_max of 4.2 V (a full cell in the cold, its entropic shift past the limit) and a
    # ramp from zero: at t = 0 no current flows, so the limiter must hold nothing; a held-at-maximum cell while
    # discharging would be let go at once and held again without time passing. The ramp's closed form (as above):
    # 5 A/s reaches the 30 A demand after 6 s; the cell then sits at 4.21 - 0.02 * 30 = 3.61 V, inside its limits
    cell = cell_section(voltage_max="4.2 V", ocv={"soc": [0.0, 1.0], "voltage": [4.21, 4.21]})
    data = scenario(cell=cell, segments=[{"mode": "current", "value": "30 A", "duration": "20 s"}],
                    derating={"ramp_rate": "5 A/s", "voltage_limiter": True},
                    solver={"rtol": 1e-9, "output_interval": "0.5 s"})
    result = simulate(data)
    assert result.completed and result.events == []
    assert result.summary["time_voltage_held_s"] == 0.0
    assert result.summary["time_derated_s"] == pytest.approx(6.0, rel=1e-9)
    # the batched solver interpolates the end of the deficit within its step (no root function marks it):
    # to the 1e-3 s of its accuracy contract on event times
    batched = _batch(data)
    assert batched["duration_s"] == pytest.approx(20.0) and batched["time_derated_s"] == pytest.approx(6.0, abs=1e-3)


def test_events_that_undo_each_other_at_one_instant_end_the_run_with_a_message(monkeypatch):
    # a guard, not physics: were a limiter held and let go (or a thermostat switched back) without time passing,
    # the driver would loop for ever; it gives up after MAX_EVENTS_AT_ONE_INSTANT with the solver's failure status
    from thermoelec.engine import driver
    from thermoelec.engine.events import EV_HOLD_MAX, EV_HOLD_RELEASE
    from thermoelec.engine.mission import MAX_EVENTS_AT_ONE_INSTANT

    calls = []

    def chattering(kernels, backend, options, p, t, y, t_end, run):
        calls.append(t)
        return t, y, (EV_HOLD_MAX, EV_HOLD_RELEASE)[len(calls) % 2], False

    monkeypatch.setattr(driver, "_phase", chattering)
    data = scenario(derating={"voltage_limiter": True})
    trajectory = driver.integrate_problem(scenario_from_dict(data).problem(), SolverOptions(rtol=1e-9))
    assert trajectory.status == "failed" and trajectory.stop_reason == "solver_error"
    assert "without time passing" in trajectory.message and "hold_" in trajectory.message
    assert len(calls) == MAX_EVENTS_AT_ONE_INSTANT + 1  # one past the most allowed
