"""The scenario file format (TOML, format 1): schema, overrides, CSV series, loading, building the engine's problem."""

from thermoelec.inputs import ScenarioError, check_increasing, numeric_column, read_csv_frame, to_si
from thermoelec.scenario.build import build_problem
from thermoelec.scenario.cache import ScenarioCache
from thermoelec.scenario.loading import Scenario, load_scenario, scenario_from_dict
from thermoelec.scenario.overrides import apply_override, parse_value, split_path

__all__ = [
    "Scenario",
    "ScenarioCache",
    "ScenarioError",
    "apply_override",
    "build_problem",
    "check_increasing",
    "load_scenario",
    "numeric_column",
    "parse_value",
    "read_csv_frame",
    "scenario_from_dict",
    "split_path",
    "to_si",
]
