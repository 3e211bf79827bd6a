"""A variant validates only what its overrides touch, and gets the specification a full validation gives.

:meth:`Scenario.with_overrides` hands pydantic the base scenario's validated
tables off the overrides' paths (:func:`thermoelec.scenario.loading._reusing`).
The reference is pydantic validating the whole overridden data afresh
(``ScenarioSpec.model_validate``), as a scenario file is read: the two must be
equal, table by table, for overrides at every depth (a top-level quantity, a key
in a nested table, a list item, a table created by the override, a key whose
table reshapes its contents before validation), and a variant's errors must name
the same key as before.
"""

from __future__ import annotations

import copy
from pathlib import Path

import pytest
from pydantic import ValidationError

import thermoelec
from thermoelec.scenario import ScenarioError, apply_override
from thermoelec.scenario.loading import names_files
from thermoelec.scenario.schema import ScenarioSpec

SCENARIOS = Path(__file__).resolve().parents[2] / "scenarios"

#: Overrides a sweep sets, each with a value the demo files do not hold.
OVERRIDES = [
    {"thermal.ambient_temperature": "12 degC"},
    {"cell.initial_soc": 0.73},
    {"thermal.cell_to_sink": "2.2 W/K", "cell.initial_soc": 0.6, "profile.scale": 1.15},
    # the RC pair hands its activation energy to its resistance table before validation
    {"cell.rc[1].activation_energy": "41 kJ/mol"},
    {"cell.rc[1].resistance": "11 mohm"},
    {"profile.segment[1].name": "first leg", "profile.repeat": 2},
    {"thermal.radiation": {"emissivity": 0.8, "area": "0.05 m^2"}},
    {"solver.rtol": 1e-7},
    {"pack.parallel": 7},
]


def full_validation(scenario: thermoelec.Scenario, overrides: dict) -> ScenarioSpec:
    data = copy.deepcopy(scenario.raw)
    for path, value in overrides.items():
        apply_override(data, path, value)
    return ScenarioSpec.model_validate(data)


@pytest.mark.parametrize("name", ["drone_delivery.toml", "robot_cooling.toml", "cargo_robot_pack.toml"])
def test_a_variant_equals_the_scenario_validated_whole(name):
    base = thermoelec.load_scenario(SCENARIOS / name).for_variants()
    for overrides in OVERRIDES:
        try:
            expected = full_validation(base, overrides)
        except ValidationError:  # a value this scenario does not take (a resolved pack's layout): refused either way
            with pytest.raises(ScenarioError):
                base.with_overrides(overrides)
            continue
        variant = base.with_overrides(overrides)
        for section in ScenarioSpec.model_fields:
            assert getattr(variant.spec, section) == getattr(expected, section), (name, overrides, section)
        assert variant.spec != base.spec
    untouched = base.with_overrides({"thermal.ambient_temperature": "12 degC"})
    assert untouched.spec.cell is base.spec.cell  # reused, not validated again
    # a variant of a variant: its raw data is the base's with both overrides, and the base's is unchanged
    twice = untouched.with_overrides({"cell.rc[1].activation_energy": "41 kJ/mol"})
    assert twice.spec == full_validation(base, {"thermal.ambient_temperature": "12 degC",
                                                "cell.rc[1].activation_energy": "41 kJ/mol"})
    assert base.spec == thermoelec.load_scenario(SCENARIOS / name).for_variants().spec


def test_an_rc_pairs_activation_energy_reaches_its_resistance_table():
    # the RC pair's before-validator copies its activation_energy into a resistance table: the table is
    # validated again with the pair, not taken from the base
    table = {"soc": [0.0, 1.0], "values": [["9 mohm", "7 mohm"]]}
    base = thermoelec.load_scenario(SCENARIOS / "drone_delivery.toml").for_variants() \
        .with_overrides({"cell.rc[1].resistance": table})
    variant = base.with_overrides({"cell.rc[1].activation_energy": "41 kJ/mol"})
    assert variant.spec.cell.rc[0].resistance.activation_energy == pytest.approx(41e3)
    assert variant.spec == full_validation(base, {"cell.rc[1].activation_energy": "41 kJ/mol"})


def test_a_variants_bad_value_names_its_key_as_before():
    base = thermoelec.load_scenario(SCENARIOS / "drone_delivery.toml").for_variants()
    for path, value in [("thermal.cell_to_sink", "-1 W/K"), ("cell.rc[1].time_constant", "2 V"),
                        ("cell.initial_soc", 1.7)]:
        with pytest.raises(ScenarioError) as caught:
            base.with_overrides({path: value})
        assert path.split("[")[0].split(".")[-1] in str(caught.value) or path in str(caught.value), caught.value


@pytest.mark.parametrize(("path", "names"), [
    ("profile.scale", False), ("profile.repeat", False), ("profile.segment[2].value", False),
    ("thermal.ambient_temperature", False), ("cell.initial_soc", False),
    ("profile", True), ("profile.segment", True), ("profile.segment[2]", True), ("profile.segment[2].file", True),
    ("thermal", True), ("thermal.ambient_profile", True), ("include", True)])
def test_only_an_override_that_can_name_a_file_has_the_files_checked_again(path, names):
    # the keys that name CSV files: thermal.ambient_profile and a segment's file (SCENARIO-FORMAT), or a table
    # holding them; a variant of any other key reads the files its base read
    assert names_files(path) is names
