"""The design review of a sweep over options: which pass, up to which ambient, with what margin, at what cost.

From one sweep whose plan crosses an option group with grid keys, per option:

- the highest value of the ``over`` key (the ambient, by default) at which it
  passes on every combination of the other keys (the hardest mission decides):
  along the key the last passing grid value and the first failing one bracket it,
  and the margin of the check that failed there is interpolated linearly to zero
  between them; ``refine`` runs the design search (:mod:`thermoelec.analysis.sweep.search`,
  Brent's method on the engine) on that margin inside the bracket instead;
- the margin at the requirement point (``temperature_margin_K >= 2 at
  thermal.ambient_temperature = 45 degC``), the least over the other keys, and
  whether the option meets the requirement (every scenario at the point passes its
  verdict and meets the margin);
- the energy to the load and to the auxiliaries on the hardest mission at the point;
- its attributes (cost, added mass, ...).

The options meeting the requirement are ranked by an attribute (the least first;
ties by the larger margin) and the first is the recommendation, stated in words.

Owns :class:`Requirement`, :func:`parse_requirement`, :func:`with_requirement_point`
and :func:`design_review` (an xarray Dataset over the options, written as
``review.nc`` and the tidy ``review.csv`` by :func:`write_review`). The figures and
the HTML design report are the output layer's (:mod:`thermoelec.output.review`).
Imports from scenario/ and analysis/ only.
"""

from __future__ import annotations

import json
import math
import os
import re
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.metrics import METRICS
from thermoelec.analysis.sweep.plan import Dimension, SweepAxis, SweepPlan
from thermoelec.analysis.sweep.search import Criterion, search_one
from thermoelec.analysis.verdict import LIMIT_CHECKS, PASS
from thermoelec.scenario import Scenario, ScenarioError, parse_value
from thermoelec.scenario.options import split_quantity

__all__ = ["Requirement", "design_review", "parse_requirement", "with_requirement_point", "write_review"]

_REQUIREMENT = re.compile(r"^\s*(?:(?P<pass>pass)|(?P<metric>[A-Za-z_][A-Za-z0-9_]*)\s*(?P<op>>=|<=)\s*"
                          r"(?P<value>[-+]?[0-9.eE+-]+))\s+at\s+(?P<where>.+?)\s*$")
#: The margin of each limit check, by name (the metric the highest passing value is interpolated on).
CHECK_MARGINS = {c.name: c.margin_key for c in LIMIT_CHECKS}


@dataclass(frozen=True)
class Requirement:
    """What an option must meet: pass its verdict, and optionally ``metric >= value``, at a point of the grid.

    Attributes
    ----------
    point : tuple of (str, Any)
        Swept keys and their values as the file writes them (``thermal.ambient_temperature``, ``"45 degC"``);
        every value of the keys not named counts (every mission).
    metric : str or None
        A key of :data:`METRICS` (a margin), None for the verdict alone.
    operator : str
        ``>=`` or ``<=``.
    value : float
        The bound, in the metric's unit.
    text : str
        The requirement as written.
    """

    point: tuple[tuple[str, Any], ...]
    metric: str | None
    operator: str
    value: float
    text: str

    def holds(self, metric_value: float) -> bool:
        """Whether a value of the metric meets the bound (True without a metric)."""
        if self.metric is None:
            return True
        return metric_value >= self.value if self.operator == ">=" else metric_value <= self.value

    def margin(self, metric_value: float) -> float:
        """How far a value is inside the bound, in the metric's unit (> 0 inside)."""
        return metric_value - self.value if self.operator == ">=" else self.value - metric_value


def parse_requirement(text: str, source: str = "--require") -> Requirement:
    """A requirement from text: ``pass at KEY = VALUE[, KEY = VALUE]`` or ``METRIC >= VALUE at KEY = VALUE``.

    Raises
    ------
    ScenarioError
        When the text does not parse or names a metric that is not one of :data:`METRICS`.
    """
    match = _REQUIREMENT.match(text)
    if not match:
        raise ScenarioError(source, text, "expected 'pass at KEY = VALUE' or 'METRIC >= VALUE at KEY = VALUE', e.g. "
                            "'temperature_margin_K >= 2 at thermal.ambient_temperature = 45 degC'")
    metric = match.group("metric")
    if metric is not None and metric not in METRICS:
        raise ScenarioError(source, text, f"unknown metric {metric!r}; a requirement takes one of: "
                            + ", ".join(METRICS))
    point = []
    for part in match.group("where").split(","):
        key, sep, value = part.partition("=")
        if not sep or not key.strip() or not value.strip():
            raise ScenarioError(source, text, f"expected KEY = VALUE after 'at', got {part.strip()!r}")
        point.append((key.strip(), parse_value(value.strip())))
    return Requirement(tuple(point), metric, match.group("op") or ">=",
                       float(match.group("value")) if metric else 0.0, text.strip())


