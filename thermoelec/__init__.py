"""thermoelec: thermal-electrical duty-cycle co-simulation of battery cells and packs.

>>> import thermoelec
>>> scenario = thermoelec.load_scenario("scenarios/drone_hot_afternoon.toml")  # doctest: +SKIP
>>> result = thermoelec.simulate(scenario)                                     # doctest: +SKIP
>>> result.summary["cell_temperature_max_degC"]                                # doctest: +SKIP
"""

__version__ = "0.1.0"

from .api import simulate, simulate_file
from .results import SimulationResult
from .scenario import Scenario, ScenarioError, load_scenario, scenario_from_dict
from .solve import SolverOptions

__all__ = [
    "Scenario",
    "ScenarioError",
    "SimulationResult",
    "SolverOptions",
    "__version__",
    "load_scenario",
    "scenario_from_dict",
    "simulate",
    "simulate_file",
]
