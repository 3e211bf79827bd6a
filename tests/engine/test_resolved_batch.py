"""The batched solver on resolved packs, the cells a dimension of each scenario's state, against tight solo CVODE.

Source: the engine's CVODE driver at rtol 1e-10 (a different integrator, a
different event locator), with the tolerances the sweep asks of the batch (as in
``test_batch_phases``: 1e-4 K, 1e-5 V, 1e-3 s), on what a resolved pack adds:
cells built with a spread, a weak cell, a coolant along the rows, neighbour
conduction and wall cells; a 1 Hz power profile, a CC-CV charge, a stop on the
voltage limit of one group and on the temperature limit of one cell (the same
cell named by both), thermostats sensing the hottest and the coldest cell after a
soak. The resolved pack's metrics (spread, SoC spread, current share, hottest cell,
first cell at a limit) are compared too.
"""

from __future__ import annotations

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis.metrics import PACK_METRICS, batch_metrics
from thermoelec.engine import batch

from ..helpers import cell_section, scenario

TOLERANCES = {"cell_temperature_max_degC": 1e-4, "sink_temperature_max_degC": 1e-4, "voltage_min_V": 1e-5,
              "voltage_margin_min_V": 1e-5, "duration_s": 1e-3, "soc_end": 1e-6,
              "cell_temperature_spread_max_K": 1e-4, "soc_spread_end": 1e-6}
RELATIVE = ("energy_battery_Wh", "energy_load_Wh", "heat_generated_Wh", "heat_to_ambient_Wh", "charge_throughput_Ah")
#: The same cell must be named
EQUAL = ("hottest_cell", "first_limit_cell")

CELL = cell_section(capacity="2.5 Ah", initial_soc=0.7, voltage_min="3.0 V", voltage_max="4.2 V",
                    mass="0.045 kg", specific_heat="1000 J/kg/K",
                    ocv={"soc": [0.0, 0.2, 0.5, 0.8, 1.0], "voltage": [3.0, 3.5, 3.7, 3.95, 4.2],
                         "entropic": [-2e-4, 0.0, 1e-4, -1e-4, -2e-4]},
                    r0={"soc": [0.0, 1.0], "temperature": ["-20 degC", "25 degC"], "values": [[0.08, 0.06],
                                                                                               [0.03, 0.025]]},
                    rc=[{"resistance": "15 mohm", "time_constant": "40 s"}])
THERMAL = {"ambient_temperature": "25 degC", "sink_heat_capacity": "150 J/K", "cell_to_sink": "1.2 W/K",
           "sink_to_ambient": "0.4 W/K",
           "coolant": {"inlet_temperature": "22 degC", "flow_rate": "0.003 kg/s", "plate_conductance": "1.8 W/K"}}
PACK = {"series": 3, "parallel": 2, "model": "resolved", "layout": {"rows": 2, "columns": 3, "fill": "columns"},
        "spread": {"capacity": 0.02, "r0": 0.05, "rc": 0.05, "seed": 11},
        "thermal": {"neighbour_conductance": "0.2 W/K", "wall_to_ambient": "0.02 W/K", "coolant_order": "rows"},
        "cell": [{"cell": 4, "capacity_factor": 0.9, "tab_resistance": "3 mohm"}]}


def _power_seconds(seconds: int) -> list[dict]:
    rng = np.random.default_rng(5)
    power = 30.0 + 20.0 * np.sin(np.arange(seconds) / 19.0) + rng.normal(0.0, 4.0, seconds)
    power[200:230] = -10.0  # regeneration
    return [{"mode": "power", "value": f"{w:.2f} W", "duration": "1 s"} for w in power]