def _in_axis_unit(axis: SweepAxis, value: Any, source: str, text: str) -> float:
    parts = split_quantity(value)
    if parts is None or (parts[1] and parts[1] != axis.unit):
        raise ScenarioError(source, text, f"the requirement's value of {axis.path} must be a number in "
                            f"{axis.unit or 'the unit of the key'} (as the sweep writes it)")
    return parts[0]


def with_requirement_point(plan: SweepPlan, requirement: Requirement, source: str = "--require") -> SweepPlan:
    """The plan with each value of the requirement's point added to its grid key where the grid lacks it.

    Raises
    ------
    ScenarioError
        When a key of the point is not a grid key of the plan.
    """
    dims = list(plan.dims)
    for path, value in requirement.point:
        k = next((i for i, d in enumerate(dims) if d.kind == "grid" and d.name == path), None)
        if k is None:
            raise ScenarioError(source, requirement.text, f"{path} is not a swept grid key: sweep it (a list or a "
                                "range in [sweep], or --sweep) to require a value of it")
        axis = dims[k].keys[0]
        x = _in_axis_unit(axis, value, source, requirement.text)
        if any(math.isclose(x, c, rel_tol=1e-12, abs_tol=1e-12) for c in axis.coords):
            continue
        coords = sorted([*axis.coords, x])
        values = tuple(f"{c:.12g} {axis.unit}".strip() if axis.unit else c for c in coords)
        dims[k] = replace(dims[k], keys=(SweepAxis(axis.path, values, tuple(coords), axis.unit),))
    return SweepPlan(tuple(dims), plan.mode)


def _first_failure(passed: np.ndarray) -> int:
    """Index of the first failing value along the key (len when none fails)."""
    failing = np.flatnonzero(~passed)
    return int(failing[0]) if failing.size else len(passed)


def _highest_passing(x: np.ndarray, passed: np.ndarray, failed: np.ndarray, margins: dict[str, np.ndarray],
                     stops: np.ndarray) -> tuple[float, str, str, tuple[float, float] | None, str | None]:
    """Along one line of the grid: the highest passing value, its status and words, the bracket, the check."""
    first = _first_failure(passed)
    if first == len(x):
        return float(x[-1]), "at_bound", "passes at every swept value", None, None
    if first == 0:
        return math.nan, "not_met", "fails at the lowest swept value", None, None
    check = next((c for c in str(failed[first]).split(",") if CHECK_MARGINS.get(c)), None)
    low, high = float(x[first - 1]), float(x[first])
    if check is None:
        return low, "grid", f"at the last passing grid value (check {failed[first]} has no margin to interpolate)", \
            (low, high), None
    m0, m1 = float(margins[check][first - 1]), float(margins[check][first])
    if not (math.isfinite(m0) and math.isfinite(m1)) or m0 <= 0 or m0 == m1:
        return low, "grid", "at the last passing grid value", (low, high), check
    if stops[first] == check:  # stopped at the limit: its margin there is 0, the crossing lies between
        return low, "bracketed", f"passes at {low:g}, fails at {high:g} where the run stopped on {check} " \
            "(the value passing for sure; refine to locate the crossing)", (low, high), check
    value = low + (high - low) * m0 / (m0 - m1) if m1 < 0 else high
    return float(min(value, high)), "interpolated", f"interpolated on the margin of {check}", (low, high), check


def _lines(ds, option_dim: str, over: str, option: int) -> list[dict[str, int]]:
    """Every combination of the dimensions other than the option's and ``over``, as index selections."""
    others = [d for d in ds["verdict"].dims if d not in (option_dim, over)]
    shape = [ds.sizes[d] for d in others]
    return [{option_dim: option, **dict(zip(others, idx, strict=True))} for idx in np.ndindex(*shape)] or \
        [{option_dim: option}]


