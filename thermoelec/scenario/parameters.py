"""The resolved parameters of a scenario: every key with its value, unit and where the value came from.

Owns :class:`Parameter` and :func:`resolved_parameters`, read by ``thermoelec
check`` and the HTML report: each key of the validated scenario (dotted, list
items counted from 1) with its value in the key's unit (the unit a bare number
takes in the file), and its source — ``given`` (the file or an included cell
file), ``override`` (``--set``, a case, a sweep) or ``default``. Keys left out
are listed only where their default is a value the engine uses (an initial
temperature taken from the ambient, say): the default is then shown resolved,
with what it follows. The units come from the schema's quantity types
(:class:`thermoelec.scenario.schema.Unit`).

Imports the schema and loading modules of :mod:`thermoelec.scenario`,
:mod:`thermoelec.inputs` and :mod:`thermoelec.engine`; never the layers above.
"""

from __future__ import annotations

import typing
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from typing import Any

from pydantic import BaseModel

from thermoelec.engine.problem import Problem
from thermoelec.inputs.units import from_si
from thermoelec.physics.loads import LOAD_MODES
from thermoelec.scenario.loading import Scenario
from thermoelec.scenario.overrides import split_path
from thermoelec.scenario.schema import LimitTableSpec, SegmentSpec, Unit

__all__ = ["DERIVED_DEFAULTS", "Parameter", "format_number", "resolved_parameters"]

#: Keys whose default is taken from elsewhere, and from what (their value is resolved from the problem).
DERIVED_DEFAULTS: dict[str, str] = {
    "thermal.ambient_temperature": "the profile file's first ambient",
    "thermal.initial_cell_temperature": "the ambient at t = 0",
    "thermal.initial_sink_temperature": "the initial cell temperature",
    "thermal.coolant.initial_temperature": "the sink's while a pump starts off, else the inlet",
    "derating.cutoff_current": "a twentieth of the cell's 1 C current",
}
#: Sections listed apart (the sweep's axes, the comparison's cases, the design options and the review question
#: are no parameters of one run).
_SKIPPED = ("sweep", "case", "option", "review")


@dataclass(frozen=True)
class Parameter:
    """One key of a resolved scenario.

    Attributes
    ----------
    key : str
        Dotted path, list items counted from 1 (``cell.rc[1].time_constant``).
    value : str
        The value in ``unit``, as text (numbers to 6 significant digits, lists in brackets).
    unit : str
        Unit of a bare number of this key in the file; empty for text and dimensionless keys.
    source : str
        ``given``, ``override`` or ``default`` (``default: <what it follows>`` for a derived default).
    """

    key: str
    value: str
    unit: str
    source: str


def format_number(value: float) -> str:
    """A number for a listing: 6 significant digits, no ``-0``."""
    return f"{value + 0.0:.6g}"


def _display(value: Any, unit: Unit | None) -> str:
    if isinstance(value, bool) or value is None:
        return "none" if value is None else str(value).lower()
    if isinstance(value, (int, float)):
        return format_number(from_si(value, unit.si, unit.display) if unit else float(value)) \
            if isinstance(value, float) else str(value)
    if isinstance(value, list):
        return "[" + ", ".join(_display(v, unit) for v in value) + "]"
    return str(value)


def _unit_of(model: type[BaseModel], name: str) -> Unit | None:
    """The :class:`Unit` in a field's type, through ``| None`` and unions."""
    info = model.model_fields[name]
    found = [m for m in info.metadata if isinstance(m, Unit)]
    if found:
        return found[0]
    pending = [info.annotation]
    while pending:
        kind = pending.pop()
        if typing.get_origin(kind) is typing.Annotated:
            found = [m for m in typing.get_args(kind)[1:] if isinstance(m, Unit)]
            if found:
                return found[0]
        pending += [arg for arg in typing.get_args(kind) if arg is not type(None)]
    return None


def _present(raw: Any, path: str) -> bool:
    """Whether the dotted path exists in the raw data."""
    node = raw
    for part in split_path(path):
        if isinstance(part, int):
            if not isinstance(node, list) or not 0 <= part < len(node):
                return False
        elif not isinstance(node, Mapping) or part not in node:
            return False
        node = node[part]
    return True


def _leaves(model: BaseModel, prefix: str) -> Iterator[tuple[str, Any, Unit | None]]:
    """``(dotted key, SI value, unit)`` of every field of a validated model, sections walked into."""
    for name in type(model).model_fields:
        if not prefix and name in _SKIPPED:
            continue
        key = f"{prefix}.{name}" if prefix else name
        value = getattr(model, name)
        if isinstance(value, LimitTableSpec) and value.value is not None:  # a constant limit: the key's own value
            yield key, value.value, _unit_of(type(value), "value")
        elif isinstance(value, BaseModel):
            yield from _leaves(value, key)
        elif isinstance(value, list) and value and isinstance(value[0], BaseModel):
            for i, item in enumerate(value, start=1):
                yield from _leaves(item, f"{key}[{i}]")
        elif name == "value" and isinstance(model, SegmentSpec) and model.mode in LOAD_MODES:
            unit = LOAD_MODES[model.mode].unit  # a segment's value takes its mode's unit
            yield key, value, Unit(unit, unit)
        else:
            yield key, value, _unit_of(type(model), name)


def _derived(problem: Problem, key: str) -> float | None:
    """The value the engine uses for a derived default [SI]."""
    values = {
        "thermal.ambient_temperature": problem.ambient_temperature,
        "thermal.initial_cell_temperature": problem.initial_cell_temperature,
        "thermal.initial_sink_temperature": problem.initial_sink_temperature,
    }
    if key == "derating.cutoff_current" and problem.derating is not None:
        return problem.derating.cutoff_current
    if key == "thermal.coolant.initial_temperature" and problem.thermal.coolant is not None:
        return problem.initial_coolant_temperature or problem.thermal.coolant.inlet_temperature
    return values.get(key)


def resolved_parameters(scenario: Scenario, problem: Problem | None = None) -> list[Parameter]:
    """Every key of the scenario with its value, unit and source, in the schema's order.

    Parameters
    ----------
    scenario : Scenario
        The validated scenario (its raw data says what was given, its overrides what was replaced).
    problem : Problem, optional
        Its engine problem, for the derived defaults (built from the scenario when not given).

    Returns
    -------
    list of Parameter
        Given and overridden keys, keys with a value by default, and derived defaults resolved;
        keys left out whose default is "none" (a feature not used) are not listed.
    """
    problem = problem if problem is not None else scenario.problem()
    overridden = {path for path, _ in scenario.overrides}
    rows = []
    for key, value, unit in _leaves(scenario.spec, ""):
        unit_text = unit.display if unit else ""
        if _present(scenario.raw, key):
            source = "override" if any(key == p or key.startswith(p + ".") or key.startswith(p + "[")
                                       for p in overridden) else "given"
            rows.append(Parameter(key, _display(value, unit), unit_text, source))
        elif key in DERIVED_DEFAULTS:
            derived = _derived(problem, key)
            if derived is not None:
                rows.append(Parameter(key, _display(derived, unit), unit_text, f"default: {DERIVED_DEFAULTS[key]}"))
        elif value is not None and not (isinstance(value, list) and not value):
            rows.append(Parameter(key, _display(value, unit), unit_text, "default"))
    return rows
