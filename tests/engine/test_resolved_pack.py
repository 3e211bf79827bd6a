"""A resolved pack through the whole engine against references outside it.

Sources: the lumped pack of the same scenario (no spread, identical paths: the
resolved equations reduce to it term by term, checked at one state to 1e-13, so
the two runs differ by the integrator's error alone: 1e-9 relative in every series
at rtol 1e-13; rtol 1e-12 leaves 5e-9 in the heat to a coolant node, a flow times
the few kelvin between coolant and inlet, whose error CVODE weighs against the
absolute temperature, 290 K); Kirchhoff's laws for
two cells in parallel (the 2:1 split of VALIDATION.md §7) and an independent
``scipy.integrate.solve_ivp`` of the two cells' SoC equations; the steady profile
of a chain of cells cooled at one end, the tridiagonal system solved by numpy
(VALIDATION.md §7: 2, 8, 12, 14 K); the coolant's energy balance at steady state
(VALIDATION.md §7: 2.7778 K) and the heat balance of every node.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import solve_ivp

import thermoelec
from thermoelec.analysis.metrics import METRICS
from thermoelec.engine import layout as L
from thermoelec.engine import model as m
from thermoelec.engine.driver import integrate_problem
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import pack_parameters
from thermoelec.physics.constants import JOULES_PER_WH, ZERO_CELSIUS
from thermoelec.physics.loads import MODE_POWER

from ..helpers import cell_section, scenario, simulate

RICH_CELL = cell_section(
    capacity="3 Ah", initial_soc=0.8,
    ocv={"soc": [0.0, 0.5, 1.0], "voltage": [3.2, 3.7, 4.2], "entropic": [-1e-4, 0.0, -2e-4]},
    r0={"value": "20 mohm", "activation_energy": "25 kJ/mol"},
    rc=[{"resistance": "12 mohm", "time_constant": "25 s"}, {"resistance": "6 mohm", "capacitance": "20000 F"}])
RICH_THERMAL = {"ambient_temperature": "20 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "1 W/K",
                "sink_to_ambient": "0.5 W/K", "cell_to_ambient": "0.1 W/K",
                "fan": {"on_above": "21.5 degC", "off_below": "21 degC", "conductance": "1 W/K"},
                "coolant": {"inlet_temperature": "18 degC", "flow_rate": "0.005 kg/s", "plate_conductance": "2 W/K"}}
RICH_SEGMENTS = [{"mode": "power", "value": "150 W", "duration": "300 s"}, {"mode": "rest", "duration": "120 s"},
                 {"mode": "cccv", "current": "-3 A", "voltage": "7.75 V", "cutoff_current": "1.5 A",
                  "duration": "900 s"},
                 {"mode": "resistance", "value": "1 ohm", "duration": "100 s"}]


def _rich(model: str, **pack) -> dict:
    return scenario(cell=RICH_CELL, thermal=RICH_THERMAL, segments=RICH_SEGMENTS,
                    pack={"series": 2, "parallel": 3, "interconnect_resistance": "5 mohm", "model": model, **pack},
                    solver={"rtol": 1e-13, "output_interval": "5 s"})


#: The cold variant: a soak in the frost, a heater fed from the pack, free convection from a correlation,
#: radiation, a coolant node with its own heat capacity, an ambient that warms.
COLD_THERMAL = {"ambient_profile": "ambient.csv", "sink_heat_capacity": "300 J/K", "cell_to_sink": "1.5 W/K",
                "convection": {"natural": "vertical_plate", "length": "0.1 m", "area": "0.04 m^2"},
                "radiation": {"emissivity": 0.8, "area": "0.04 m^2"},
                "heater": {"power": "20 W", "on_below": "-2 degC", "off_above": "3 degC", "source": "pack"},
                "coolant": {"inlet_temperature": "5 degC", "flow_rate": "0.002 kg/s", "plate_conductance": "1 W/K",
                            "heat_capacity": "40 J/K"}}
COLD_SEGMENTS = [{"mode": "soak", "duration": "1 h", "ambient_temperature": "-10 degC"},
                 {"mode": "current", "value": "4 A", "duration": "900 s"}, {"mode": "rest", "duration": "300 s"}]


@pytest.fixture(scope="module", params=["warm", "cold"])
def lumped_and_resolved(request, tmp_path_factory):
    if request.param == "warm":
        return (simulate(_rich("lumped")), simulate(_rich("resolved", thermal={"neighbour_conductance": "0.4 W/K"})),
                {"fan_switch", "cv_switch"})
    folder = tmp_path_factory.mktemp("cold")
    (folder / "ambient.csv").write_text("time_s,ambient_temperature_degC\n0,-10\n1200,0\n")
    runs = []
    for model in ("lumped", "resolved"):
        data = _rich(model)
        data["thermal"], data["profile"]["segment"] = COLD_THERMAL, COLD_SEGMENTS
        data["cell"] = data["cell"] | {"initial_soc": 0.9}
        result = thermoelec.simulate(thermoelec.scenario_from_dict(data, base_dir=folder))
        assert result.status == "ok", result.message
        runs.append(result)
    return runs[0], runs[1], {"heater_switch"}


def test_without_spread_the_resolved_pack_equals_the_lumped_one_in_every_series(lumped_and_resolved):
    lumped, resolved, exercised = lumped_and_resolved
    assert [e["event"] for e in lumped.events] == [e["event"] for e in resolved.events]
    soaked = lumped.summary["soak"]["events"] if lumped.summary["soak"] else []
    assert exercised <= {e["event"] for e in [*lumped.events, *soaked]}
    np.testing.assert_allclose(resolved.series["time_s"], lumped.series["time_s"], rtol=0, atol=1e-6)
    for key, values in lumped.series.items():
        scale = max(np.abs(values).max(), 1e-300)
        assert np.abs(resolved.series[key] - values).max() <= 1e-9 * scale, key
    for key in METRICS:
        expected = lumped.summary[key]
        if expected is None:  # an efficiency of a direction that never flowed
            assert resolved.summary[key] is None, key
            continue
        assert resolved.summary[key] == pytest.approx(expected, rel=1e-9, abs=1e-12), key
    assert resolved.summary["verdict"] == lumped.summary["verdict"]
    # every cell follows the lumped cell
    for key, lumped_key in (("cells_temperature_degC", "cell_temperature_degC"), ("cells_soc", "soc")):
        each = resolved.cells[key]
        assert np.abs(each - lumped.series[lumped_key][:, None]).max() <= 1e-9 * np.abs(each).max(), key
    assert resolved.summary["cell_temperature_spread_max_K"] < 1e-9
    assert resolved.summary["soc_spread_end"] < 1e-12
    if lumped.summary["soak"] is not None:
        for key, value in lumped.summary["soak"].items():
            if isinstance(value, float):
                assert resolved.summary["soak"][key] == pytest.approx(value, rel=1e-9, abs=1e-12), key


def test_without_spread_the_right_hand_sides_agree_term_by_term():
    lumped = thermoelec.scenario_from_dict(_rich("lumped")).problem()
    resolved = thermoelec.scenario_from_dict(_rich("resolved")).problem()
    pl, pr = pack_parameters(lumped), pack_parameters(resolved)
    for p in (pl, pr):
        p[L.H_MODE], p[L.H_VALUE], p[L.H_FAN_ON] = MODE_POWER, 150.0, 1.0
    yl = lumped.initial_state()
    yl[1:3] = 0.01, 0.004  # RC voltages
    yl[L.cell_temperature_index(2)] += 3.0
    yl[L.quadrature_index(2):] = 0.0
    yr = resolved.initial_state()
    block = L.cell_block_size(2)
    for c in range(resolved.n_cells):
        yr[c * block: (c + 1) * block] = yl[:block]
    yr[L.sink_temperature_index(2, 6):] = yl[L.sink_temperature_index(2):]
    fl, fr = np.empty_like(yl), np.empty_like(yr)
    al, ar = np.empty(L.N_ALGEBRAICS), np.empty(L.N_ALGEBRAICS)
    m.evaluate_any(yl, pl, fl, al)
    m.evaluate_any(yr, pr, fr, ar)
    for c in range(resolved.n_cells):
        np.testing.assert_allclose(fr[c * block: (c + 1) * block], fl[:block], rtol=1e-13, atol=1e-18)
    np.testing.assert_allclose(fr[L.sink_temperature_index(2, 6):], fl[L.sink_temperature_index(2):], rtol=1e-13,
                               atol=1e-15)
    np.testing.assert_allclose(ar, al, rtol=1e-13, atol=1e-15)


def _two_in_parallel(segments, **cell):
    base = cell_section(r0={"value": "10 mohm"}, capacity="5 Ah", **cell)
    return scenario(cell=base, segments=segments, pack={"series": 1, "parallel": 2, "model": "resolved",
                                                        "cell": [{"cell": 2, "r0_factor": 2.0}]})


def test_two_cells_of_10_and_20_mohm_split_a_current_step_two_to_one():
    # VALIDATION.md §7: equal sources, 10 and 20 mOhm, 30 A -> 20 A and 10 A
    result = simulate(_two_in_parallel([{"mode": "current", "value": "30 A", "duration": "10 s"}]))
    first = result.cells["cells_current_A"][0]
    np.testing.assert_allclose(first, [20.0, 10.0], rtol=1e-12)
    assert result.cells["cells_voltage_V"][0] == pytest.approx([3.7 - 0.2] * 2, rel=1e-12)


def test_unequal_capacities_converge_as_an_independent_solve_ivp_says():
    # two cells of 5 and 2.5 Ah (same R0), linear OCV U = 3.0 + 1.2 z: a discharge pulls their SoCs
    # apart, the rest lets the stronger one recharge the weaker through the group's node
    q1, q2, r, a, b, current = 5 * 3600.0, 2.5 * 3600.0, 0.02, 3.0, 1.2, 5.0
    data = scenario(
        cell=cell_section(capacity="5 Ah", initial_soc=0.9, r0={"value": "20 mohm"},
                          ocv={"soc": [0.0, 1.0], "voltage": [a, a + b]}, voltage_min="2.0 V"),
        segments=[{"mode": "current", "value": f"{current} A", "duration": "1800 s"},
                  {"mode": "rest", "duration": "7200 s"}],
        pack={"series": 1, "parallel": 2, "model": "resolved", "cell": [{"cell": 2, "capacity_factor": 0.5}]},
        solver={"rtol": 1e-10, "output_interval": "60 s"})
    result = simulate(data)

    def rates(t, z):
        demand = current if t < 1800.0 else 0.0
        u = a + b * z
        v = (np.sum(u / r) - demand) / (2 / r)  # Kirchhoff's current law at the group's node
        return -(u - v) / r / np.array([q1, q2])

    times = result.series["time_s"]
    keep = np.concatenate([times[1:] != times[:-1], [True]])  # one row per time
    reference = solve_ivp(rates, (0.0, 9000.0), [0.9, 0.9], t_eval=times[keep], method="Radau", rtol=1e-12,
                          atol=1e-14, first_step=1e-3, max_step=60.0)
    np.testing.assert_allclose(result.cells["cells_soc"][keep], reference.y.T, rtol=0, atol=1e-6)
    spread = np.abs(np.diff(result.cells["cells_soc"], axis=1))[:, 0]
    assert spread[times == 1800.0].max() > 0.02 and spread[-1] < 1e-3 * spread[times == 1800.0].max()


def _chain(n: int, conductance: float, end_conductance: float) -> dict:
    # n cells in series, 10 A through 10 mOhm each: 1 W per cell; only cell 1 cooled (to ambient)
    cell = cell_section(r0={"value": "10 mohm"}, mass="0.01 kg", specific_heat="900 J/kg/K")
    thermal = {"ambient_temperature": "25 degC", "sink_heat_capacity": "100 J/K", "cell_to_sink": 0.0,
               "sink_to_ambient": "1 W/K"}
    pack = {"series": n, "parallel": 1, "model": "resolved",
            "layout": {"neighbours": [[k, k + 1] for k in range(1, n)], "wall": [1]},
            "thermal": {"neighbour_conductance": f"{conductance} W/K"},
            "cell": [{"cell": 1, "cell_to_ambient": f"{end_conductance} W/K"}]}
    return scenario(cell=cell, thermal=thermal, pack=pack,
                    segments=[{"mode": "current", "value": "10 A", "duration": "4 h"}],
                    solver={"rtol": 1e-10, "output_interval": "600 s"})


def test_a_chain_cooled_at_one_end_reaches_the_check_values():
    # VALIDATION.md §7: 4 cells of 1 W, 0.5 W/K between neighbours, 2 W/K from cell 1: 2, 8, 12, 14 K
    result = simulate(_chain(4, 0.5, 2.0))
    rise = result.cells["cells_temperature_degC"][-1] - 25.0
    np.testing.assert_allclose(rise, [2.0, 8.0, 12.0, 14.0], rtol=0, atol=1e-6)
    assert result.summary["hottest_cell"] == 4


def test_a_chain_reaches_the_steady_profile_of_its_tridiagonal_system():
    n, g, g0, q = 7, 0.8, 3.0, 1.0
    result = simulate(_chain(n, g, g0))
    # the steady conduction balance, (A T)_i = q_i: A tridiagonal with 2G (G at the ends) on the
    # diagonal, -G beside it, and the end conductance added to the cooled cell
    a = np.diag(np.full(n, 2 * g)) - np.diag(np.full(n - 1, g), 1) - np.diag(np.full(n - 1, g), -1)
    a[0, 0] = g + g0
    a[-1, -1] = g
    expected = np.linalg.solve(a, np.full(n, q))
    np.testing.assert_allclose(result.cells["cells_temperature_degC"][-1] - 25.0, expected, rtol=0, atol=1e-6)


def _coolant_rows(minutes: float, **thermal) -> dict:
    # 8 cells in series, 50 A through 10 mOhm: 25 W each, 200 W in all, into 0.02 kg/s at 3600 J/(kg K)
    cell = cell_section(r0={"value": "10 mohm"}, mass="0.01 kg", specific_heat="900 J/kg/K")
    th = {"ambient_temperature": "25 degC", "sink_heat_capacity": "100 J/K", "cell_to_sink": 0.0,
          "sink_to_ambient": 0.0,
          "coolant": {"inlet_temperature": "20 degC", "flow_rate": "0.02 kg/s", "specific_heat": "3600 J/kg/K",
                      "plate_conductance": "8 W/K"}} | thermal
    pack = {"series": 8, "parallel": 1, "model": "resolved", "layout": {"rows": 2, "columns": 4},
            "thermal": {"coolant_order": "rows", "neighbour_conductance": "0.2 W/K"}}
    return scenario(cell=cell, thermal=th, pack=pack,
                    segments=[{"mode": "current", "value": "50 A", "duration": f"{minutes} min"}],
                    solver={"rtol": 1e-10, "output_interval": "10 s"})


def test_coolant_along_the_rows_warms_by_the_heat_over_its_capacity_rate():
    result = simulate(_coolant_rows(20))
    outlet = result.series["coolant_temperature_degC"][-1]
    assert outlet - 20.0 == pytest.approx(200.0 / (0.02 * 3600.0), rel=1e-6)
    assert outlet - 20.0 == pytest.approx(2.7778, abs=5e-5)
    # each cell sees the coolant as it arrives: warmer along the serpentine (1-2-3-4, then 8-7-6-5)
    arriving = result.cells["cells_coolant_temperature_degC"][-1]
    order = [0, 1, 2, 3, 7, 6, 5, 4]
    assert np.all(np.diff(arriving[order]) > 0)
    assert result.summary["hottest_cell"] == 5  # the last on the path


def test_the_heat_balance_closes_over_every_cell_the_sink_and_the_coolant():
    data = _coolant_rows(10, cell_to_sink="1 W/K", sink_to_ambient="0.5 W/K", cell_to_ambient="0.3 W/K")
    data["pack"]["thermal"]["wall_to_ambient"] = "0.05 W/K"
    result = simulate(data)
    s = result.summary
    residual = s["heat_generated_Wh"] - s["heat_stored_Wh"] - s["heat_to_ambient_Wh"] - s["heat_to_coolant_Wh"]
    # the integrator's floor: two temperature endpoints per node (atol_T = rtol x 1 K) times its heat
    # capacity, and the atol of the three integrals (rtol x 1 kJ), at rtol 1e-10
    floor = (2 * 1e-10 * (8 * 9.0 + 100.0) + 3 * 1e-10 * 1e3) / JOULES_PER_WH
    assert abs(residual) <= floor
    assert s["heat_to_coolant_Wh"] > 0.5 * s["heat_generated_Wh"]


def _weak_group(**overrides) -> dict:
    cell = cell_section(capacity="2 Ah", initial_soc=0.5, voltage_min="3.0 V",
                        ocv={"soc": [0.0, 0.5, 1.0], "voltage": [2.9, 3.6, 4.1]}, r0={"value": "30 mohm"})
    pack = {"series": 3, "parallel": 2, "model": "resolved", "cell": [{"cell": 4, "capacity_factor": 0.8}]}
    pack.update(overrides)
    return scenario(cell=cell, pack=pack, segments=[{"mode": "power", "value": "60 W", "duration": "2 h"}],
                    solver={"rtol": 1e-9, "output_interval": "10 s"})


def test_a_stop_names_the_cell_that_reached_the_limit():
    weak = simulate(_weak_group())
    assert weak.stop_reason == "voltage_min"
    assert weak.summary["first_limit_group"] == 2  # the weak cell 4 is in group 2
    assert weak.events[-1]["cell"] in (3, 4) and weak.summary["first_limit_cell"] in (3, 4)
    lowest = weak.cells["cells_voltage_V"][-1]
    assert lowest[2] == pytest.approx(weak.summary["cell_voltage_min_V"], abs=1e-9)
    # a cell on a poor path to the sink is the first at the temperature limit
    hot = simulate(_weak_group(cell=[{"cell": 5, "cell_to_sink": 0.0}]),
                   **{"limits.cell_temperature_max": "27 degC", "thermal.cell_to_sink": "3 W/K"})
    assert hot.stop_reason == "temperature_max"
    assert hot.summary["first_limit_cell"] == 5 == hot.summary["hottest_cell"]
    assert hot.summary["cell_temperature_max_degC"] == pytest.approx(27.0, abs=1e-6)


@pytest.mark.parametrize("linear_solver", ["band", "dense"])
def test_the_newton_matrices_agree_with_krylov_steps(linear_solver):
    data = _rich("resolved", spread={"capacity": 0.05, "r0": 0.1, "rc": 0.1, "seed": 4},
                 thermal={"neighbour_conductance": "0.4 W/K"})
    data["solver"]["rtol"] = 1e-9
    problem = thermoelec.scenario_from_dict(data).problem()
    krylov = integrate_problem(problem, SolverOptions(rtol=1e-9))
    assert krylov.statistics["NumPhasesKrylov"] >= len(problem.segments)
    other = integrate_problem(problem, SolverOptions(rtol=1e-9, linear_solver=linear_solver))
    assert other.statistics[f"NumPhases{linear_solver.capitalize()}"] >= len(problem.segments)
    n = min(len(krylov.times), len(other.times))
    temperature = L.cell_state_indices(problem.n_rc, problem.n_cells)[1]
    np.testing.assert_allclose(other.states[:n, temperature], krylov.states[:n, temperature], rtol=0, atol=1e-6)


def test_a_five_percent_weak_cell_carries_less_current_and_runs_its_group_low():
    even = simulate(_weak_group(cell=[]))
    weak = simulate(_weak_group(cell=[{"cell": 4, "capacity_factor": 0.95}]))
    assert weak.summary["duration_s"] < even.summary["duration_s"]
    assert weak.summary["soc_spread_end"] > 1e-3 > even.summary["soc_spread_end"]
    assert even.summary["cell_temperature_spread_max_K"] < 1e-9
    late = weak.cells["cells_current_A"][-1]
    assert late[3] < late[2]  # in its group the weak cell takes less current as its OCV falls faster
    assert weak.summary["cell_temperature_max_degC"] + ZERO_CELSIUS > 0
