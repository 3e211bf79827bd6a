"""The batched solver's plain path (:mod:`thermoelec.engine.plain`): when it is taken, and that it changes nothing.

Sources: the engine itself at rtol 1e-10 (solo CVODE, a different integrator
and a different event locator), with the tolerances the sweep asks of the batch
(1e-4 K, 1e-5 V, 1e-3 s), for each feature set the plain path serves; and the
batch's general kernel on the same problems, which the plain path must equal
to the last bit (the same physics functions in the same order, the same steps).
The feature sets it must not serve each send a batch down the general path.
"""

from __future__ import annotations

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis.metrics import batch_metrics
from thermoelec.engine import batch

from ..helpers import scenario
from .test_batch_phases import RELATIVE, TOLERANCES  # the sweep's tolerances for the batch against CVODE

CELL = {
    "capacity": "2.5 Ah", "voltage_max": "4.2 V", "voltage_min": "2.8 V", "mass": "0.045 kg",
    "specific_heat": "1000 J/kg/K", "initial_soc": 0.6,
    "ocv": {"soc": [0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0], "voltage": [3.0, 3.4, 3.58, 3.68, 3.84, 4.05, 4.2],
            "entropic": [-2e-4, -1e-4, 1e-4, 0.0, -1e-4, -2e-4, -2.5e-4]},
    "r0": {"soc": [0.0, 0.5, 1.0], "temperature": ["-10 degC", "25 degC", "45 degC"],
           "values": [[0.08, 0.06, 0.065], [0.03, 0.024, 0.025], [0.022, 0.018, 0.019]]},
    "rc": [{"resistance": "15 mohm", "time_constant": "40 s"}],
}
THERMAL = {"ambient_temperature": "25 degC", "sink_heat_capacity": "150 J/K", "cell_to_sink": "0.8 W/K",
           "sink_to_ambient": "0.3 W/K"}


def _pulses() -> list[dict]:
    """Two minutes of 1 s power segments, a discharge with regeneration bursts (the shape of a 1 Hz log)."""
    rng = np.random.default_rng(7)
    power = 14.0 + 5.0 * np.sin(np.arange(120) / 9.0) + rng.normal(0.0, 2.0, 120)
    power[40:46] = power[90:95] = -6.0
    return [{"mode": "power", "value": f"{w:.3f} W", "duration": "1 s"} for w in power]


