"""One mission end to end: scenario -> engine problem -> integration -> :class:`SimulationResult`.

Owns :func:`simulate` and :func:`simulate_file`, the orchestration every
analysis needs (a comparison's cases, a sweep's solo scenarios, a design
search's evaluations); :mod:`thermoelec.api` re-exports them as the public
entry points. Imports from scenario/, engine/ and analysis/ only; never from
output/, fit/, the API or the command line.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from thermoelec.analysis.interrupts import unswallowed_signals
from thermoelec.analysis.results import SimulationResult, build_result
from thermoelec.engine.driver import integrate_problem
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Problem
from thermoelec.scenario import Scenario, load_scenario, scenario_from_dict
from thermoelec.version import __version__

__all__ = ["simulate", "simulate_file"]


def simulate(scenario: Scenario | Problem | dict, options: SolverOptions | None = None,
             overrides: dict[str, Any] | None = None) -> SimulationResult:
    """Simulate one mission.

    Parameters
    ----------
    scenario : Scenario, Problem or dict
        A loaded scenario, an SI problem, or scenario data as a dict.
    options : SolverOptions, optional
        Integrator settings; default: the scenario's ``[solver]`` section.
    overrides : dict, optional
        Dotted-path replacements applied to a Scenario or dict first.

    Returns
    -------
    SimulationResult
        Time series, summary, status and solver counters.
    """
    metadata: dict[str, Any] = {"thermoelec_version": __version__}
    if isinstance(scenario, dict):
        scenario = scenario_from_dict(scenario, overrides=overrides)
    elif isinstance(scenario, Scenario) and overrides:
        scenario = scenario.with_overrides(overrides)
    if isinstance(scenario, Scenario):
        problem = scenario.problem()
        options = options or scenario.solver_options()
        metadata.update(scenario_name=scenario.name, scenario_file=scenario.source,
                        scenario_sha256=scenario.digest,
                        overrides=[f"{k}={v}" for k, v in scenario.overrides])
    else:
        problem = scenario
        options = options or SolverOptions()
    metadata.update(backend=options.backend, rtol=options.rtol, output_interval_s=options.output_interval)
    with unswallowed_signals():  # a signal CVODE's callback wrapper took for a failure ends the run
        trajectory = integrate_problem(problem, options)
    return build_result(problem, trajectory, options, metadata)


def simulate_file(path: str | Path, overrides: dict[str, Any] | None = None) -> SimulationResult:
    """Load a scenario file and simulate it.

    Parameters
    ----------
    path : str or Path
        The scenario file (TOML).
    overrides : dict, optional
        Dotted-path replacements applied after loading.
    """
    return simulate(load_scenario(path, overrides))
