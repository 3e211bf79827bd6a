"""Design options: the ``[[option.GROUP]]`` tables of a scenario read into named options with their attributes.

A scenario may declare option groups (``[[option.cooling]]``, ``[[option.layout]]``),
each a list of named options; an option is a set of overrides by dotted path (as a
``[[case]]`` table has) plus free numeric attributes (``cost``, ``added_mass``:
anything with a number, with or without a unit). A sweep crosses a group as one
axis (:mod:`thermoelec.analysis.sweep.plan`), the compare command runs a group's
options side by side (:mod:`thermoelec.analysis.compare`), the design review ranks
them by an attribute (:mod:`thermoelec.analysis.sweep.review`).

Owns :class:`Option`, :class:`OptionGroup` and :func:`option_groups`. Every problem
is a :class:`~thermoelec.inputs.errors.ScenarioError` naming the option's key
(``option.cooling[2].attributes.cost``): two options of one name, an attribute
without a number or in units that do not convert, an attribute missing from an
option of its group, an override naming an unknown key.

Imports the loading module of :mod:`thermoelec.scenario` and :mod:`thermoelec.inputs`;
never the layers above.
"""

from __future__ import annotations

import json
import re
from dataclasses import dataclass
from typing import Any

from thermoelec.inputs.errors import ScenarioError
from thermoelec.inputs.units import to_si
from thermoelec.scenario.loading import Scenario

__all__ = ["Attribute", "Option", "OptionGroup", "option_groups", "split_quantity"]

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def split_quantity(value: Any) -> tuple[float, str] | None:
    """``"12 EUR"`` -> ``(12.0, "EUR")``, ``3`` -> ``(3.0, "")``; None for anything without a leading number."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str):
        match = _NUMBER.match(value)
        if match:
            return float(match.group(1)), match.group(2)
    return None


@dataclass(frozen=True)
class Attribute:
    """One attribute of an option: its name, value and unit (the group's unit for that attribute)."""

    name: str
    value: float
    unit: str


@dataclass(frozen=True)
class Option:
    """One design option: its name, description, dotted-path overrides and attributes."""

    name: str
    description: str
    overrides: tuple[tuple[str, Any], ...]
    attributes: tuple[Attribute, ...]

    def attribute(self, name: str) -> float:
        """The value of attribute ``name`` in the group's unit."""
        return next(a.value for a in self.attributes if a.name == name)

    def fingerprint(self) -> list:
        """Everything that defines the option, as JSON-able data (for a sweep's resume identity)."""
        return [self.name, self.description, [[k, json.dumps(v, sort_keys=True)] for k, v in self.overrides],
                [[a.name, repr(a.value), a.unit] for a in self.attributes]]


@dataclass(frozen=True)
class OptionGroup:
    """A named group of options (one axis of a sweep), its attributes in one unit each."""

    name: str
    options: tuple[Option, ...]

    @property
    def names(self) -> tuple[str, ...]:
        """The options' names, in the file's order."""
        return tuple(o.name for o in self.options)

    @property
    def attribute_names(self) -> tuple[str, ...]:
        """The attributes every option of the group gives, in the first option's order."""
        return tuple(a.name for a in self.options[0].attributes) if self.options else ()

    def unit(self, attribute: str) -> str:
        """The unit of an attribute in this group."""
        return next(a.unit for a in self.options[0].attributes if a.name == attribute)

    def option(self, name: str) -> Option:
        """The option called ``name``."""
        return next(o for o in self.options if o.name == name)


def _convert(value: float, unit: str, target: str) -> float | None:
    """``value [unit]`` in ``target`` with pint, or None where pint does not know them or they do not convert."""
    if unit == target:
        return value
    if not unit or not target:
        return None
    try:
        return to_si(f"{value!r} {unit}", unit, target)
    except ValueError:
        return None


def _group(scenario: Scenario, name: str, specs: list) -> OptionGroup:
    source = scenario.source
    if not specs:
        raise ScenarioError(source, f"option.{name}", "the group has no options: give [[option.NAME]] tables")
    seen: dict[str, int] = {}
    options = []
    units: dict[str, str] = {}
    for i, spec in enumerate(specs, start=1):
        key = f"option.{name}[{i}]"
        if spec.name in seen:
            raise ScenarioError(source, f"{key}.name", f"two options of group {name!r} are named {spec.name!r} "
                                f"(items {seen[spec.name]} and {i}); names must differ")
        seen[spec.name] = i
        attributes = []
        for attr, raw in spec.attributes.items():
            parts = split_quantity(raw)
            if parts is None:
                raise ScenarioError(source, f"{key}.attributes.{attr}", f"{raw!r} has no number: an attribute is "
                                    "a number with or without a unit, like \"25 EUR\" or \"0.3 kg\"")
            value, unit = parts
            if attr not in units:
                units[attr] = unit
            converted = _convert(value, unit, units[attr])
            if converted is None:
                raise ScenarioError(source, f"{key}.attributes.{attr}", f"{raw!r} is not in the unit of the group's "
                                    f"first option ({units[attr] or 'a bare number'}), nor converts to it")
            attributes.append(Attribute(attr, converted, units[attr]))
        options.append(Option(spec.name, spec.description, tuple((spec.model_extra or {}).items()),
                              tuple(attributes)))
    first = [a.name for a in options[0].attributes]
    for i, option in enumerate(options, start=1):
        names = [a.name for a in option.attributes]
        missing = [a for a in first if a not in names] or [a for a in names if a not in first]
        if missing:
            raise ScenarioError(source, f"option.{name}[{i}].attributes", f"option {option.name!r} lacks or adds "
                                f"attribute {missing[0]!r}: every option of a group gives the same attributes")
        # attributes in the first option's order, so that every option lists them alike
        option_attrs = {a.name: a for a in option.attributes}
        options[i - 1] = Option(option.name, option.description, option.overrides,
                                tuple(option_attrs[a] for a in first))
    for i, option in enumerate(options, start=1):
        try:
            scenario.with_overrides(dict(option.overrides))
        except ScenarioError as exc:
            raise ScenarioError(exc.file, f"option.{name}[{i}] ({option.name}): {exc.key}", exc.message,
                                exc.line) from None
    return OptionGroup(name, tuple(options))


def option_groups(scenario: Scenario) -> dict[str, OptionGroup]:
    """Every option group of a scenario, checked (names, attributes, overrides), in the file's order.

    Raises
    ------
    ScenarioError
        For two options of one name, an attribute without a number or in a unit that does not
        convert to the group's, an attribute missing from an option of its group, or an override
        that does not validate (an unknown key, a wrong value).
    """
    return {name: _group(scenario, name, list(specs)) for name, specs in scenario.spec.option.items()}
