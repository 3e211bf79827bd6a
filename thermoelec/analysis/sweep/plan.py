"""The plan of a sweep: its dimensions, how they combine, each scenario's overrides.

Owns the reading of a ``[sweep]`` table and of ``--sweep`` items into a
:class:`SweepPlan`, a tuple of :class:`Dimension` crossed in order (C order, the
last innermost):

- an option group (``[[option.cooling]]``, :mod:`thermoelec.scenario.options`):
  one dimension named by the group, its values the option names, each option a
  set of overrides (every group the scenario declares, or ``options = [...]``);
- a grid key: a dotted path mapped to a list of values or a range
  (``{start, stop, num}`` or ``{start, stop, step}``, with units), one dimension
  named by the path;
- a zipped group (``[sweep.zip.NAME]``: keys whose lists are paired, one
  dimension ``NAME``); with ``mode = "zip"`` every listed key is paired in one
  dimension ``case``;
- the samples (``sample``): keys mapped to distributions
  (:mod:`thermoelec.analysis.sweep.sampling`), drawn jointly by one design,
  the same ``N`` points at every combination of the other dimensions.

An option's overrides apply first, then the other dimensions' values. The plan
is a pure function of the scenario and the items: :meth:`SweepPlan.fingerprint`
holds everything that defines it (every value, option, attribute, distribution,
seed and design), so a resumed sweep can check it is the same one. Imports from
scenario/ and analysis/sweep/sampling only; never from output/, fit/, the API or
the command line.
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from thermoelec.analysis.sweep.sampling import (
    SAMPLERS,
    Distribution,
    Sampling,
    distribution_from_text,
    parse_distribution,
)
from thermoelec.inputs.budgets import current, round_up
from thermoelec.scenario import Scenario, ScenarioError, parse_value, split_path
from thermoelec.scenario.options import OptionGroup, option_groups, split_quantity
from thermoelec.scenario.schema import key_kind

__all__ = ["RESERVED_KEYS", "Dimension", "SweepAxis", "SweepPlan", "check_values", "iter_combinations", "plan_sweep"]

#: Keys of ``[sweep]`` that are no dotted paths of the scenario.
RESERVED_KEYS = ("mode", "options", "zip", "samples", "seed", "sampling", "percentiles")
#: The seed of a sample design when none is given: every sweep is reproducible.
DEFAULT_SEED = 0
#: The percentiles a sampled sweep reports unless told others [%].
DEFAULT_PERCENTILES = (5.0, 50.0, 95.0)


@dataclass(frozen=True)
class SweepAxis:
    """One swept key: the scenario values, and coordinates in the values' unit (or labels)."""

    path: str
    values: tuple[Any, ...]
    coords: tuple[Any, ...]
    unit: str


def _axis(path: str, spec: Any, source: str) -> SweepAxis:
    key = f"sweep.{path}"
    if isinstance(spec, Mapping):
        unknown = set(spec) - {"start", "stop", "num", "step"}
        if unknown or "start" not in spec or "stop" not in spec or (("num" in spec) == ("step" in spec)):
            raise ScenarioError(source, key, "a range is {start, stop, num} or {start, stop, step}")
        start, stop = split_quantity(spec["start"]), split_quantity(spec["stop"])
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
            step = split_quantity(spec["step"])
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
        raise ScenarioError(source, key, "expected a non-empty list of values, a range {start, stop, num|step} "
                            "or a distribution {distribution = ...}")
    parts = [split_quantity(v) for v in spec]
    if all(p is not None for p in parts) and len({p[1] for p in parts}) == 1:
        return SweepAxis(path, tuple(spec), tuple(p[0] for p in parts), parts[0][1])
    return SweepAxis(path, tuple(spec), tuple(json.dumps(v) if not isinstance(v, str) else v for v in spec), "")


def _within(count: float, limit: int, source: str, key: str) -> None:
    """Refuse an axis with more values than the budget of scenarios, before making them."""
    if count > limit:
        raise ScenarioError(source, key, f"the range has {count:.3g} values, over the budget of {limit:.3g} "
                            f"scenarios: a coarser step, or raise the budget with --max-scenarios {round_up(count)}")