def _case(name: str) -> dict:
    th, pack = dict(THERMAL), {**PACK, "cell": list(PACK["cell"])}
    if name == "1 Hz power":
        segments = _power_seconds(600)
    elif name == "cccv":
        segments = [{"mode": "current", "value": "4 A", "duration": "10 min"},
                    {"mode": "cccv", "current": "-3 A", "voltage": "12.3 V", "cutoff_current": "0.4 A"}]
    elif name == "voltage limit":
        segments = [{"mode": "power", "value": "45 W", "duration": "2 h"}]
    elif name == "temperature limit":
        th.update(ambient_temperature="43 degC", coolant={**THERMAL["coolant"], "inlet_temperature": "43 degC"})
        pack["cell"] = [{"cell": 5, "cell_to_sink": 0.0, "plate_conductance": "0.01 W/K"}]
        pack["thermal"] = {**PACK["thermal"], "neighbour_conductance": "0.05 W/K"}
        segments = [{"mode": "current", "value": "6 A", "duration": "1 h"}]
    elif name == "soak, fan and heater":
        th.update(ambient_temperature="-12 degC", initial_cell_temperature="15 degC",
                  coolant={**THERMAL["coolant"], "inlet_temperature": "-8 degC"},
                  heater={"power": "8 W", "on_below": "0 degC", "off_above": "4 degC", "source": "pack"},
                  fan={"on_above": "30 degC", "off_below": "28 degC", "conductance": "1 W/K"})
        segments = [{"mode": "soak", "duration": "1 h"}, {"mode": "current", "value": "3 A", "duration": "40 min"}]
    else:
        raise KeyError(name)
    return scenario(cell=CELL, thermal=th, segments=segments, pack=pack,
                    limits={"cell_temperature_max": "45 degC"}, solver={"rtol": 1e-9, "output_interval": "1 s"})


CASES = ("1 Hz power", "cccv", "voltage limit", "temperature limit", "soak, fan and heater")


@pytest.fixture(scope="module")
def answers():
    loaded = [thermoelec.scenario_from_dict(_case(name)) for name in CASES]
    problems = [s.problem() for s in loaded]
    outcome = batch.solve_batch(problems, loaded[0].solver_options())  # one batch: cells x scenarios
    solo = [thermoelec.simulate(s.with_overrides({"solver.rtol": 1e-10})) for s in loaded]
    return problems, outcome, solo


@pytest.mark.parametrize("k", range(len(CASES)), ids=CASES)
def test_batched_resolved_packs_equal_tight_solo_runs(answers, k):
    problems, outcome, solo = answers
    assert outcome.status[k] == "ok"
    got = batch_metrics(problems[k], outcome, k)
    expected = solo[k].summary
    assert got["stop_reason"] == expected["stop_reason"]
    assert set(PACK_METRICS) <= set(got)
    for key, tol in TOLERANCES.items():
        assert got[key] == pytest.approx(expected[key], abs=tol), key
    for key in RELATIVE:
        assert got[key] == pytest.approx(expected[key], rel=1e-6, abs=1e-9), key
    for key in EQUAL:
        assert got[key] == expected[key], key
    if expected["current_share_max"] is not None:
        # the batch looks at every accepted step, the solo run at its output rows (1 s apart and at
        # every jump): the largest share agrees to what the rows resolve, 2e-3
        assert got["current_share_max"] == pytest.approx(expected["current_share_max"], rel=2e-3)


def test_the_cases_exercise_what_they_name(answers):
    _, _, solo = answers
    by_name = dict(zip(CASES, solo, strict=True))
    events = {name: [e["event"] for e in r.events] for name, r in by_name.items()}
    assert "cv_switch" in events["cccv"] and "cv_cutoff" in events["cccv"]
    limit = by_name["voltage limit"].summary
    assert limit["stop_reason"] == "voltage_min" and limit["first_limit_group"] == 2  # weak cell 4's group
    hot = by_name["temperature limit"].summary
    assert hot["stop_reason"] == "temperature_max" and hot["first_limit_cell"] == 5 == hot["hottest_cell"]
    soaked = by_name["soak, fan and heater"]
    assert "heater_switch" in [e["event"] for e in soaked.summary["soak"]["events"]] + events["soak, fan and heater"]
    power = by_name["1 Hz power"].summary
    assert power["cell_temperature_spread_max_K"] > 0.05 and power["soc_spread_end"] > 1e-3