def _option_row(ds, option_dim: str, over: str | None, index: int, requirement: Requirement | None
                ) -> dict[str, Any]:
    row: dict[str, Any] = {}
    x = ds[over].values.astype(float) if over else None
    best = (math.inf, None, None, None, None)
    for sel in _lines(ds, option_dim, over or "", index):
        line = ds.isel(sel)
        if over is None:
            break
        passed = line["verdict"].values == PASS
        margins = {c: line[k].values for c, k in CHECK_MARGINS.items() if k}
        found = _highest_passing(x, passed, line["failed_checks"].values, margins, line["stop_reason"].values)
        key = -math.inf if math.isnan(found[0]) else found[0]
        if key < best[0]:
            best = (key, *found[1:], sel)
            best_value = found[0]
    if over is not None:
        row.update(highest_passing=best_value, highest_passing_status=best[1], highest_passing_message=best[2],
                   bracket=best[3], limiting_check=best[4], hardest_line=best[5])
    if requirement is not None:
        sel = {option_dim: index}
        for path, value in requirement.point:
            coords = ds[path].values.astype(float)
            target = float(split_quantity(value)[0])
            sel[path] = int(np.argmin(np.abs(coords - target)))
        point = ds.isel(sel)
        passed = point["verdict"].values == PASS
        metric = requirement.metric or "temperature_margin_K"
        values = point[metric].values.astype(float)
        worst = int(np.nanargmin(values if requirement.operator == ">=" else -values)) \
            if np.isfinite(values).any() else 0
        flat = np.unravel_index(worst, values.shape) if values.ndim else ()
        hardest = point.isel(dict(zip(point[metric].dims, flat, strict=True))) if values.ndim else point
        ok = bool(passed.all()) and all(requirement.holds(v) for v in np.ravel(values) if math.isfinite(v)) \
            and bool(np.isfinite(values).all())
        row.update(margin_at_requirement=float(np.ravel(values)[worst]) if values.size else math.nan,
                   passes_at_requirement=bool(passed.all()), meets_requirement=ok,
                   energy_to_load_Wh=float(hardest["energy_to_load_Wh"]),
                   energy_auxiliary_Wh=float(hardest["energy_auxiliary_Wh"]),
                   hardest=", ".join(f"{d} = {hardest[d].values}" for d in point[metric].dims if d in hardest.coords))
    return row


def _refine(scenario: Scenario, plan: SweepPlan, option_dim: str, index: int, over: str, row: dict[str, Any],
            tolerance: float, greatest_line: dict[str, int]) -> dict[str, Any]:
    """The highest passing value refined by the design search inside its bracket, on the hardest line."""
    if row.get("bracket") is None or row.get("limiting_check") is None:
        return {"refined": row["highest_passing"], "refined_status": row["highest_passing_status"],
                "refined_message": "not refined: " + str(row["highest_passing_message"])}
    axis = plan.dim(over).keys[0]
    fixed: dict[str, Any] = dict(plan.dim(option_dim).overrides(index))
    for dim in plan.dims:
        if dim.name in (option_dim, over):
            continue
        fixed.update(dim.overrides(greatest_line[dim.name]))
    criterion = Criterion(CHECK_MARGINS[row["limiting_check"]], ">=", 0.0)
    low, high = row["bracket"]
    found = search_one(scenario, fixed, over, low, high, axis.unit, criterion, True, tolerance)
    return {"refined": found["value"], "refined_status": found["status"], "refined_message": found["message"]}


