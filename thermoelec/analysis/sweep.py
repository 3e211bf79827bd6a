"""Sweeps: many variants of one scenario, run in chunks, checkpointed, gathered into one labelled dataset.

The ``[sweep]`` table (and ``--sweep KEY=V1,V2,...``) maps dotted paths to
lists of values or ranges (``{start, stop, num}`` or ``{start, stop, step}``,
with units); every combination runs (``mode = "grid"``, one dimension per key)
or the lists are paired (``mode = "zip"``, one dimension ``case``). Chunks of
scenarios are the tasks, on local processes or a dask.distributed cluster;
each finished chunk is written atomically to ``DIR/chunks/``, so ``--resume``
skips it and an interrupted sweep loses at most the chunks in flight. Every
scenario is solved by the engine on its own (CVODE); a scenario that fails is
recorded with its message and never stops the sweep.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
import sys
import time as _time
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.metrics import METRICS
from thermoelec.scenario import Scenario, ScenarioError, parse_value

__all__ = ["METRICS", "Criterion", "SweepAxis", "SweepPlan", "design_search", "parse_criterion", "plan_sweep",
           "run_sweep", "sweep_dataset"]

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
        if "num" in spec:
            num = spec["num"]
            if not isinstance(num, int) or num < 1:
                raise ScenarioError(source, key, "num must be a whole number >= 1")
            numbers = np.linspace(start[0], stop[0], num)
        else:
            step = _split_quantity(spec["step"])
            if step is None or step[0] <= 0 or step[1] not in (unit, "", "K" if unit == "degC" else unit):
                raise ScenarioError(source, key, f"step must be a positive quantity in {unit or 'the same unit'}")
            count = math.floor((stop[0] - start[0]) / step[0] + 1e-9) + 1
            numbers = start[0] + step[0] * np.arange(count)
        values = tuple(f"{v:.12g} {unit}".strip() if unit else float(v) for v in numbers)
        return SweepAxis(path, values, tuple(float(v) for v in numbers), unit)
    if not isinstance(spec, list) or not spec:
        raise ScenarioError(source, key, "expected a non-empty list of values or a range {start, stop, num|step}")
    parts = [_split_quantity(v) for v in spec]
    if all(p is not None for p in parts) and len({p[1] for p in parts}) == 1:
        return SweepAxis(path, tuple(spec), tuple(p[0] for p in parts), parts[0][1])
    return SweepAxis(path, tuple(spec), tuple(json.dumps(v) if not isinstance(v, str) else v for v in spec), "")


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
        return int(np.prod(self.shape))

    def overrides(self, flat_index: int) -> dict[str, Any]:
        """Dotted-path overrides of scenario ``flat_index`` (C order over :attr:`shape`)."""
        if self.mode == "zip":
            return {a.path: a.values[flat_index] for a in self.axes}
        index = np.unravel_index(flat_index, self.shape)
        return {a.path: a.values[i] for a, i in zip(self.axes, index, strict=True)}

    def signature(self, scenario_digest: str) -> str:
        """A fingerprint of the scenario and the plan, to refuse resuming a different sweep."""
        text = json.dumps([scenario_digest, self.mode, [(a.path, list(map(str, a.values))) for a in self.axes]])
        return hashlib.sha256(text.encode()).hexdigest()


def plan_sweep(scenario: Scenario, cli_items: Sequence[str] = ()) -> SweepPlan:
    """The sweep of a scenario: its ``[sweep]`` table, then ``--sweep KEY=V1,V2,...`` items (which replace)."""
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
    scenario.with_overrides(plan.overrides(0))  # the first combination must validate (key paths, units)
    return plan


# ---------------------------------------------------------------------------
# Running
# ---------------------------------------------------------------------------


#: Series kept per scenario with ``--keep-series`` (decimated to a uniform time grid).
KEPT_SERIES = ("current_A", "voltage_V", "soc", "cell_temperature_degC", "sink_temperature_degC", "heat_W")


def decimate(series: Mapping[str, np.ndarray], interval: float) -> dict[str, list[float]]:
    """The kept series on the grid 0, interval, 2 interval, ... up to the end (linear between rows)."""
    times = series["time_s"]
    grid = np.arange(0.0, times[-1] + 1e-9, interval)
    # at a jump the row after it is taken, as the series lists before-then-after
    keep = np.concatenate([times[1:] != times[:-1], [True]])
    return {"time_s": grid.tolist(),
            **{k: np.interp(grid, times[keep], series[k][keep]).tolist() for k in KEPT_SERIES}}


def _metrics_of(scenario: Scenario, overrides: Mapping[str, Any], keep_interval: float | None = None
                ) -> dict[str, Any]:
    from thermoelec.api import simulate

    try:
        result = simulate(scenario.with_overrides(overrides))
    except ScenarioError as exc:
        return {"status": "invalid", "message": str(exc)}
    except Exception as exc:  # a scenario must never stop the sweep
        return {"status": "failed", "message": f"{type(exc).__name__}: {exc}"}
    row: dict[str, Any] = {k: result.summary.get(k) for k in METRICS}
    row.update(status=result.status, message=result.message, stop_reason=result.summary["stop_reason"])
    if keep_interval is not None:
        row["series"] = decimate(result.series, keep_interval)
    return row


def run_chunk(scenario: Scenario, plan: SweepPlan, indices: Sequence[int],
              keep_interval: float | None = None, engine: str = "batch") -> list[dict[str, Any]]:
    """Simulate the scenarios ``indices`` of a plan, in order (with decimated series if ``keep_interval``).

    With ``engine = "batch"`` the scenarios are solved together by the batched
    solver (:mod:`thermoelec.engine.batch`); any it hands back, and every scenario when
    series are kept, run solo on their own back end (CVODE by default).
    """
    rows: dict[int, dict[str, Any]] = {}
    if engine == "batch" and keep_interval is None:
        from thermoelec.analysis.metrics import batch_metrics
        from thermoelec.engine import batch

        # a batch shares one state layout and one set of solver settings (a swept solver.rtol
        # makes batches of its own)
        groups: dict[tuple, list[tuple[int, Any]]] = {}
        for i in indices:
            try:
                variant = scenario.with_overrides(plan.overrides(i))
                problem = variant.problem()
            except ScenarioError:
                continue  # recorded by the solo path below
            groups.setdefault((problem.n_rc, variant.solver_options()), []).append((i, problem))
        for (_, options), members in groups.items():
            outcome = batch.solve_batch([problem for _, problem in members], options)
            for j, (i, problem) in enumerate(members):
                if outcome.status[j] == "ok":
                    rows[i] = batch_metrics(problem, outcome, j)
                    rows[i]["engine"] = "batch"
    for i in indices:
        if i not in rows:
            rows[i] = _metrics_of(scenario, plan.overrides(i), keep_interval)
            rows[i]["engine"] = "solo"
    return [rows[i] for i in indices]


def _write_atomic(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.write_text(text)
    os.replace(tmp, path)


class Progress:
    """Scenarios done, rate and ETA on one terminal line."""

    def __init__(self, total: int, stream=sys.stderr, enabled: bool = True):
        self.total, self.done, self.stream, self.enabled = total, 0, stream, enabled
        self.started = _time.perf_counter()
        self._base = 0

    def start_at(self, done: int) -> None:
        self.done = self._base = done

    def update(self, count: int) -> None:
        self.done += count
        if not self.enabled:
            return
        elapsed = _time.perf_counter() - self.started
        rate = (self.done - self._base) / elapsed if elapsed > 0 else 0.0
        eta = (self.total - self.done) / rate if rate > 0 else float("inf")
        print(f"\r  {self.done}/{self.total} scenarios, {rate:.1f}/s, ETA {eta:.0f} s ", end="", file=self.stream,
              flush=True)
        if self.done >= self.total:
            print(file=self.stream)


def _chunks(size: int, chunk: int) -> list[list[int]]:
    return [list(range(a, min(a + chunk, size))) for a in range(0, size, chunk)]


def run_sweep(scenario: Scenario, plan: SweepPlan, out: Path, workers: int | None = None,
              scheduler: str | None = None, resume: bool = False, chunk_size: int | None = None,
              progress: bool = True, cluster: Any = None, keep_interval: float | None = None,
              engine: str = "batch") -> list[dict[str, Any]]:
    """Run every scenario of a plan, checkpointing each chunk; returns the rows in plan order.

    ``scheduler`` is a dask.distributed address (``cluster`` a Client or
    cluster object, for tests); otherwise ``workers`` local processes.
    """
    out.mkdir(parents=True, exist_ok=True)
    chunk_dir = out / "chunks"
    chunk_dir.mkdir(exist_ok=True)
    signature = plan.signature(scenario.digest + f"/series:{keep_interval}/engine:{engine}")
    stamp = out / "sweep_plan.json"
    if stamp.exists() and resume:
        if json.loads(stamp.read_text()).get("signature") != signature:
            raise ScenarioError(str(stamp), "", "--resume: this folder holds a different sweep (scenario or plan "
                                "changed); use a new --out or drop --resume")
    else:
        for old in chunk_dir.glob("chunk_*.json"):
            old.unlink()
        _write_atomic(stamp, json.dumps({"signature": signature, "size": plan.size}))
    workers = workers or os.cpu_count() or 1
    chunk = chunk_size or max(1, min(256, plan.size // (4 * workers) or 1))
    chunks = _chunks(plan.size, chunk)
    done: dict[int, list[dict[str, Any]]] = {}
    for k in range(len(chunks)):
        path = chunk_dir / f"chunk_{k:06d}.json"
        if path.exists():
            done[k] = json.loads(path.read_text())
    bar = Progress(plan.size, enabled=progress)
    bar.start_at(sum(len(chunks[k]) for k in done))
    todo = [k for k in range(len(chunks)) if k not in done]

    def finish(k: int, rows: list[dict[str, Any]]) -> None:
        _write_atomic(chunk_dir / f"chunk_{k:06d}.json", json.dumps(rows))
        done[k] = rows
        bar.update(len(rows))

    if todo:
        if scheduler is not None or cluster is not None:
            _run_dask(scenario, plan, chunks, todo, finish, scheduler, cluster, keep_interval, engine)
        elif workers == 1:
            for k in todo:
                finish(k, run_chunk(scenario, plan, chunks[k], keep_interval, engine))
        else:
            _run_processes(scenario, plan, chunks, todo, finish, workers, keep_interval, engine)
    return [row for k in range(len(chunks)) for row in done[k]]


def _run_processes(scenario, plan, chunks, todo, finish: Callable, workers: int, keep_interval,
                   engine: str) -> None:
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor, as_completed

    context = multiprocessing.get_context("forkserver")
    with ProcessPoolExecutor(max_workers=workers, mp_context=context) as pool:
        futures = {pool.submit(run_chunk, scenario, plan, chunks[k], keep_interval, engine): k for k in todo}
        for future in as_completed(futures):
            finish(futures[future], future.result())


def _run_dask(scenario, plan, chunks, todo, finish: Callable, scheduler: str | None, cluster: Any,
              keep_interval: float | None = None, engine: str = "batch") -> None:
    from distributed import Client, as_completed

    client = cluster if isinstance(cluster, Client) else Client(cluster if cluster is not None else scheduler)
    try:
        # a task lost with its worker is run again elsewhere (retries), so no scenario is lost
        futures = {client.submit(run_chunk, scenario, plan, chunks[k], keep_interval, engine, pure=False,
                                 retries=3): k for k in todo}
        for future in as_completed(futures):
            finish(futures[future], future.result())
    finally:
        if client is not cluster:
            client.close()


# ---------------------------------------------------------------------------
# The labelled dataset
# ---------------------------------------------------------------------------


def sweep_dataset(scenario: Scenario, plan: SweepPlan, rows: Sequence[Mapping[str, Any]]):
    """One xarray Dataset: a dimension per swept key (or ``case`` for zip), a variable per metric."""
    import xarray as xr

    from thermoelec.version import __version__

    shape = plan.shape
    dims = ["case"] if plan.mode == "zip" else [a.path for a in plan.axes]
    coords: dict[str, Any] = {}
    for axis in plan.axes:
        dim = "case" if plan.mode == "zip" else axis.path
        coords[axis.path] = (dim, np.array(axis.coords), {"units": axis.unit or "as in the scenario file"})
    data: dict[str, Any] = {}
    for key in METRICS:
        values = np.array([np.nan if r.get(key) is None else float(r[key]) for r in rows]).reshape(shape)
        data[key] = (dims, values, {"units": _unit_of(key)})
    for key in ("status", "message", "stop_reason", "engine"):
        data[key] = (dims, np.array([str(r.get(key) or "") for r in rows], dtype=object).reshape(shape))
    ds = xr.Dataset(data, coords=coords)
    ds.attrs.update(thermoelec_version=__version__, scenario_file=scenario.source, scenario_sha256=scenario.digest,
                    sweep_mode=plan.mode, scenarios=plan.size,
                    failed=int(sum(r.get("status") != "ok" for r in rows)))
    return ds


def _unit_of(key: str) -> str:
    for suffix, unit in (("_degC", "degC"), ("_K", "K"), ("_V", "V"), ("_A", "A"), ("_Wh", "Wh"), ("_Ah", "Ah"),
                         ("_s", "s")):
        if key.endswith(suffix):
            return unit
    return "1"


def write_series(plan: SweepPlan, rows: Sequence[Mapping[str, Any]], out: Path, chunk: int = 64) -> Path:
    """The kept series of every scenario into ``DIR/series.zarr``: dimensions ``scenario`` x ``time``,
    chunked by scenario; a scenario that stopped early (or failed) is NaN after its end."""
    import xarray as xr

    length = max((len(r["series"]["time_s"]) for r in rows if "series" in r), default=0)
    longest = next((r["series"]["time_s"] for r in rows if "series" in r and len(r["series"]["time_s"]) == length),
                   [])
    data = {}
    for key in KEPT_SERIES:
        block = np.full((len(rows), length), np.nan)
        for i, row in enumerate(rows):
            if "series" in row:
                values = row["series"][key]
                block[i, :len(values)] = values
        data[key] = (("scenario", "time"), block, {"units": _unit_of(key) if key != "soc" else "1"})
    index = {}
    for axis in plan.axes:  # each scenario's value of each swept key, in the key's coordinate
        lookup = dict(zip(map(str, axis.values), axis.coords, strict=True))
        index[axis.path] = ("scenario", np.array([lookup[str(plan.overrides(i)[axis.path])]
                                                  for i in range(plan.size)]), {"units": axis.unit})
    ds = xr.Dataset(data, coords={"time": ("time", np.asarray(longest, float), {"units": "s"}),
                                  "scenario": np.arange(len(rows)), **index})
    path = out / "series.zarr"
    ds.chunk({"scenario": chunk, "time": -1}).to_zarr(path, mode="w", zarr_format=2, consolidated=True)
    return path


def passes(ds) -> Any:
    """Pass / fail of every scenario: completed, solved, within every limit."""
    ok = (ds["status"] == "ok") & (ds["completed"] == 1.0)
    return ok & (ds["voltage_margin_min_V"] >= 0) & (ds["temperature_margin_K"] > 0)


def write_sweep(ds, out: Path, figures: bool = True) -> list[Path]:
    """``sweep.nc`` (strings as variable-length text) and the heat maps."""
    path = out / "sweep.nc"
    tmp = out / ".sweep.nc.tmp"
    ds.to_netcdf(tmp)
    os.replace(tmp, path)
    written = [path]
    if figures:
        from thermoelec.output.figures import save

        for metric in ("cell_temperature_max_degC", "energy_discharged_Wh"):
            fig = sweep_map(ds, metric)
            if fig is not None:
                written += save(fig, out, f"sweep_{metric}", ("png", "svg"))
    return written


def sweep_map(ds, metric: str):
    """Heat map of a metric over the first two swept axes with the pass / fail boundary, faceted over a third."""
    from matplotlib.figure import Figure

    dims = [d for d in ds[metric].dims]
    if len(dims) < 2:
        return _line_plot(ds, metric)
    x_dim, y_dim = dims[1], dims[0]
    facets = dims[2] if len(dims) > 2 else None
    n = ds.sizes[facets] if facets else 1
    fig = Figure(figsize=(5.2 * min(n, 4), 4.4 * math.ceil(n / 4)), layout="constrained")
    axes = np.atleast_1d(fig.subplots(math.ceil(n / 4), min(n, 4), squeeze=False).ravel())
    ok = passes(ds)
    for i in range(n):
        sel = {facets: i} if facets else {}
        extra = [d for d in dims if d not in (x_dim, y_dim, facets)]
        sel.update({d: 0 for d in extra})
        values = ds[metric].isel(sel)
        good = ok.isel(sel).astype(float)
        ax = axes[i]
        x, y = _numeric(ds, x_dim), _numeric(ds, y_dim)
        mesh = ax.pcolormesh(x, y, values.values, shading="nearest", cmap="inferno")
        if 0.0 < float(good.mean()) < 1.0 and len(x) > 1 and len(y) > 1:
            ax.contour(x, y, good.values, levels=[0.5], colors="cyan", linewidths=1.5)
        # a scenario that stopped early shows its metric up to the stop: mark it, so that a cell
        # stopped at once (a cold take-off on the voltage limit) does not read as a cool pass
        stopped = (ds["stop_reason"].isel(sel).values != "end_of_profile")
        if stopped.any():
            xx, yy = np.meshgrid(x, y)
            ax.scatter(xx[stopped], yy[stopped], marker="x", color="white", s=28, linewidths=1.2)
        fig.colorbar(mesh, ax=ax, label=f"{metric}")
        ax.set_xlabel(f"{x_dim} [{ds[x_dim].attrs.get('units', '')}]")
        ax.set_ylabel(f"{y_dim} [{ds[y_dim].attrs.get('units', '')}]")
        if facets:
            ax.set_title(f"{facets} = {ds[facets].values[i]}", fontsize=9)
    fig.suptitle(f"{metric}\ncyan: pass / fail boundary; x: stopped before the end of the profile", fontsize=10)
    return fig


def _numeric(ds, dim: str) -> np.ndarray:
    values = ds[dim].values
    return values.astype(float) if np.issubdtype(values.dtype, np.number) else np.arange(len(values))


def _line_plot(ds, metric: str):
    from matplotlib.figure import Figure

    dim = ds[metric].dims[0]
    fig = Figure(figsize=(7, 4.5), layout="constrained")
    ax = fig.subplots()
    ax.plot(_numeric(ds, dim), ds[metric].values, "o-")
    ax.set_xlabel(dim)
    ax.set_ylabel(metric)
    return fig


def iter_combinations(plan: SweepPlan) -> Iterable[dict[str, Any]]:
    """Every scenario's overrides in order (for scripts)."""
    for i in range(plan.size):
        yield plan.overrides(i)



