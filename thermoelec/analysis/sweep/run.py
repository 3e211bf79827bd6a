"""Running a sweep: chunks of scenarios on local processes or a dask.distributed cluster, checkpointed.

Owns the execution: :func:`run_chunk` solves a chunk (by default together, with
the batched solver of :mod:`thermoelec.engine.batch`, whose rows are
:func:`thermoelec.analysis.metrics.batch_metrics`; a scenario the batch hands
back, every scenario with ``engine = "solo"`` and every one whose series are
kept runs on its own back end, CVODE by default, through
:func:`thermoelec.analysis.simulate.simulate`); :func:`run_sweep` spreads the
chunks over processes or a cluster and writes each finished chunk atomically to
``DIR/chunks/``, so ``--resume`` skips it and an interrupted sweep loses at most
the chunks in flight. A scenario that fails is recorded with its message and
never stops the sweep. Imports from scenario/, engine/ and analysis/ only; never
from output/, fit/, the API or the command line.
"""

from __future__ import annotations

import json
import os
import sys
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.metrics import METRICS, batch_metrics
from thermoelec.analysis.simulate import simulate
from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.engine import batch
from thermoelec.scenario import Scenario, ScenarioError

__all__ = ["KEPT_SERIES", "Progress", "decimate", "run_chunk", "run_sweep", "solo_metrics"]


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


def solo_metrics(scenario: Scenario, overrides: Mapping[str, Any], keep_interval: float | None = None
                 ) -> dict[str, Any]:
    """The :data:`METRICS` row of one scenario solved on its own back end (the summary's values).

    Parameters
    ----------
    scenario : Scenario
        The sweep's base scenario.
    overrides : mapping
        Dotted-path overrides of this scenario.
    keep_interval : float, optional
        Interval [s] of the decimated series kept in the row (``series``), if given.

    Returns
    -------
    dict
        The metrics, ``status`` (``ok``, ``failed`` or ``invalid``), ``message`` and ``stop_reason``;
        only ``status`` and ``message`` for a scenario that did not run.
    """
    try:
        result = simulate(scenario.with_overrides(overrides))
    except ScenarioError as exc:
        return {"status": "invalid", "message": str(exc)}
    except Exception as exc:  # a scenario must never stop the sweep
        return {"status": "failed", "message": f"{type(exc).__name__}: {exc}"}
    row: dict[str, Any] = {k: result.summary.get(k) for k in METRICS}
    row.update(status=result.status, message=result.message, stop_reason=result.summary["stop_reason"],
               verdict=result.summary["verdict"],
               failed_checks=",".join(c["check"] for c in result.summary["checks"] if not c["passed"]))
    if keep_interval is not None:
        row["series"] = decimate(result.series, keep_interval)
    return row


def run_chunk(scenario: Scenario, plan: SweepPlan, indices: Sequence[int],
              keep_interval: float | None = None, engine: str = "batch") -> list[dict[str, Any]]:
    """Simulate the scenarios ``indices`` of a plan, in order (with decimated series if ``keep_interval``).

    With ``engine = "batch"`` the scenarios are solved together by the batched
    solver (:mod:`thermoelec.engine.batch`); any it hands back, and every scenario when
    series are kept, run solo on their own back end (CVODE by default). Each row says
    which in ``engine`` (``"batch"`` or ``"solo"``).
    """
    rows: dict[int, dict[str, Any]] = {}
    if engine == "batch" and keep_interval is None:
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
            rows[i] = solo_metrics(scenario, plan.overrides(i), keep_interval)
            rows[i]["engine"] = "solo"
    return [rows[i] for i in indices]


def _write_atomic(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    tmp.write_text(text)
    os.replace(tmp, path)


class Progress:
    """Scenarios done, rate and ETA as a tqdm bar on stderr: shown only on a terminal, after the first second."""

    def __init__(self, total: int, stream=sys.stderr, enabled: bool = True):
        self.total, self.done, self.stream, self.enabled = total, 0, stream, enabled
        self._bar = None

    def start_at(self, done: int) -> None:
        self.done = done
        if self.enabled:
            from tqdm import tqdm

            # disable=None: quiet when the stream is no terminal (a log file, a pipe, a test)
            self._bar = tqdm(total=self.total, initial=done, unit="scenario", desc="sweep", file=self.stream,
                             disable=None, delay=1.0, dynamic_ncols=True)

    def update(self, count: int) -> None:
        self.done += count
        if self._bar is not None:
            self._bar.update(count)
            if self.done >= self.total:
                self._bar.close()


def _checkpoint_folder(scenario: Scenario, plan: SweepPlan, out: Path, resume: bool, settings: str) -> Path:
    """The folder of finished chunks, emptied unless resuming the same sweep (same scenario, plan, settings)."""
    out.mkdir(parents=True, exist_ok=True)
    chunk_dir = out / "chunks"
    chunk_dir.mkdir(exist_ok=True)
    signature = plan.signature(scenario.digest + settings)
    stamp = out / "sweep_plan.json"
    if stamp.exists() and resume:
        if json.loads(stamp.read_text()).get("signature") != signature:
            raise ScenarioError(str(stamp), "", "--resume: this folder holds a different sweep (scenario or plan "
                                "changed); use a new --out or drop --resume")
    else:
        for old in chunk_dir.glob("chunk_*.json"):
            old.unlink()
        _write_atomic(stamp, json.dumps({"signature": signature, "size": plan.size}))
    return chunk_dir


def _chunks(size: int, chunk: int) -> list[list[int]]:
    return [list(range(a, min(a + chunk, size))) for a in range(0, size, chunk)]


def run_sweep(scenario: Scenario, plan: SweepPlan, out: Path, workers: int | None = None,
              scheduler: str | None = None, resume: bool = False, chunk_size: int | None = None,
              progress: bool = True, cluster: Any = None, keep_interval: float | None = None,
              engine: str = "batch") -> list[dict[str, Any]]:
    """Run every scenario of a plan, checkpointing each chunk; returns the rows in plan order.

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    plan : SweepPlan
        The sweep (:func:`thermoelec.analysis.sweep.plan.plan_sweep`).
    out : Path
        The sweep's folder: ``sweep_plan.json`` and ``chunks/`` go there.
    workers : int, optional
        Local worker processes (default: the number of cores).
    scheduler : str, optional
        Address of a dask.distributed scheduler to run the chunks on instead.
    resume : bool
        Keep the chunks already finished in ``out`` (refused when the plan differs).
    chunk_size : int, optional
        Scenarios per task (default: about four tasks per worker, at most 256).
    progress : bool
        Print the progress line on stderr.
    cluster : object, optional
        A dask.distributed Client or cluster object (tests).
    keep_interval : float, optional
        Interval [s] of the decimated series kept per scenario.
    engine : str
        ``"batch"`` (default) or ``"solo"``, as in :func:`run_chunk`.

    Returns
    -------
    list of dict
        One row per scenario in plan order (:func:`run_chunk`).
    """
    chunk_dir = _checkpoint_folder(scenario, plan, out, resume, f"/series:{keep_interval}/engine:{engine}")
    scenario = scenario.for_variants()  # the plan has read the sweep's tables: no variant copies them again
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
