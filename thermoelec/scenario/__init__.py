"""The scenario file format (TOML, format 1): schema, units, overrides, CSV series, building the engine's problem."""

from thermoelec.scenario.spec import (
    Scenario,
    ScenarioError,
    apply_override,
    check_increasing,
    load_scenario,
    numeric_column,
    parse_value,
    read_csv_frame,
    scenario_from_dict,
    to_si,
)

__all__ = [
    "Scenario",
    "ScenarioError",
    "apply_override",
    "check_increasing",
    "load_scenario",
    "numeric_column",
    "parse_value",
    "read_csv_frame",
    "scenario_from_dict",
    "to_si",
]
