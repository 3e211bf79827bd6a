"""thermoelec: thermal-electrical duty-cycle co-simulation of battery cells and packs.

>>> import thermoelec
>>> scenario = thermoelec.load_scenario("scenarios/drone_delivery.toml")  # doctest: +SKIP
>>> result = thermoelec.simulate(scenario)                                 # doctest: +SKIP
>>> result.summary["cell_temperature_max_degC"]                            # doctest: +SKIP
>>> fig = thermoelec.plot_dashboard(result)                                # doctest: +SKIP
"""

from __future__ import annotations

from importlib import import_module
from typing import TYPE_CHECKING

from thermoelec.version import __version__

if TYPE_CHECKING:
    from thermoelec.analysis.results import SimulationResult
    from thermoelec.api import plot_dashboard, plot_energy, plot_operating_region, simulate, simulate_file
    from thermoelec.engine.options import SolverOptions
    from thermoelec.inputs import ScenarioError
    from thermoelec.scenario import Scenario, load_scenario, scenario_from_dict

#: Where each public name lives. They are imported when first used, so that ``import thermoelec``
#: (and every command, which imports the package first) pays only for what it touches: the
#: engine's numba kernels, pint and pydantic take seconds to load.
_PUBLIC = {
    "Scenario": "thermoelec.scenario",
    "ScenarioError": "thermoelec.inputs",
    "SimulationResult": "thermoelec.analysis.results",
    "SolverOptions": "thermoelec.engine.options",
    "load_scenario": "thermoelec.scenario",
    "plot_dashboard": "thermoelec.api",
    "plot_energy": "thermoelec.api",
    "plot_operating_region": "thermoelec.api",
    "scenario_from_dict": "thermoelec.scenario",
    "simulate": "thermoelec.api",
    "simulate_file": "thermoelec.api",
}


def __getattr__(name: str):
    module = _PUBLIC.get(name)
    if module is None:
        raise AttributeError(f"module 'thermoelec' has no attribute {name!r}")
    value = getattr(import_module(module), name)
    globals()[name] = value  # the next look-up is an ordinary one
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_PUBLIC))


__all__ = [
    "Scenario",
    "ScenarioError",
    "SimulationResult",
    "SolverOptions",
    "__version__",
    "load_scenario",
    "plot_dashboard",
    "plot_energy",
    "plot_operating_region",
    "scenario_from_dict",
    "simulate",
    "simulate_file",
]