@dataclass(frozen=True)
class Dimension:
    """One dimension of a sweep: a grid key, a zipped group, an option group or the samples.

    Attributes
    ----------
    name : str
        The dimension's name in the dataset (the key's path, the zip group's name, the option
        group's name, ``sample``).
    kind : str
        ``"grid"``, ``"zip"``, ``"option"`` or ``"sample"``.
    keys : tuple of SweepAxis
        The keys it sets: one for a grid key, the paired ones of a zip.
    group : OptionGroup or None
        The options of an option dimension.
    sampling : Sampling or None
        The design of the sample dimension.
    """

    name: str
    kind: str
    keys: tuple[SweepAxis, ...] = ()
    group: OptionGroup | None = None
    sampling: Sampling | None = None

    @property
    def size(self) -> int:
        """Its number of values."""
        if self.group is not None:
            return len(self.group.options)
        if self.sampling is not None:
            return self.sampling.size
        return len(self.keys[0].values)

    @property
    def paths(self) -> tuple[str, ...]:
        """The dotted paths it sets (an option group's own overrides aside)."""
        if self.sampling is not None:
            return tuple(d.path for d in self.sampling.distributions)
        return tuple(a.path for a in self.keys)

    def overrides(self, i: int) -> dict[str, Any]:
        """The overrides of its value ``i``."""
        if self.group is not None:
            return dict(self.group.options[i].overrides)
        if self.sampling is not None:
            return self.sampling.overrides(i)
        return {a.path: a.values[i] for a in self.keys}

    def labels(self) -> list[Any]:
        """Its values as the dataset's coordinate: option names, a key's coordinates, sample numbers."""
        if self.group is not None:
            return list(self.group.names)
        if self.kind == "grid":
            return list(self.keys[0].coords)
        return list(range(self.size))

    def fingerprint(self) -> list:
        """Everything that defines it, as JSON-able data."""
        if self.group is not None:
            return [self.kind, self.name, [o.fingerprint() for o in self.group.options]]
        if self.sampling is not None:
            return [self.kind, self.name, self.sampling.fingerprint()]
        return [self.kind, self.name, [(a.path, [json.dumps(v, sort_keys=True) for v in a.values]) for a in self.keys]]


