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
from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.analysis.sweep.run import process_pool, solo_metrics
from thermoelec.scenario import Scenario, ScenarioError

__all__ = ["Criterion", "design_search", "parse_criterion"]

_CRITERION = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(<=|>=|<|>)\s*([-+]?[0-9.eE+-]+)\s*$")


@dataclass(frozen=True)
class Criterion:
    """``metric <= value`` (or ``>=``) on a summary metric."""

    metric: str
    operator: str
    value: float

    def margin(self, metric_value: float) -> float:
        """<= 0 where the criterion holds."""
        return metric_value - self.value if self.operator in ("<=", "<") else self.value - metric_value


def parse_criterion(text: str) -> Criterion:
    """A criterion from ``--find`` text, ``METRIC <= VALUE`` or ``METRIC >= VALUE`` (VALUE in the metric's unit).

    Raises
    ------
    ScenarioError
        When the text does not parse or names no metric of :data:`METRICS` (or, for a
        resolved pack, of :data:`~thermoelec.analysis.metrics.PACK_METRICS`).
    """
    match = _CRITERION.match(text)
    if not match or match.group(1) not in METRICS + PACK_METRICS:
        raise ScenarioError("--find", text, "expected METRIC <= VALUE or METRIC >= VALUE with a summary metric: "
                            + ", ".join(METRICS + PACK_METRICS))
    return Criterion(match.group(1), match.group(2), float(match.group(3)))


def _search_one(scenario: Scenario, fixed: dict[str, Any], path: str, low: float, high: float, unit: str,
                criterion: Criterion, greatest: bool, tolerance: float) -> dict[str, Any]:
    from scipy.optimize import brentq

    evaluations = 0

    def margin(x: float) -> float:
        nonlocal evaluations
        evaluations += 1
        row = solo_metrics(scenario, {**fixed, path: f"{x!r} {unit}".strip() if unit else x})
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
    return {"value": float(root), "status": "ok", "message": "", "evaluations": evaluations}


def design_search(scenario: Scenario, plan: SweepPlan | None, path: str, low: float, high: float, unit: str,
                  criterion: Criterion, greatest: bool = False, tolerance: float = 1e-3,
                  workers: int | None = None):
    """For every combination of the other swept keys, the least (greatest) value of ``path`` meeting ``criterion``.

    Bracketing at the range ends, then Brent's method on the engine (R. P.
    Brent, *Algorithms for Minimization without Derivatives*, 1973, ch. 4) to
    ``tolerance`` times the range; the metric is taken as monotonic in the key
    over the range. Every evaluation is a solo run (:func:`thermoelec.analysis.sweep.run.solo_metrics`).

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    plan : SweepPlan or None
        A grid of the other keys (its axis on ``path``, if any, is dropped); None for one search.
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
        ``evaluations``, with a dimension per other swept key (``case`` for none).
    """
    import xarray as xr

    axes = [a for a in (plan.axes if plan else ()) if a.path != path]
    if plan is not None and plan.mode == "zip":
        raise ScenarioError(scenario.source, "sweep.mode", "a design search needs a grid of the other keys")
    shape = tuple(len(a.values) for a in axes) or (1,)
    combos = []
    for flat in range(int(np.prod(shape))):
        index = np.unravel_index(flat, shape)
        combos.append({a.path: a.values[i] for a, i in zip(axes, index, strict=False)} if axes else {})
    args = [(scenario, c, path, low, high, unit, criterion, greatest, tolerance) for c in combos]
    workers = workers or os.cpu_count() or 1
    if workers > 1 and len(args) > 1:
        with process_pool(workers) as pool:
            found = list(pool.map(_search_one, *zip(*args, strict=True)))
    else:
        found = [_search_one(*a) for a in args]
    dims = [a.path for a in axes] or ["case"]
    name = f"{'greatest' if greatest else 'least'}_{path}"
    data = {
        name: (dims, np.array([f["value"] for f in found]).reshape(shape),
               {"units": unit, "criterion": f"{criterion.metric} {criterion.operator} {criterion.value:g}"}),
        "status": (dims, np.array([f["status"] for f in found], dtype=object).reshape(shape)),
        "message": (dims, np.array([f["message"] for f in found], dtype=object).reshape(shape)),
        "evaluations": (dims, np.array([f["evaluations"] for f in found]).reshape(shape)),
    }
    coords = {a.path: (a.path, np.array(a.coords), {"units": a.unit or "as in the scenario file"}) for a in axes}
    ds = xr.Dataset(data, coords=coords)
    ds.attrs.update(search_key=path, search_range=f"{low:g}..{high:g} {unit}", tolerance=tolerance,
                    criterion=f"{criterion.metric} {criterion.operator} {criterion.value:g}")
    return ds
