"""The batched solver on every kind of phase and event, against tight solo CVODE runs.

Source: the engine itself at rtol 1e-10 (CVODE, a different integrator and a
different event locator), with the tolerances the sweep asks of the batch
(1e-4 K, 1e-5 V, 1e-3 s). Covered: a CC-CV charge ending on its cutoff current
(the CC->CV switch, then the voltage-held phase), a discharge ended by its own
end condition and then rest, a voltage-held segment, a thermostatic fan that
switches on and off, a pack heater fed from the pack in the cold, a linear
ambient profile, a soak before the mission (run first, the mission starting
from its end state), a full cell resting at its SoC and voltage limits before a
discharge, and stops on the voltage and temperature limits.
"""

from __future__ import annotations

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis.metrics import batch_metrics
from thermoelec.engine import batch

from ..helpers import scenario

TOLERANCES = {"cell_temperature_max_degC": 1e-4, "sink_temperature_max_degC": 1e-4, "voltage_min_V": 1e-5,
              "voltage_margin_min_V": 1e-5, "duration_s": 1e-3, "soc_end": 1e-6}
RELATIVE = ("energy_battery_Wh", "energy_load_Wh", "heat_generated_Wh", "heat_to_ambient_Wh", "charge_throughput_Ah")

CELL = {
    "capacity": "2.5 Ah", "voltage_max": "4.2 V", "voltage_min": "2.8 V", "mass": "0.045 kg",
    "specific_heat": "1000 J/kg/K", "initial_soc": 0.6,
    "ocv": {"soc": [0.0, 0.2, 0.5, 0.8, 1.0], "voltage": [3.0, 3.5, 3.7, 3.95, 4.2],
            "entropic": [-2e-4, 0.0, 1e-4, -1e-4, -2e-4]},
    "r0": {"soc": [0.0, 1.0], "temperature": ["-20 degC", "25 degC"], "values": [[0.08, 0.06], [0.03, 0.025]]},
    "rc": [{"resistance": "15 mohm", "time_constant": "40 s"}],
}
THERMAL = {"ambient_temperature": "25 degC", "sink_heat_capacity": "150 J/K", "cell_to_sink": "0.8 W/K",
           "sink_to_ambient": "0.3 W/K"}
PACK = {"series": 2, "parallel": 1}


def _case(name: str) -> dict:
    th = dict(THERMAL)
    cell = CELL
    segments: list[dict]
    if name == "cccv":
        segments = [{"mode": "current", "value": "3 A", "duration": "20 min"},
                    {"mode": "cccv", "current": "-2.5 A", "voltage": "8.4 V", "cutoff_current": "0.25 A"}]
    elif name == "end condition, then rest":
        segments = [{"mode": "power", "value": "18 W", "duration": "2 h", "voltage_below": "6.8 V"},
                    {"mode": "rest", "duration": "15 min"}, {"mode": "current", "value": "1 A", "duration": "5 min"}]
    elif name == "voltage held":
        segments = [{"mode": "current", "value": "2 A", "duration": "10 min"},
                    {"mode": "voltage", "value": "7.7 V", "duration": "10 min"}]
    elif name == "fan":
        th["fan"] = {"on_above": "29 degC", "off_below": "27 degC", "conductance": "2 W/K"}
        segments = [{"mode": "current", "value": "6 A", "duration": "12 min"}, {"mode": "rest", "duration": "30 min"}]
    elif name == "heater in the cold":
        th.update(ambient_temperature="-15 degC",
                  heater={"power": "10 W", "on_below": "0 degC", "off_above": "5 degC", "source": "pack"})
        segments = [{"mode": "current", "value": "1 A", "duration": "40 min"}]
    elif name == "ambient profile":
        th.pop("ambient_temperature")
        th["ambient_profile"] = "ambient.csv"  # written by the fixture: 5 degC rising to 35 degC in an hour
        segments = [{"mode": "current", "value": "2 A", "duration": "30 min"}, {"mode": "rest", "duration": "30 min"}]
    elif name == "soak, then a heated mission":
        th.update(ambient_temperature="-10 degC", initial_cell_temperature="20 degC",
                  heater={"power": "6 W", "on_below": "2 degC", "off_above": "6 degC", "source": "pack"})
        segments = [{"mode": "soak", "duration": "2 h"}, {"mode": "current", "value": "2 A", "duration": "30 min"}]
    elif name == "full cell at rest, then discharge":
        # at rest the full cell sits at its SoC and voltage limits without heading past them: the phase start
        # switches those events off for the phase (then no step may read them as fired)
        cell = {**CELL, "initial_soc": 1.0}
        segments = [{"mode": "rest", "duration": "2 min"}, {"mode": "current", "value": "2 A", "duration": "10 min"}]
    elif name == "voltage cutoff":
        segments = [{"mode": "power", "value": "25 W", "duration": "2 h"}]
    elif name == "temperature limit":
        th.update(ambient_temperature="38 degC", sink_to_ambient="0.02 W/K")
        segments = [{"mode": "current", "value": "6 A", "duration": "1 h"}]
    else:
        raise KeyError(name)
    data = scenario(cell=dict(cell), thermal=th, segments=segments, pack=PACK,
                    limits={"cell_temperature_max": "45 degC"}, solver={"rtol": 1e-9, "output_interval": "1 s"})
    return data