def design_review(scenario: Scenario, plan: SweepPlan, ds, requirement: Requirement | None = None,
                  group: str | None = None, over: str = "thermal.ambient_temperature", rank_by: str | None = None,
                  refine: bool = False, tolerance: float = 1e-3, workers: int | None = None):
    """The design-review answer of a sweep over an option group (see the module's description).

    Parameters
    ----------
    scenario : Scenario
        The sweep's base scenario (the refinement runs it).
    plan : SweepPlan
        The sweep's plan (with the option group and, for the highest passing value, the ``over`` key).
    ds : xarray.Dataset
        The sweep's dataset (:func:`thermoelec.analysis.sweep.sweep_dataset`).
    requirement : Requirement, optional
        What an option must meet; without one, no option is recommended.
    group : str, optional
        The option group compared (default: the plan's only one).
    over : str
        The key whose highest passing value is reported (a grid key of the plan; skipped if it is none).
    rank_by : str, optional
        The attribute that ranks the options meeting the requirement (the least first; default: the group's
        first attribute).
    refine : bool
        Refine each highest passing value by the design search in its bracket.
    tolerance : float
        The search tolerance [-], a fraction of the bracket.
    workers : int, optional
        Unused: the refinement runs one search per option in turn.

    Returns
    -------
    xarray.Dataset
        Over the options (the group's dimension, its attributes as coordinates): ``highest_passing``
        [the key's unit] with its status and message (and ``refined`` ones), ``margin_at_requirement``,
        ``meets_requirement``, ``energy_to_load_Wh``, ``energy_auxiliary_Wh``, ``rank`` (0 for an option
        that does not meet the requirement); attributes: the requirement, ``recommended`` and ``statement``.

    Raises
    ------
    ScenarioError
        For a plan without an option group (or with several and no ``group``), an unknown group or
        ranking attribute.
    """

    del workers
    groups = plan.option_dims
    if not groups:
        raise ScenarioError(scenario.source, "review", "a design review compares options: declare [[option.NAME]] "
                            "groups and sweep them")
    if group is None:
        if len(groups) > 1:
            raise ScenarioError(scenario.source, "review.group", "several option groups are swept: name the one "
                                "the review compares (review.group or --review-group)")
        dim: Dimension = groups[0]
    else:
        dim = next((d for d in groups if d.name == group), None)
        if dim is None:
            raise ScenarioError(scenario.source, "review.group", f"no swept option group {group!r}; swept: "
                                + ", ".join(d.name for d in groups))
    options = dim.group
    attributes = options.attribute_names
    rank_by = rank_by or (attributes[0] if attributes else None)
    if rank_by is not None and rank_by not in attributes:
        raise ScenarioError(scenario.source, "review.rank_by", f"no attribute {rank_by!r} in group {options.name!r}; "
                            "it has " + (", ".join(attributes) or "none"))
    over_key = over if any(d.kind == "grid" and d.name == over for d in plan.dims) else None
    # only what the review reads: selecting a line of 40 variables 10 000 times costs seconds
    needed = {"verdict", "failed_checks", "stop_reason", "status", "temperature_margin_K", "energy_to_load_Wh",
              "energy_auxiliary_Wh", *(k for k in CHECK_MARGINS.values() if k),
              *((requirement.metric,) if requirement is not None and requirement.metric else ())}
    full, ds = ds, ds[sorted(needed)]
    rows = []
    for i in range(len(options.options)):
        row = _option_row(ds, dim.name, over_key, i, requirement)
        if refine and over_key is not None:
            row.update(_refine(scenario, plan, dim.name, i, over_key, row, tolerance, row["hardest_line"]))
        rows.append(row)
    order = _ranking(options, rows, requirement, rank_by)
    return _review_dataset(full, dim, options, rows, order, requirement, over_key, rank_by, refine)


def _ranking(options, rows: list[dict[str, Any]], requirement: Requirement | None, rank_by: str | None) -> list[int]:
    """The options meeting the requirement, best first: the least ``rank_by``, then the larger margin."""
    if requirement is None:
        return []
    meeting = [i for i, r in enumerate(rows) if r["meets_requirement"]]

    def key(i: int) -> tuple[float, float]:
        cost = options.options[i].attribute(rank_by) if rank_by else 0.0
        return cost, -requirement.margin(rows[i]["margin_at_requirement"])

    return sorted(meeting, key=key)


def _statement(options, rows, order, requirement: Requirement | None, rank_by: str | None) -> tuple[str, str]:
    if requirement is None:
        return "", "no requirement given: nothing is recommended (give --require or [review] requirement)"
    if not order:
        margins = [r["margin_at_requirement"] for r in rows]
        best = int(np.nanargmax([requirement.margin(m) for m in margins])) if any(map(math.isfinite, margins)) else 0
        return "", (f"no option meets the requirement ({requirement.text}); the closest is "
                    f"{options.options[best].name!r} with {requirement.metric or 'temperature_margin_K'} = "
                    f"{margins[best]:.3g} on the hardest case")
    first = options.options[order[0]]
    by = f"the least {rank_by} ({first.attribute(rank_by):g} {options.unit(rank_by)})".replace(" )", ")") \
        if rank_by else "the first"
    others = len(order) - 1
    return first.name, (f"recommended: {first.name!r}, {by} of the {len(order)} option"
                        f"{'s' if len(order) > 1 else ''} meeting '{requirement.text}'"
                        + (f" ({others} other{'s' if others > 1 else ''} also meet it)" if others else ""))


