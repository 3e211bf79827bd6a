"""thermoelec: thermal-electrical duty-cycle co-simulation of battery cells and packs.

>>> import thermoelec
>>> scenario = thermoelec.load_scenario("scenarios/drone_delivery.toml")  # doctest: +SKIP
>>> result = thermoelec.simulate(scenario)                                 # doctest: +SKIP
>>> result.summary["cell_temperature_max_degC"]                            # doctest: +SKIP
>>> fig = thermoelec.plot_dashboard(result)                                # doctest: +SKIP
"""

from thermoelec.analysis.results import SimulationResult
from thermoelec.api import plot_dashboard, plot_energy, plot_operating_region, simulate, simulate_file
from thermoelec.engine.options import SolverOptions
from thermoelec.inputs import ScenarioError
from thermoelec.scenario import Scenario, load_scenario, scenario_from_dict
from thermoelec.version import __version__

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