CASES = ("cccv", "end condition, then rest", "voltage held", "fan", "heater in the cold", "ambient profile",
         "soak, then a heated mission", "full cell at rest, then discharge", "voltage cutoff", "temperature limit")


@pytest.fixture(scope="module")
def answers(tmp_path_factory):
    folder = tmp_path_factory.mktemp("batch")
    (folder / "ambient.csv").write_text("time_s,ambient_temperature_degC\n0,5\n3600,35\n")
    loaded = [thermoelec.scenario_from_dict(_case(name), base_dir=folder) for name in CASES]
    problems = [s.problem() for s in loaded]
    outcome = batch.solve_batch(problems, loaded[0].solver_options())  # one batch, each with its own events
    solo = [thermoelec.simulate(s.with_overrides({"solver.rtol": 1e-10})) for s in loaded]
    return problems, outcome, solo


@pytest.mark.parametrize("k", range(len(CASES)), ids=CASES)
def test_batched_phase_kinds_equal_tight_solo_runs(answers, k):
    problems, outcome, solo = answers
    assert outcome.status[k] == "ok"
    got = batch_metrics(problems[k], outcome, k)
    expected = solo[k].summary
    assert got["stop_reason"] == expected["stop_reason"]
    for key, tol in TOLERANCES.items():
        assert got[key] == pytest.approx(expected[key], abs=tol), key
    for key in RELATIVE:
        assert got[key] == pytest.approx(expected[key], rel=1e-6, abs=1e-9), key


def test_the_cases_exercise_what_they_name(answers):
    _, _, solo = answers
    by_name = dict(zip(CASES, solo, strict=True))
    events = {name: [e["event"] for e in r.events] for name, r in by_name.items()}
    assert "cv_switch" in events["cccv"] and "cv_cutoff" in events["cccv"]
    assert "end_voltage_below" in events["end condition, then rest"]
    assert events["fan"].count("fan_switch") >= 2
    assert events["heater in the cold"].count("heater_switch") >= 2
    assert by_name["voltage cutoff"].summary["stop_reason"] == "voltage_min"
    assert by_name["temperature limit"].summary["stop_reason"] == "temperature_max"
    assert by_name["end condition, then rest"].summary["stop_reason"] == "end_of_profile"
    assert by_name["full cell at rest, then discharge"].summary["stop_reason"] == "end_of_profile"
    assert by_name["full cell at rest, then discharge"].summary["soc_end"] < 1.0 - 0.1
    assert np.isfinite(by_name["voltage held"].summary["energy_load_Wh"])
    soaked = by_name["soak, then a heated mission"].summary["soak"]
    assert soaked is not None and soaked["duration_s"] == pytest.approx(7200.0)
    ambient = by_name["ambient profile"].series["ambient_temperature_degC"]
    assert ambient[0] == pytest.approx(5.0) and ambient[-1] == pytest.approx(35.0)