def _data(name: str) -> dict:
    cell, th = dict(CELL), dict(THERMAL)
    pack: dict = {"series": 2, "parallel": 1}
    limits: dict = {"cell_temperature_max": "45 degC"}
    extra: dict = {}
    segments: list[dict] = [{"mode": "current", "value": "3 A", "duration": "10 min"},
                            {"mode": "rest", "duration": "5 min"}]
    # plain feature sets
    if name == "1 Hz power with regeneration":
        segments = _pulses()
    elif name == "current and rest":
        pass
    elif name == "resistance load":
        segments = [{"mode": "resistance", "value": "1.5 ohm", "duration": "20 min"}]
    elif name == "two RC pairs, cell to ambient":
        cell["rc"] = [{"resistance": "10 mohm", "time_constant": "8 s"},
                      {"resistance": "12 mohm", "capacitance": "4000 F"}]
        th["cell_to_ambient"] = "0.05 W/K"
    elif name == "no RC pair, interconnect, Arrhenius R0":
        cell.pop("rc")
        cell["r0"] = {"value": "25 mohm", "activation_energy": "20 kJ/mol"}
        pack["interconnect_resistance"] = "8 mohm"
        th["ambient_temperature"] = "5 degC"
    elif name == "end condition, then rest":
        segments = [{"mode": "power", "value": "18 W", "duration": "2 h", "voltage_below": "6.8 V"},
                    {"mode": "rest", "duration": "15 min"}, {"mode": "current", "value": "1 A", "duration": "5 min"}]
    elif name == "set-ups that recur":  # the root functions' set-up changes and comes back (batch's kept_row)
        pulses = _pulses()
        segments = [*pulses[:30], {"mode": "power", "value": "20 W", "duration": "1 h", "voltage_below": "7.2 V"},
                    {"mode": "rest", "duration": "2 min"}, *pulses[30:60],
                    {"mode": "current", "value": "2 A", "duration": "30 min", "voltage_below": "7.0 V"},
                    *pulses[60:90], {"mode": "rest", "duration": "1 min"}, *pulses[90:]]
    elif name == "voltage cutoff":  # a 3.3 V minimum stops it before the cells are empty
        cell["voltage_min"] = "3.3 V"
        segments = [{"mode": "power", "value": "25 W", "duration": "2 h"}]
    elif name == "temperature limit":
        th.update(ambient_temperature="38 degC", sink_to_ambient="0.02 W/K")
        segments = [{"mode": "current", "value": "6 A", "duration": "1 h"}]
    # feature sets the plain path leaves to the general kernel
    elif name == "fan":
        th["fan"] = {"on_above": "29 degC", "off_below": "27 degC", "conductance": "2 W/K"}
    elif name == "heater":
        th["heater"] = {"power": "10 W", "on_below": "0 degC", "off_above": "5 degC", "source": "pack"}
    elif name == "soak":
        segments = [{"mode": "soak", "duration": "1 h"}, *segments]
        th["initial_cell_temperature"] = "10 degC"
    elif name == "ambient profile":
        th.pop("ambient_temperature")
        th["ambient_profile"] = "ambient.csv"
    elif name == "coolant":
        th["coolant"] = {"inlet_temperature": "20 degC", "flow_rate": "0.01 kg/s", "plate_conductance": "2 W/K"}
    elif name == "convection correlation":
        th.pop("sink_to_ambient")
        th["convection"] = {"area": "0.02 m^2", "natural": "vertical_plate", "length": "0.1 m"}
    elif name == "radiation":
        th["radiation"] = {"emissivity": 0.8, "area": "0.02 m^2"}
    elif name == "derating":
        extra["derating"] = {"discharge_current": {"value": "2 A"}}
    elif name == "limit table":
        limits["discharge_current_max"] = {"value": "10 A"}
    elif name == "voltage held":
        segments = [*segments, {"mode": "voltage", "value": "7.7 V", "duration": "10 min"}]
    elif name == "cccv":
        segments = [*segments, {"mode": "cccv", "current": "-2.5 A", "voltage": "8.4 V", "cutoff_current": "0.25 A"}]
    elif name == "resolved pack":
        pack.update(model="resolved")
    else:
        raise KeyError(name)
    return scenario(cell=cell, thermal=th, segments=segments, pack=pack, limits=limits,
                    solver={"rtol": 1e-9, "output_interval": "1 s"}, **extra)


PLAIN = ("1 Hz power with regeneration", "current and rest", "resistance load", "two RC pairs, cell to ambient",
         "no RC pair, interconnect, Arrhenius R0", "end condition, then rest", "set-ups that recur", "voltage cutoff",
         "temperature limit")
GENERAL = ("fan", "heater", "soak", "ambient profile", "coolant", "convection correlation", "radiation", "derating",
           "limit table", "voltage held", "cccv", "resolved pack")


def _load(name: str, folder):
    (folder / "ambient.csv").write_text("time_s,ambient_temperature_degC\n0,5\n3600,35\n")
    return thermoelec.scenario_from_dict(_data(name), base_dir=folder)


def _solve(problems, options, monkeypatch, general: bool = False):
    """Solve the batch, on the general kernel when ``general`` (whatever the batch is)."""
    if general:
        monkeypatch.setattr(batch, "is_plain", lambda *args: False)
    return batch.solve_batch(problems, options)


@pytest.mark.parametrize("name", PLAIN)
def test_plain_feature_sets_take_the_plain_path_and_match_tight_solo_runs(name, tmp_path, monkeypatch):
    loaded = _load(name, tmp_path)
    problem = loaded.problem()
    # two scenarios of one batch: the second one hotter and fuller (a sweep's neighbour)
    other = loaded.with_overrides({"cell.initial_soc": 0.8}).problem()
    options = loaded.solver_options()
    fast = _solve([problem, other], options, monkeypatch)
    assert fast.kernel == "plain", f"{name}: the plain path was not taken"
    general = _solve([problem, other], options, monkeypatch, general=True)
    assert general.kernel == "general"
    # the same physics in the same order and the same steps: equal to the last bit
    np.testing.assert_array_equal(fast.states, general.states)
    np.testing.assert_array_equal(fast.extras, general.extras)
    assert fast.stop_reason == general.stop_reason and list(fast.duration) == list(general.duration)
    solo = thermoelec.simulate(loaded.with_overrides({"solver.rtol": 1e-10}))
    got = batch_metrics(problem, fast, 0)
    expected = solo.summary
    assert fast.status[0] == "ok"
    assert got["stop_reason"] == expected["stop_reason"]
    for key, tol in TOLERANCES.items():
        assert got[key] == pytest.approx(expected[key], abs=tol), key
    for key in RELATIVE:  # abs: the absolute tolerance of the energy integrals, 1e-3 J (a two-minute
        # pulse train hardly warms the sink: 1e-3 Wh to ambient)
        assert got[key] == pytest.approx(expected[key], rel=1e-6, abs=1e-3 / 3600.0), key