def _review_dataset(ds, dim: Dimension, options, rows, order, requirement, over, rank_by, refine):
    import xarray as xr

    name = dim.name
    coords = {name: (name, np.array(options.names, dtype=object))}
    for attr in options.attribute_names:
        coords[f"{name}.{attr}"] = (name, np.array([o.attribute(attr) for o in options.options]),
                                    {"units": options.unit(attr) or "1"})
    data: dict[str, Any] = {}
    unit = ds[over].attrs.get("units", "") if over else ""
    if over:
        data["highest_passing"] = (name, np.array([r["highest_passing"] for r in rows], float),
                                   {"units": unit, "key": over,
                                    "description": f"highest {over} at which the option passes on every case"})
        data["highest_passing_status"] = (name, np.array([r["highest_passing_status"] for r in rows], dtype=object))
        data["highest_passing_message"] = (name, np.array([r["highest_passing_message"] for r in rows],
                                                          dtype=object))
        if refine:
            data["refined"] = (name, np.array([r["refined"] for r in rows], float),
                               {"units": unit, "description": "refined by the design search (Brent)"})
            data["refined_status"] = (name, np.array([r["refined_status"] for r in rows], dtype=object))
            data["refined_message"] = (name, np.array([r["refined_message"] for r in rows], dtype=object))
    if requirement is not None:
        metric = requirement.metric or "temperature_margin_K"
        data["margin_at_requirement"] = (name, np.array([r["margin_at_requirement"] for r in rows]),
                                         {"units": ds[metric].attrs.get("units", ""), "metric": metric})
        data["meets_requirement"] = (name, np.array([r["meets_requirement"] for r in rows]))
        for key in ("energy_to_load_Wh", "energy_auxiliary_Wh"):
            data[key] = (name, np.array([r[key] for r in rows]), {"units": "Wh", "where": "hardest case at the "
                                                                  "requirement point"})
        data["hardest_case"] = (name, np.array([r["hardest"] for r in rows], dtype=object))
        rank = np.zeros(len(rows), dtype=int)
        for position, i in enumerate(order, start=1):
            rank[i] = position
        data["rank"] = (name, rank, {"description": f"among the options meeting the requirement, by {rank_by} "
                                                    "(the least first); 0: does not meet it"})
    recommended, statement = _statement(options, rows, order, requirement, rank_by)
    review = xr.Dataset(data, coords=coords)
    review.attrs.update(group=name, over=over or "", requirement=requirement.text if requirement else "",
                        rank_by=rank_by or "", recommended=recommended, statement=statement,
                        option_group=ds.attrs.get(f"option_group.{name}", "{}"),
                        scenario_file=ds.attrs.get("scenario_file", ""),
                        scenario_sha256=ds.attrs.get("scenario_sha256", ""),
                        thermoelec_version=ds.attrs.get("thermoelec_version", ""))
    return review


def review_table(review):
    """One row per option (a pandas DataFrame, as ``review.csv`` holds it): name, attributes with units, the
    highest passing value, margin, meets, rank, energies."""
    import pandas as pd

    name = review.attrs["group"]
    columns: dict[str, Any] = {"option": review[name].values}
    for coord in review.coords:
        if coord != name:
            columns[f"{coord.split('.', 1)[1]} [{review[coord].attrs.get('units', '')}]"] = review[coord].values
    for var in review.data_vars:
        unit = review[var].attrs.get("units", "")
        columns[f"{var} [{unit}]" if unit else var] = review[var].values
    return pd.DataFrame(columns)


def write_review(review, out: Path) -> list[Path]:
    """Write ``review.nc`` and ``review.csv`` (:func:`review_table`), each atomically."""
    out.mkdir(parents=True, exist_ok=True)
    path, table = out / "review.nc", out / "review.csv"
    tmp, tmp_table = out / ".review.nc.tmp", out / ".review.csv.tmp"
    review.to_netcdf(tmp)
    review_table(review).to_csv(tmp_table, index=False, float_format="%.9g")
    os.replace(tmp, path)
    os.replace(tmp_table, table)
    return [path, table]


def review_json(review) -> str:
    """The review as JSON text (for the report and scripts)."""
    frame = review_table(review)
    return json.dumps({"statement": review.attrs["statement"], "recommended": review.attrs["recommended"],
                       "requirement": review.attrs["requirement"], "rows": json.loads(frame.to_json(orient="records"))},
                      indent=2)