# ---------------------------------------------------------------------------
# Design search: the least (or greatest) value of one key that meets a criterion
# ---------------------------------------------------------------------------

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
    match = _CRITERION.match(text)
    if not match or match.group(1) not in METRICS:
        raise ScenarioError("--find", text, "expected METRIC <= VALUE or METRIC >= VALUE with a summary metric: "
                            + ", ".join(METRICS))
    return Criterion(match.group(1), match.group(2), float(match.group(3)))


def _search_one(scenario: Scenario, fixed: dict[str, Any], path: str, low: float, high: float, unit: str,
                criterion: Criterion, greatest: bool, tolerance: float) -> dict[str, Any]:
    from scipy.optimize import brentq

    evaluations = 0

    def margin(x: float) -> float:
        nonlocal evaluations
        evaluations += 1
        row = _metrics_of(scenario, {**fixed, path: f"{x!r} {unit}".strip() if unit else x})
        if row.get("status") != "ok" or row.get(criterion.metric) is None:
            raise RuntimeError(row.get("message") or "the scenario failed")
        value = float(row[criterion.metric])
        # a run stopped by a limit does not pass, whatever its metric says
        return criterion.margin(value) if row.get("completed") else abs(criterion.margin(value)) + 1.0

    try:
        at_low, at_high = margin(low), margin(high)
    except RuntimeError as exc:
        return {"value": math.nan, "status": "failed", "message": str(exc), "evaluations": evaluations}
    inner, m_inner, m_outer = (high, at_high, at_low) if greatest else (low, at_low, at_high)
    if m_inner <= 0:
        return {"value": inner, "status": "at_bound", "message": "met already at the bound of the range",
                "evaluations": evaluations}
    if m_outer > 0:
        return {"value": math.nan, "status": "not_met", "message": "not met anywhere in the range",
                "evaluations": evaluations}
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
    over the range. Returns an xarray Dataset.
    """
    from concurrent.futures import ProcessPoolExecutor

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
        import multiprocessing

        with ProcessPoolExecutor(max_workers=workers, mp_context=multiprocessing.get_context("forkserver")) as pool:
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


def search_chart(ds):
    """The found value against the first other key, one line per value of the second."""
    from matplotlib.figure import Figure

    name = next(v for v in ds.data_vars if v.startswith(("least_", "greatest_")))
    fig = Figure(figsize=(7.5, 5), layout="constrained")
    ax = fig.subplots()
    dims = list(ds[name].dims)
    if dims == ["case"]:
        ax.bar([0], ds[name].values)
    else:
        x = _numeric(ds, dims[0])
        if len(dims) == 1:
            ax.plot(x, ds[name].values, "o-")
        else:
            for j in range(ds.sizes[dims[1]]):
                ax.plot(x, ds[name].isel({dims[1]: j}).values.T, "o-", label=f"{dims[1]} = {ds[dims[1]].values[j]}")
            ax.legend(fontsize=8)
        ax.set_xlabel(f"{dims[0]} [{ds[dims[0]].attrs.get('units', '')}]")
    ax.set_ylabel(f"{name} [{ds[name].attrs.get('units', '')}]")
    ax.set_title(f"{name.split('_')[0]} value meeting {ds.attrs['criterion']} (missing: not met in range)", fontsize=9)
    return fig
