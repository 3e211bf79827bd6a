"""The plan of a sweep: its axes, how they combine, each scenario's overrides.

Owns the reading of a ``[sweep]`` table and of ``--sweep KEY=V1,V2,...`` items
into a :class:`SweepPlan`: dotted paths mapped to lists of values or ranges
(``{start, stop, num}`` or ``{start, stop, step}``, with units); every
combination runs (``mode = "grid"``, one dimension per key) or the lists are
paired (``mode = "zip"``, one dimension ``case``). Imports from scenario/ only;
never from output/, fit/, the API or the command line.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from thermoelec.inputs.budgets import current, round_up
from thermoelec.scenario import Scenario, ScenarioError, parse_value

__all__ = ["SweepAxis", "SweepPlan", "check_values", "iter_combinations", "plan_sweep"]

_QUANTITY = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@dataclass(frozen=True)
class SweepAxis:
    """One swept key: the scenario values, and coordinates in the values' unit (or labels)."""

    path: str
    values: tuple[Any, ...]
    coords: tuple[Any, ...]
    unit: str


def _split_quantity(value: Any) -> tuple[float, str] | None:
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str):
        match = _QUANTITY.match(value)
        if match:
            return float(match.group(1)), match.group(2)
    return None


def _axis(path: str, spec: Any, source: str) -> SweepAxis:
    key = f"sweep.{path}"
    if isinstance(spec, Mapping):
        unknown = set(spec) - {"start", "stop", "num", "step"}
        if unknown or "start" not in spec or "stop" not in spec or (("num" in spec) == ("step" in spec)):
            raise ScenarioError(source, key, "a range is {start, stop, num} or {start, stop, step}")
        start, stop = _split_quantity(spec["start"]), _split_quantity(spec["stop"])
        if start is None or stop is None or start[1] != stop[1]:
            raise ScenarioError(source, key, "start and stop must be quantities in the same unit")
        unit = start[1]
        limit = current().scenarios
        if "num" in spec:
            num = spec["num"]
            if isinstance(num, bool) or not isinstance(num, int) or num < 1:
                raise ScenarioError(source, key, "num must be a whole number >= 1")
            _within(num, limit, source, key)
            numbers = np.linspace(start[0], stop[0], num)
        else:
            step = _split_quantity(spec["step"])
            if step is None or step[0] <= 0 or step[1] not in (unit, "", "K" if unit == "degC" else unit):
                raise ScenarioError(source, key, f"step must be a positive quantity in {unit or 'the same unit'}")
            if stop[0] < start[0]:
                raise ScenarioError(source, key, f"stop ({spec['stop']}) is below start ({spec['start']}): a range "
                                    "with a step runs upwards; swap them, or give num for a descending range")
            count = math.floor((stop[0] - start[0]) / step[0] + 1e-9) + 1
            _within(count, limit, source, key)
            numbers = start[0] + step[0] * np.arange(count)
        values = tuple(f"{v:.12g} {unit}".strip() if unit else float(v) for v in numbers)
        return SweepAxis(path, values, tuple(float(v) for v in numbers), unit)
    if not isinstance(spec, list) or not spec:
        raise ScenarioError(source, key, "expected a non-empty list of values or a range {start, stop, num|step}")
    parts = [_split_quantity(v) for v in spec]
    if all(p is not None for p in parts) and len({p[1] for p in parts}) == 1:
        return SweepAxis(path, tuple(spec), tuple(p[0] for p in parts), parts[0][1])
    return SweepAxis(path, tuple(spec), tuple(json.dumps(v) if not isinstance(v, str) else v for v in spec), "")


def _within(count: float, limit: int, source: str, key: str) -> None:
    """Refuse an axis with more values than the budget of scenarios, before making them."""
    if count > limit:
        raise ScenarioError(source, key, f"the range has {count:.3g} values, over the budget of {limit:.3g} "
                            f"scenarios: a coarser step, or raise the budget with --max-scenarios {round_up(count)}")


