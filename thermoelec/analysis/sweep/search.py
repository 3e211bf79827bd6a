"""Design search: the least (or greatest) value of one key that meets a criterion on a metric.

Owns :class:`Criterion`, :func:`parse_criterion` and :func:`design_search`
(bracketing, then Brent's method on solo runs, for every combination of the
other swept keys). The chart of the found values is drawn by the output layer
(:func:`thermoelec.output.sweep_figures.search_chart`). Imports from scenario/
and analysis/ only; never from output/, fit/, the API or the command line.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from thermoelec.analysis.metrics import METRICS, PACK_METRICS
from thermoelec.analysis.sweep.dataset import plan_coordinates
from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.analysis.sweep.run import process_pool, run_chunk, solo_metrics
from thermoelec.scenario import Scenario, ScenarioError

__all__ = ["PROBABILITY", "Criterion", "design_search", "parse_criterion", "sampled_statistic"]

_CRITERION = re.compile(r"^\s*(?:(?P<stat>[Pp]\d+(?:\.\d+)?)\s+of\s+)?(?P<metric>[A-Za-z_][A-Za-z0-9_]*)"
                        r"\s*(?P<op><=|>=|<|>)\s*(?P<value>[-+]?[0-9.eE+-]+)\s*$")
_PROBABILITY = re.compile(r"^\s*pass\s+probability\s*(?P<op><=|>=|<|>)\s*(?P<value>[-+]?[0-9.eE+-]+)\s*$")
#: The statistic of a criterion on the pass probability (``pass probability >= 0.99``).
PROBABILITY = "probability"


@dataclass(frozen=True)
class Criterion:
    """``metric <= value`` (or ``>=``) on a summary metric, on a percentile of it over the samples
    (``P95 of metric <= value``), or on the pass probability (``pass probability >= 0.99``).

    Attributes
    ----------
    metric : str
        A key of :data:`METRICS` (``pass_probability`` for the probability).
    operator : str
        ``<=``, ``<``, ``>=`` or ``>``.
    value : float
        The bound, in the metric's unit (a probability for the probability).
    percentile : float or None
        The percentile over the samples [%], None for one run or the probability.
    """

    metric: str
    operator: str
    value: float
    percentile: float | None = None

    @property
    def sampled(self) -> bool:
        """True when the criterion is a statistic over samples (a percentile or the pass probability)."""
        return self.percentile is not None or self.metric == "pass_probability"

    def margin(self, metric_value: float) -> float:
        """<= 0 where the criterion holds."""
        return metric_value - self.value if self.operator in ("<=", "<") else self.value - metric_value

    def text(self) -> str:
        """The criterion as ``--find`` takes it."""
        if self.metric == "pass_probability":
            return f"pass probability {self.operator} {self.value:g}"
        head = f"P{self.percentile:g} of " if self.percentile is not None else ""
        return f"{head}{self.metric} {self.operator} {self.value:g}"


def parse_criterion(text: str) -> Criterion:
    """A criterion from ``--find`` text: ``METRIC <= VALUE`` (or ``>=``), ``P95 of METRIC <= VALUE`` or
    ``pass probability >= P`` (VALUE in the metric's unit, P within 0..1).

    Raises
    ------
    ScenarioError
        When the text does not parse, names no metric of :data:`METRICS` (or, for a resolved
        pack, of :data:`~thermoelec.analysis.metrics.PACK_METRICS`), or asks a percentile or a
        probability outside 0..100 or 0..1.
    """
    probability = _PROBABILITY.match(text)
    if probability:
        value = float(probability.group("value"))
        if not 0.0 <= value <= 1.0:
            raise ScenarioError("--find", text, "a pass probability lies within 0..1")
        return Criterion("pass_probability", probability.group("op"), value)
    match = _CRITERION.match(text)
    if not match or match.group("metric") not in METRICS + PACK_METRICS:
        raise ScenarioError("--find", text, "expected METRIC <= VALUE, METRIC >= VALUE, 'P95 of METRIC <= VALUE' or "
                            "'pass probability >= 0.99', with a summary metric: " + ", ".join(METRICS + PACK_METRICS))
    stat = match.group("stat")
    percentile = float(stat[1:]) if stat else None
    if percentile is not None and not 0.0 <= percentile <= 100.0:
        raise ScenarioError("--find", text, "a percentile lies within P0..P100")
    return Criterion(match.group("metric"), match.group("op"), float(match.group("value")), percentile)


def sampled_statistic(criterion: Criterion, rows: list[dict[str, Any]]) -> float:
    """The statistic of a sampled criterion over the rows of the samples: a percentile of the metric over
    the runs that ran (a run stopped early enters with its metric at the stop), or the share of all
    samples whose verdict is a pass (a failed or invalid run does not pass)."""
    if criterion.metric == "pass_probability":
        return sum(r.get("verdict") == "pass" for r in rows) / len(rows)
    values = np.array([float(r[criterion.metric]) for r in rows
                       if r.get("status") == "ok" and r.get(criterion.metric) is not None])
    return float(np.percentile(values, criterion.percentile)) if values.size else math.nan


def search_one(scenario: Scenario, fixed: dict[str, Any], path: str, low: float, high: float, unit: str,
                criterion: Criterion, greatest: bool, tolerance: float,
                samples: SweepPlan | None = None) -> dict[str, Any]:
    """The least (or, with ``greatest``, the greatest) value of ``path`` in ``low .. high`` meeting ``criterion``.

    The other keys held at ``fixed``; bracketing at the range ends, then Brent's
    method (R. P. Brent, *Algorithms for Minimization without Derivatives*, 1973,
    ch. 4) to ``tolerance`` times the range. With ``samples`` the criterion is a
    statistic over those samples, the same at every value (common random numbers).
    Returns ``value`` (in ``unit``), ``status`` (``ok``, ``at_bound``, ``not_met``,
    ``failed``), ``message`` and the number of ``evaluations``.
    """
    from scipy.optimize import brentq

    evaluations = 0

    def margin(x: float) -> float:
        nonlocal evaluations
        evaluations += 1
        overrides = {**fixed, path: f"{x!r} {unit}".strip() if unit else x}
        if samples is not None:  # the statistic over the same samples at every x (common random numbers)
            try:
                variant = scenario.with_overrides(overrides)
            except ScenarioError as exc:
                raise RuntimeError(str(exc)) from None
            value = sampled_statistic(criterion, run_chunk(variant, samples, range(samples.size)))
            if not math.isfinite(value):
                raise RuntimeError("no sample ran")
            return criterion.margin(value)
        row = solo_metrics(scenario, overrides)
        if row.get("status") != "ok":
            raise RuntimeError(row.get("message") or "the scenario failed")
        if row.get(criterion.metric) is None:
            raise RuntimeError(f"the scenario has no {criterion.metric} (a resolved pack's metric, or none counted)")
        value = float(row[criterion.metric])
        # a run stopped by a limit does not pass, whatever its metric says
        return criterion.margin(value) if row.get("completed") else abs(criterion.margin(value)) + 1.0

    try:
        at_low, at_high = margin(low), margin(high)
    except RuntimeError as exc:
        return {"value": math.nan, "status": "failed", "message": str(exc), "evaluations": evaluations}
    inner, m_inner, m_outer = (high, at_high, at_low) if greatest else (low, at_low, at_high)
    if m_inner <= 0:
        bound = "upper" if greatest else "lower"
        return {"value": inner, "status": "at_bound", "evaluations": evaluations,
                "message": f"met at the {bound} bound: the criterion holds there already, so the "
                           f"{'greatest' if greatest else 'least'} value lies at or {'above' if greatest else 'below'} "
                           f"{inner:g} {unit}".rstrip()}
    if m_outer > 0:
        return {"value": math.nan, "status": "not_met", "message": "not met in range", "evaluations": evaluations}
    try:
        root = brentq(margin, low, high, xtol=tolerance * abs(high - low), rtol=1e-12)
    except (RuntimeError, ValueError) as exc:
        return {"value": math.nan, "status": "failed", "message": str(exc), "evaluations": evaluations}
    if criterion.sampled and margin(root) > 0:
        # a statistic over samples moves in steps: report the side of the step where it holds
        other = root + (-1 if greatest else 1) * tolerance * abs(high - low)
        root = min(max(other, low), high)
    return {"value": float(root), "status": "ok", "message": "", "evaluations": evaluations}


def design_search(scenario: Scenario, plan: SweepPlan | None, path: str, low: float, high: float, unit: str,
                  criterion: Criterion, greatest: bool = False, tolerance: float = 1e-3,
                  workers: int | None = None):
    """For every combination of the other dimensions, the least (greatest) value of ``path`` meeting ``criterion``.

    Bracketing at the range ends, then Brent's method on the engine (R. P.
    Brent, *Algorithms for Minimization without Derivatives*, 1973, ch. 4) to
    ``tolerance`` times the range; the metric is taken as monotonic in the key
    over the range. Every evaluation is a solo run (:func:`thermoelec.analysis.sweep.run.solo_metrics`),
    or, for a criterion on a percentile or the pass probability, the plan's samples at that value
    through the batched engine (:func:`thermoelec.analysis.sweep.run.run_chunk`): the same samples at
    every value, so the statistic is a deterministic function of it (a pass probability moves in
    steps of 1/N, and the value found is on the side of the step where it holds).

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    plan : SweepPlan or None
        The other dimensions (grid keys, zipped groups, option groups: one search for each
        combination; a grid dimension on ``path`` is dropped) and the samples of a sampled
        criterion; None for one search.
    path : str
        Dotted path of the key searched, e.g. ``thermal.sink_to_ambient``.
    low, high : float
        The range searched, in ``unit``.
    unit : str
        Unit of the key as the scenario file writes it (empty for a bare number).
    criterion : Criterion
        What the found value must meet.
    greatest : bool
        Find the greatest value meeting it instead of the least.
    tolerance : float
        Search tolerance [-], a fraction of ``high - low``.
    workers : int, optional
        Local processes, one search per combination (default: the number of cores).

    Returns
    -------
    xarray.Dataset
        ``least_<path>`` (or ``greatest_<path>``) [unit], ``status``, ``message`` and
        ``evaluations``, with a dimension per other dimension (``case`` for none).
    """
    import xarray as xr

    others, samples = _search_plans(scenario, plan, path, criterion)
    scenario = scenario.for_variants()
    combos = [others.overrides(i) for i in range(others.size)] if others.dims else [{}]
    shape = others.shape if others.dims else (1,)
    args = [(scenario, c, path, low, high, unit, criterion, greatest, tolerance, samples) for c in combos]
    workers = workers or os.cpu_count() or 1
    if workers > 1 and len(args) > 1:
        with process_pool(workers) as pool:
            found = list(pool.map(search_one, *zip(*args, strict=True)))
    else:
        found = [search_one(*a) for a in args]
    dims = list(others.dim_names) or ["case"]
    name = f"{'greatest' if greatest else 'least'}_{path}"
    data = {
        name: (dims, np.array([f["value"] for f in found]).reshape(shape),
               {"units": unit, "criterion": criterion.text()}),
        "status": (dims, np.array([f["status"] for f in found], dtype=object).reshape(shape)),
        "message": (dims, np.array([f["message"] for f in found], dtype=object).reshape(shape)),
        "evaluations": (dims, np.array([f["evaluations"] for f in found]).reshape(shape)),
    }
    ds = xr.Dataset(data, coords=plan_coordinates(others) if others.dims else {})
    ds.attrs.update(search_key=path, search_range=f"{low:g}..{high:g} {unit}", tolerance=tolerance,
                    criterion=criterion.text())
    if samples is not None:
        sampling = samples.sampling
        ds.attrs.update(sampling=sampling.method, samples=sampling.samples, seed=sampling.seed)
    return ds


def _search_plans(scenario: Scenario, plan: SweepPlan | None, path: str,
                  criterion: Criterion) -> tuple[SweepPlan, SweepPlan | None]:
    """The other dimensions of a search (one search per combination) and its samples (a sampled criterion)."""
    if plan is None:
        plan = SweepPlan(())
    for dim in plan.dims:
        if dim.kind == "zip" and path in dim.paths:
            raise ScenarioError(scenario.source, f"sweep.{dim.name}", f"{path} is paired in a zip; a design "
                                "search varies it alone: sweep the other keys as a grid")
        if dim.kind == "sample" and path in dim.paths:
            raise ScenarioError(scenario.source, f"sweep.{path}", "the searched key has a distribution")
    sampled = [d for d in plan.dims if d.kind == "sample"]
    if criterion.sampled and not sampled:
        raise ScenarioError("--find", criterion.text(), "a percentile or a pass probability is a statistic over "
                            "samples: give keys distributions ([sweep] or --sweep KEY=normal(...)) and --samples N")
    if sampled and not criterion.sampled:
        raise ScenarioError("--find", criterion.text(), "the sweep has distributions: search on a statistic, "
                            "'P95 of METRIC <= VALUE' or 'pass probability >= 0.99'")
    others = plan.without([d.name for d in plan.dims if d.kind == "sample" or (d.kind == "grid"
                                                                                 and path in d.paths)])
    return others, (SweepPlan(tuple(sampled)) if sampled else None)