@pytest.mark.parametrize("name", GENERAL)
def test_other_feature_sets_take_the_general_kernel(name, tmp_path, monkeypatch):
    loaded = _load(name, tmp_path)
    plain_too = _load("current and rest", tmp_path)
    if name == "resolved pack":  # a batch has one state layout: the resolved pack alone
        problems = [loaded.problem()]
    else:  # one scenario with the feature sends the whole batch down the general path
        problems = [plain_too.problem(), loaded.problem()]
    assert _solve(problems, loaded.solver_options(), monkeypatch).kernel == "general", name


def test_the_stop_cases_stop_where_they_say(tmp_path):
    stops = {name: thermoelec.simulate(_load(name, tmp_path)).summary["stop_reason"]
             for name in ("voltage cutoff", "temperature limit", "end condition, then rest")}
    assert stops == {"voltage cutoff": "voltage_min", "temperature limit": "temperature_max",
                     "end condition, then rest": "end_of_profile"}


def test_a_later_batch_on_the_same_profile_walks_the_plan_made_for_the_first(tmp_path, monkeypatch):
    # a sweep's chunks are batches on one segment tuple: its plan is made once in the process
    # (engine.batch._PLANS), read-only, and a batch on it solves the very same numbers
    loaded = _load("1 Hz power with regeneration", tmp_path)
    first = [loaded.with_overrides({"cell.initial_soc": soc}).problem() for soc in (0.5, 0.7)]
    options = loaded.solver_options()
    made = []
    real = batch.plan_mission
    monkeypatch.setattr(batch, "_PLANS", {})
    monkeypatch.setattr(batch, "plan_mission", lambda problem: made.append(problem) or real(problem))
    before = batch.solve_batch(first, options)
    again = batch.solve_batch([loaded.with_overrides({"cell.initial_soc": soc}).problem() for soc in (0.5, 0.7)],
                              options)
    assert len(made) == 1 and first[0].segments is made[0].segments
    np.testing.assert_array_equal(before.states, again.states)
    np.testing.assert_array_equal(before.extras, again.extras)
    plan = batch._PLANS[id(first[0].segments)][0][2]
    with pytest.raises(ValueError):
        plan.values[0, 0] = 1.0
    # other limits the plan reads (the cell's voltage_min): a plan of their own
    batch.solve_batch([loaded.with_overrides({"cell.voltage_min": "2.9 V"}).problem()], options)
    assert len(made) == 2
    # the kept plan is the one made afresh for another scenario on the profile
    fresh = real(first[1])
    for name in ("n_phases", "modes", "values", "durations", "setups", "setup_index"):
        np.testing.assert_array_equal(getattr(plan, name), getattr(fresh, name))


def test_a_step_taken_without_the_norm_is_one_the_norm_takes():
    # batch._clearly_within stands in for the error norm where only acceptance is asked: where it says
    # yes, the RMS norm of the scaled errors (Hairer, Norsett & Wanner, Solving ODEs I, 2nd ed., II.4,
    # Eq. 4.11) is at most 0.5; a NaN anywhere says no (the norm refuses the step)
    rng = np.random.default_rng(3)
    n = 20
    atol = np.full(n, 1e-6)
    said_yes = 0
    for _ in range(2000):
        y, out = rng.normal(0.0, 10.0, n), rng.normal(0.0, 10.0, n)
        err = rng.normal(0.0, 1.0, n) * 10.0 ** rng.uniform(-12.0, -3.0)
        within = batch._clearly_within(y, out, err, 1e-6, atol)
        norm = batch._error_norm(y, out, err, 1e-6, atol)
        assert not within or norm <= 0.5
        scale = atol + 1e-6 * np.maximum(np.abs(y), np.abs(out))
        assert within == bool(np.all(2.0 * np.abs(err) <= scale))
        said_yes += within
        err[rng.integers(n)] = np.nan
        assert not batch._clearly_within(y, out, err, 1e-6, atol)
    assert 100 < said_yes < 1900  # both answers were asked for
