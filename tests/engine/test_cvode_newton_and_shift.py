"""The CVODE back end's two economies: RC voltages shifted by their zero-order-hold
response, and the diagonal Newton matrix where it converges fast.

Checks: the contraction bound against the two-node network's Jacobian written out
by hand (lumped-capacitance equations, Incropera et al., *Fundamentals of Heat and
Mass Transfer*, 7th ed., §5.2); the shift leaves every state as it is (it is an
exact change of variables); on a 1 Hz power profile the diagonal Newton matrix is
used and the answer agrees with scipy's LSODA (an independent integrator); on a
tightly coupled, stiff network the automatic choice falls back to the dense
matrix and agrees with a dense-only run.
"""

import numpy as np
import pytest

import thermoelec
from thermoelec.engine import layout as L
from thermoelec.engine import model as m
from thermoelec.engine.backends import DIAGONAL_CONTRACTION
from thermoelec.engine.driver import integrate_problem
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import pack_parameters

from ..helpers import rc_current_phase, scenario


def _two_node(**thermal):
    defaults = {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K",
                "cell_to_sink": "0.5 W/K", "sink_to_ambient": "0.5 W/K", "cell_to_ambient": "0.2 W/K"}
    defaults.update(thermal)
    data = scenario(thermal=defaults, segments=[{"mode": "rest", "duration": "60 s"}])
    return thermoelec.scenario_from_dict(data).problem()


@pytest.mark.parametrize("gamma", [0.1, 1.0, 30.0, 1e4])
def test_contraction_bound_of_the_two_node_network(gamma):
    problem = _two_node()
    p = pack_parameters(problem)
    kernels = m.Kernels(p, L.n_states(problem.n_rc))
    y = problem.initial_state()
    c_cell = 0.070 * 900.0  # mass x specific heat of the one cell of the helper [J/K]
    c_sink, g_cs, g_sa, g_ca = 200.0, 0.5, 0.5, 0.2
    # rows of the thermal block at rest: dTc/dt and dTs/dt, by hand
    cell_row = gamma * (g_cs / c_cell) / (1.0 + gamma * (g_cs + g_ca) / c_cell)
    sink_row = gamma * (g_cs / c_sink) / (1.0 + gamma * (g_cs + g_sa) / c_sink)
    expected = max(cell_row, sink_row)
    assert kernels.diagonal_newton_contraction(y, gamma) == pytest.approx(expected, rel=1e-5)


def test_the_rc_shift_is_an_exact_change_of_variables():
    problem, p = rc_current_phase()
    kernels = m.Kernels(p, L.n_states(problem.n_rc))
    y0 = problem.initial_state()
    y0[1] = 0.02
    w0, _ = kernels.shift_from(3.0, y0)
    assert w0[1] == 0.0
    np.testing.assert_array_equal(np.delete(w0, 1), np.delete(y0, 1))
    # constant current: the base is the exact RC response, so w stays zero with zero slope
    t = 3.0 + 17.0
    exact = 0.01 * 5.0 + (0.02 - 0.01 * 5.0) * np.exp(-17.0 / 20.0)  # R I + (v0 - R I) e^(-t/tau)
    assert kernels.unshift(t, w0)[1] == pytest.approx(exact, rel=1e-14)
    wdot = np.empty_like(w0)
    assert kernels.cvode_rhs(t, w0, wdot) == 0
    assert abs(wdot[1]) < 1e-15


def _one_hertz_power(seconds: int = 180, **thermal) -> dict:
    rng = np.random.default_rng(7)
    power = 40.0 + 30.0 * np.sin(np.arange(seconds) / 23.0) + rng.normal(0.0, 5.0, seconds)
    power[100:115] = -15.0  # regeneration
    cell = scenario()["cell"] | {
        "capacity": "3 Ah", "initial_soc": 0.9,
        "ocv": {"soc": [0.0, 0.5, 1.0], "voltage": [3.2, 3.7, 4.2], "entropic": [-1e-4, 0.0, -2e-4]},
        "rc": [{"resistance": "12 mohm", "time_constant": "25 s"}],
    }
    th = {"ambient_temperature": "20 degC", "sink_heat_capacity": "200 J/K", "cell_to_sink": "1 W/K",
          "sink_to_ambient": "0.5 W/K"} | thermal
    segments = [{"mode": "power", "value": f"{w:.3f} W", "duration": "1 s"} for w in power]
    return scenario(cell=cell, thermal=th, segments=segments, pack={"series": 4, "parallel": 2})


def test_diagonal_newton_on_a_one_hertz_profile_agrees_with_lsoda():
    problem = thermoelec.scenario_from_dict(_one_hertz_power()).problem()
    fast = integrate_problem(problem, SolverOptions(rtol=1e-9))
    assert fast.statistics["NumPhasesDiagonal"] == len(problem.segments)
    reference = integrate_problem(problem, SolverOptions(backend="scipy", rtol=1e-10))
    assert fast.status == reference.status == "ok"
    np.testing.assert_array_equal(fast.times, reference.times)
    tc = L.cell_temperature_index(problem.n_rc)
    np.testing.assert_allclose(fast.states[:, tc], reference.states[:, tc], atol=1e-6)
    np.testing.assert_allclose(fast.states[:, 0], reference.states[:, 0], atol=1e-9)
    np.testing.assert_allclose(fast.states[:, 1], reference.states[:, 1], atol=1e-8)


def test_a_stiff_network_falls_back_to_the_dense_newton_matrix():
    # a 0.5 J/K sink on 200 W/K: the sink follows the cell within milliseconds
    data = _one_hertz_power(120, sink_heat_capacity="0.5 J/K", cell_to_sink="200 W/K")
    problem = thermoelec.scenario_from_dict(data).problem()
    p = pack_parameters(problem)
    assert m.Kernels(p, L.n_states(problem.n_rc)).diagonal_newton_contraction(
        problem.initial_state(), 1.0) > DIAGONAL_CONTRACTION
    auto = integrate_problem(problem, SolverOptions(rtol=1e-8))
    dense = integrate_problem(problem, SolverOptions(rtol=1e-8, linear_solver="dense"))
    assert auto.statistics["NumPhasesDense"] == len(problem.segments)
    np.testing.assert_allclose(auto.states, dense.states, rtol=0, atol=1e-9)