@dataclass(frozen=True)
class SweepPlan:
    """Axes, how they combine, and the overrides of every scenario in order."""

    axes: tuple[SweepAxis, ...]
    mode: str  # "grid" | "zip"

    @property
    def shape(self) -> tuple[int, ...]:
        return (len(self.axes[0].values),) if self.mode == "zip" else tuple(len(a.values) for a in self.axes)

    @property
    def size(self) -> int:
        return math.prod(self.shape)

    def overrides(self, flat_index: int) -> dict[str, Any]:
        """Dotted-path overrides of scenario ``flat_index`` (C order over :attr:`shape`)."""
        if self.mode == "zip":
            return {a.path: a.values[flat_index] for a in self.axes}
        index = np.unravel_index(flat_index, self.shape)
        return {a.path: a.values[i] for a, i in zip(self.axes, index, strict=True)}


def plan_sweep(scenario: Scenario, cli_items: Sequence[str] = (), check: bool = True) -> SweepPlan:
    """The sweep of a scenario: its ``[sweep]`` table, then ``--sweep KEY=V1,V2,...`` items (which replace).

    With ``check`` every swept value is validated (:func:`check_values`); the command
    line does that itself, to keep the variants for its estimates.
    """
    spec = dict(scenario.spec.sweep)
    mode = spec.pop("mode", "grid")
    if mode not in ("grid", "zip"):
        raise ScenarioError(scenario.source, "sweep.mode", f"{mode!r} is not allowed: 'grid' or 'zip'")
    for item in cli_items:
        key, sep, values = item.partition("=")
        if not sep or not key.strip() or not values.strip():
            raise ScenarioError("--sweep", item, "expected KEY=V1,V2,..., e.g. thermal.sink_to_ambient='0.5 W/K,1 W/K'")
        spec[key.strip()] = [parse_value(v.strip()) for v in values.split(",")]
    if not spec:
        raise ScenarioError(scenario.source, "sweep", "nothing to sweep: add a [sweep] table or --sweep KEY=V1,V2,...")
    axes = tuple(_axis(path, value, scenario.source) for path, value in spec.items())
    if mode == "zip" and len({len(a.values) for a in axes}) > 1:
        raise ScenarioError(scenario.source, "sweep", "mode = 'zip' needs lists of the same length: "
                            + ", ".join(f"{a.path} has {len(a.values)}" for a in axes))
    plan = SweepPlan(axes, mode)
    if plan.size > current().scenarios:
        raise ScenarioError(scenario.source, "sweep", f"the sweep has {plan.size:.3g} scenarios ("
                            + " x ".join(str(len(a.values)) for a in axes) + f"), over the budget of "
                            f"{current().scenarios:.3g}: sweep fewer values, or raise the budget with --max-scenarios "
                            f"{round_up(plan.size)}")
    if check:
        check_values(scenario, plan)
    return plan


def check_values(scenario: Scenario, plan: SweepPlan) -> list[Scenario]:
    """Every swept value on its own (the other keys at their first value) must be one its key can take.

    A key path that does not exist, or a value of the wrong kind or unit, refuses the
    sweep before anything runs. A value read well but out of range, or at odds with
    another key (``cell.initial_soc = 1.5``), only makes its scenarios invalid: they are
    recorded with the message and the sweep goes on.

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    plan : SweepPlan
        The plan.

    Returns
    -------
    list of Scenario
        The variants that validated, the first combination first.

    Raises
    ------
    ScenarioError
        Naming the swept key and its value.
    """
    first = plan.overrides(0)
    variants = []
    for axis in plan.axes:
        for value in axis.values:
            origin = f"sweep.{axis.path} = {value!r}"
            try:  # alone, so that an error is this value's; with the other keys' first values if it needs them
                variants.append(scenario.with_overrides({axis.path: value}, origin=origin))
            except ScenarioError as alone:
                try:
                    variants.append(scenario.with_overrides({**first, axis.path: value}, origin=origin))
                except ScenarioError as exc:
                    if alone.form and exc.form:
                        raise alone from None
    return variants


def iter_combinations(plan: SweepPlan) -> Iterable[dict[str, Any]]:
    """Every scenario's overrides in order (for scripts)."""
    for i in range(plan.size):
        yield plan.overrides(i)