@dataclass(frozen=True)
class SweepPlan:
    """Dimensions crossed in order, and the overrides of every scenario (C order over :attr:`shape`)."""

    dims: tuple[Dimension, ...]
    mode: str = "grid"  # "grid" | "zip": how the listed keys of [sweep] combine

    @property
    def axes(self) -> tuple[SweepAxis, ...]:
        """Every listed key (grid and zip dimensions), in dimension order."""
        return tuple(a for d in self.dims for a in d.keys)

    @property
    def shape(self) -> tuple[int, ...]:
        return tuple(d.size for d in self.dims)

    @property
    def size(self) -> int:
        return math.prod(self.shape)

    @property
    def dim_names(self) -> tuple[str, ...]:
        return tuple(d.name for d in self.dims)

    @property
    def sampling(self) -> Sampling | None:
        """The sample design, None for a sweep without uncertain keys."""
        return next((d.sampling for d in self.dims if d.sampling is not None), None)

    @property
    def option_dims(self) -> tuple[Dimension, ...]:
        return tuple(d for d in self.dims if d.kind == "option")

    def dim(self, name: str) -> Dimension:
        """The dimension called ``name``."""
        return next(d for d in self.dims if d.name == name)

    def index(self, flat_index: int) -> tuple[int, ...]:
        """The index along each dimension of scenario ``flat_index``."""
        return tuple(int(i) for i in np.unravel_index(flat_index, self.shape)) if self.dims else ()

    def overrides(self, flat_index: int) -> dict[str, Any]:
        """Dotted-path overrides of scenario ``flat_index``: the options' first, then the other dimensions'."""
        index = self.index(flat_index)
        out: dict[str, Any] = {}
        for dim, i in zip(self.dims, index, strict=True):
            if dim.kind == "option":
                out.update(dim.overrides(i))
        for dim, i in zip(self.dims, index, strict=True):
            if dim.kind != "option":
                out.update(dim.overrides(i))
        return out

    def fingerprint(self) -> list:
        """Everything that defines the plan (every value, option with its overrides and attributes,
        distribution, sample count, seed and design), as JSON-able data: a resumed sweep compares it."""
        return [self.mode, [d.fingerprint() for d in self.dims]]

    def signature(self, scenario_digest: str) -> str:
        """A fingerprint of the scenario and the plan, to refuse resuming a different sweep."""
        text = json.dumps([scenario_digest, self.fingerprint()], sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()

    def without(self, names: Iterable[str]) -> SweepPlan:
        """The plan without the dimensions ``names`` (their keys then keep the scenario's values)."""
        drop = set(names)
        return SweepPlan(tuple(d for d in self.dims if d.name not in drop), self.mode)


def _cli_items(items: Sequence[str], source: str) -> dict[str, Any]:
    spec: dict[str, Any] = {}
    for item in items:
        key, sep, values = item.partition("=")
        if not sep or not key.strip() or not values.strip():
            raise ScenarioError("--sweep", item, "expected KEY=V1,V2,... or KEY=normal(MEAN, STD) (uniform, "
                                "triangular, lognormal, empirical, integers), e.g. "
                                "thermal.sink_to_ambient='0.5 W/K,1 W/K'")
        path = key.strip()
        dist = distribution_from_text(path, values.strip(), "--sweep")
        spec[path] = dist if dist is not None else [parse_value(v.strip()) for v in values.split(",")]
    return spec


def _groups_swept(scenario: Scenario, spec: dict[str, Any], chosen: Sequence[str] | None) -> list[OptionGroup]:
    groups = option_groups(scenario)
    names = list(chosen) if chosen is not None else spec.pop("options", list(groups))
    spec.pop("options", None)
    if not isinstance(names, list) or not all(isinstance(n, str) for n in names):
        raise ScenarioError(scenario.source, "sweep.options", "expected a list of option group names")
    for name in names:
        if name not in groups:
            raise ScenarioError(scenario.source, "sweep.options", f"no option group {name!r}; the scenario has "
                                + (", ".join(groups) or "none ([[option.NAME]] tables declare them)"))
    return [groups[n] for n in names]


def _zip_dims(spec: dict[str, Any], source: str) -> list[Dimension]:
    tables = spec.pop("zip", {})
    if not isinstance(tables, Mapping):
        raise ScenarioError(source, "sweep.zip", "expected tables [sweep.zip.NAME] of keys with paired lists")
    dims = []
    for name, table in tables.items():
        if not isinstance(table, Mapping) or not table:
            raise ScenarioError(source, f"sweep.zip.{name}", "expected keys mapped to lists of the same length")
        axes = tuple(_axis(path, value, source) for path, value in table.items())
        _same_lengths(axes, f"sweep.zip.{name}", source)
        dims.append(Dimension(name, "zip", axes))
    return dims


def _same_lengths(axes: Sequence[SweepAxis], key: str, source: str) -> None:
    if len({len(a.values) for a in axes}) > 1:
        raise ScenarioError(source, key, "paired (zip) keys need lists of the same length: "
                            + ", ".join(f"{a.path} has {len(a.values)}" for a in axes))


def _sampling(scenario: Scenario, spec: dict[str, Any], distributions: list[Distribution],
              samples: int | None, seed: int | None, method: str | None,
              percentiles: Sequence[float] | None) -> Sampling | None:
    source = scenario.source
    n = samples if samples is not None else spec.get("samples")
    if not distributions:
        if n is not None:
            raise ScenarioError("--samples" if samples is not None else source, "sweep.samples",
                                "nothing to sample: give a key a distribution, e.g. "
                                "\"cell.r0.value\" = {distribution = \"normal\", mean = \"20 mohm\", std = \"1 mohm\"}")
        return None
    where = "--samples" if samples is not None else source
    if n is None:
        raise ScenarioError(source, "sweep.samples", "the sweep has distributions: give the number of samples "
                            "(samples = N in [sweep], or --samples N)")
    if isinstance(n, bool) or not isinstance(n, int) or n < 1:
        raise ScenarioError(where, "sweep.samples", f"the number of samples must be a whole number >= 1, got {n!r}")
    method = method or spec.get("sampling", "latin_hypercube")
    if method not in SAMPLERS:
        raise ScenarioError(source, "sweep.sampling", f"unknown design {method!r}; valid: " + ", ".join(SAMPLERS))
    if method == "saltelli" and n & (n - 1):
        raise ScenarioError(where, "sweep.samples", f"the Saltelli design needs a power of 2 samples "
                            f"(Sobol' balance), got {n}: try {1 << max(1, round(math.log2(n)))}")
    seed = seed if seed is not None else spec.get("seed", DEFAULT_SEED)
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise ScenarioError(source, "sweep.seed", f"the seed must be a whole number >= 0, got {seed!r}")
    wanted = percentiles if percentiles is not None else spec.get("percentiles", DEFAULT_PERCENTILES)
    if not isinstance(wanted, (list, tuple)) or not all(isinstance(p, (int, float)) and not isinstance(p, bool)
                                                          and 0 <= p <= 100 for p in wanted):
        raise ScenarioError(source, "sweep.percentiles", "expected a list of percentiles within 0..100")
    merged = tuple(sorted({*DEFAULT_PERCENTILES, *(float(p) for p in wanted)}))
    for dist in distributions:
        kind = key_kind(split_path(dist.path))
        if kind == "text":
            raise ScenarioError(source, f"sweep.{dist.path}", "this key takes text (a name, a file, a choice): "
                                "it cannot take a distribution; give a list of values instead")
        if kind in ("table", "list"):
            raise ScenarioError(source, f"sweep.{dist.path}", f"this key takes a {kind}: a distribution needs a "
                                "key with one number")
    return Sampling(tuple(distributions), n, seed, method, merged)


def plan_sweep(scenario: Scenario, cli_items: Sequence[str] = (), samples: int | None = None,
               seed: int | None = None, method: str | None = None, options: Sequence[str] | None = None,
               percentiles: Sequence[float] | None = None, check: bool = True) -> SweepPlan:
    """The sweep of a scenario: its option groups, ``[sweep]`` table and ``--sweep`` items (which replace).

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    cli_items : sequence of str
        ``KEY=V1,V2,...`` or ``KEY=normal(MEAN, STD)`` items (a key given replaces the table's).
    samples, seed, method : optional
        The sample count, seed and design of uncertain keys (replace ``samples``, ``seed``, ``sampling``).
    options : sequence of str, optional
        The option groups swept (replaces ``options``; default: every group of the scenario).
    percentiles : sequence of float, optional
        Percentiles reported besides P5, P50 and P95 [%].
    check : bool
        Validate every swept value (:func:`check_values`); the command line does that itself,
        to keep the variants for its estimates.

    Raises
    ------
    ScenarioError
        For a malformed table or item, an unknown option group, a key swept twice or set both by an
        option and a dimension, zip lists of unequal lengths, a bad distribution or sample count, a
        distribution on a key that takes text, or a first scenario that does not validate.
    """
    source = scenario.source
    spec = dict(scenario.spec.sweep)
    mode = spec.pop("mode", "grid")
    if mode not in ("grid", "zip"):
        raise ScenarioError(source, "sweep.mode", f"{mode!r} is not allowed: 'grid' or 'zip'")
    groups = _groups_swept(scenario, spec, options)
    zips = _zip_dims(spec, source)
    if mode == "zip" and zips:
        raise ScenarioError(source, "sweep.zip", "mode = 'zip' pairs every key already; [sweep.zip.NAME] groups "
                            "go with mode = 'grid'")
    settings = {k: spec.pop(k) for k in ("samples", "seed", "sampling", "percentiles") if k in spec}
    spec.update(_cli_items(cli_items, source))
    distributions = [v if isinstance(v, Distribution) else parse_distribution(k, v, source)
                     for k, v in spec.items() if isinstance(v, Distribution)
                     or (isinstance(v, Mapping) and "distribution" in v)]
    listed = {k: v for k, v in spec.items() if not (isinstance(v, Distribution)
                                                    or (isinstance(v, Mapping) and "distribution" in v))}
    sampling = _sampling(scenario, settings, distributions, samples, seed, method, percentiles)
    axes = [_axis(path, value, source) for path, value in listed.items()]
    dims: list[Dimension] = [Dimension(g.name, "option", group=g) for g in groups]
    if mode == "zip" and axes:
        _same_lengths(axes, "sweep", source)
        dims.append(Dimension("case", "zip", tuple(axes)))
    else:
        dims += [Dimension(a.path, "grid", (a,)) for a in axes]
    dims += zips
    if sampling is not None:
        dims.append(Dimension("sample", "sample", sampling=sampling))
    if not dims:
        raise ScenarioError(source, "sweep", "nothing to sweep: add a [sweep] table, [[option.NAME]] groups or "
                            "--sweep KEY=V1,V2,...")
    _check_unique(dims, groups, source)
    plan = SweepPlan(tuple(dims), mode)
    if plan.size > current().scenarios:
        raise ScenarioError(source, "sweep", f"the sweep has {plan.size:.3g} scenarios ("
                            + " x ".join(str(d.size) for d in dims) + f"), over the budget of "
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
    recorded with the message and the sweep goes on. The options were checked when their
    group was read (:func:`thermoelec.scenario.options.option_groups`); of the samples, the
    first is checked with the first combination.

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
    variants = [scenario.with_overrides(first, origin="sweep: the first combination")]
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


def _check_unique(dims: Sequence[Dimension], groups: Sequence[OptionGroup], source: str) -> None:
    """No key swept twice, and no key both swept and set by an option (which would win is unclear)."""
    names = [d.name for d in dims]
    for name in names:
        if names.count(name) > 1:
            raise ScenarioError(source, f"sweep.{name}", f"{name!r} names two dimensions of the sweep")
    seen: dict[str, str] = {}
    for dim in dims:
        for path in dim.paths:
            if path in seen:
                raise ScenarioError(source, f"sweep.{path}", f"the key is swept twice ({seen[path]} and {dim.name})")
            seen[path] = dim.name
    for group in groups:
        for option in group.options:
            for path, _ in option.overrides:
                if path in seen:
                    raise ScenarioError(source, f"option.{group.name}", f"option {option.name!r} sets {path}, which "
                                        f"the sweep also sweeps ({seen[path]}): drop one")


def iter_combinations(plan: SweepPlan) -> Iterable[dict[str, Any]]:
    """Every scenario's overrides in order (for scripts)."""
    for i in range(plan.size):
        yield plan.overrides(i)
