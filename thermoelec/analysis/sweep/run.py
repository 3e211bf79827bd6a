"""Running a sweep: chunks of scenarios on local processes or a dask.distributed cluster, checkpointed.

Owns the execution: :func:`run_chunk` solves a chunk (by default together, with
the batched solver of :mod:`thermoelec.engine.batch`, whose rows are
:func:`thermoelec.analysis.metrics.batch_metrics`; a scenario the batch hands
back, every scenario with ``engine = "solo"`` and every one whose series are
kept runs on its own back end, CVODE by default, through
:func:`thermoelec.analysis.simulate.simulate`); :func:`run_sweep` holds the
output folder, spreads the chunks over processes or a cluster and writes each
finished chunk atomically to ``DIR/chunks/``
(:mod:`~thermoelec.analysis.sweep.checkpoint`), so ``--resume`` skips its
scenarios and an interrupted sweep loses at most the chunks in flight. On
``workers`` local processes the command itself is one of them
(:func:`_run_processes`): it solves chunks from the first moment, the workers
are forks of it where that is safe (:func:`process_pool`), and each worker is
handed the scenario and plan once, then only chunks of scenario indices.
``THERMOELEC_SWEEP_TIMING=FILE`` appends one JSON line per solved chunk to FILE
(process, first index, scenarios, wall-clock start and end, CPU time), for
``benchmarks/bench_two_cores.py``. An interrupt (SIGINT, SIGTERM) or any other
exception ends the worker processes (and the fork server) before it propagates
(:func:`process_pool`): no worker outlives the command. A scenario that fails,
or is over the budget of rows, is recorded with its message and never stops the
sweep. Imports from scenario/, engine/, inputs/ and analysis/ only; never from
output/, fit/, the API or the command line.
"""

from __future__ import annotations

import json
import math
import os
import signal
import sys
import threading
import time as _time
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.estimates import check_run
from thermoelec.analysis.interrupts import deferred_signals
from thermoelec.analysis.metrics import METRICS, PACK_METRICS, batch_metrics
from thermoelec.analysis.simulate import simulate
from thermoelec.analysis.sweep.checkpoint import Checkpoints, sweep_identity
from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.analysis.transaction import hold
from thermoelec.engine import batch
from thermoelec.inputs.budgets import Budgets, current, install, using
from thermoelec.scenario import Scenario, ScenarioError

__all__ = ["KEPT_SERIES", "Progress", "decimate", "default_chunk_size", "process_pool", "run_chunk", "run_sweep",
           "solo_metrics", "stop_pool"]


#: Environment variable naming a file that gets one JSON line per solved chunk (benchmarks).
TIMING_ENV = "THERMOELEC_SWEEP_TIMING"

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
    """The metrics row of one scenario solved on its own back end (the summary's values).

    :data:`~thermoelec.analysis.metrics.METRICS`, and for a resolved pack
    :data:`~thermoelec.analysis.metrics.PACK_METRICS` too.

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
        variant = scenario.with_overrides(overrides)
        check_run(variant, what="the scenario")
        result = simulate(variant)  # a signal CVODE's callback took for a failure comes out of it (simulate)
    except ScenarioError as exc:
        return {"status": "invalid", "message": str(exc)}
    except Exception as exc:  # a scenario must never stop the sweep
        return {"status": "failed", "message": f"{type(exc).__name__}: {exc}"}
    names = METRICS + (PACK_METRICS if result.cells is not None else ())  # a resolved pack's too
    row: dict[str, Any] = {k: result.summary.get(k) for k in names}
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
        # a batch shares one state layout (RC pairs, cells) and one set of solver settings (a swept
        # solver.rtol makes batches of its own)
        groups: dict[tuple, list[tuple[int, Any]]] = {}
        for i in indices:
            try:
                variant = scenario.with_overrides(plan.overrides(i))
                check_run(variant, what="the scenario")
                problem = variant.problem()
            except ScenarioError:
                continue  # recorded by the solo path below
            groups.setdefault((problem.n_rc, problem.n_cells, variant.solver_options()), []).append((i, problem))
        for (_, _, options), members in groups.items():
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


class Progress:
    """Scenarios done, rate and ETA as a tqdm bar on stderr: shown only on a terminal, after the first second."""

    def __init__(self, total: int, stream=sys.stderr, enabled: bool = True):
        self.total, self.done, self.stream, self.enabled = total, 0, stream, enabled
        self._bar = None

    def start_at(self, done: int) -> None:
        self.done = done
        if self.enabled:
            from tqdm import tqdm

            class Bar(tqdm):
                # no monitor thread (it forces a refresh of bars updated rarely; this one is updated at
                # every chunk): with a thread running, the workers could not be forks (process_pool)
                monitor_interval = 0

            # disable=None: quiet when the stream is no terminal (a log file, a pipe, a test)
            self._bar = Bar(total=self.total, initial=done, unit="scenario", desc="sweep", file=self.stream,
                             disable=None, delay=1.0, dynamic_ncols=True)

    def update(self, count: int) -> None:
        self.done += count
        if self._bar is not None:
            self._bar.update(count)
            if self.done >= self.total:
                self.close()

    def close(self) -> None:
        """End the bar (also when the sweep is interrupted, so the terminal line is left whole)."""
        if self._bar is not None:
            self._bar.close()
            self._bar = None


def default_chunk_size(size: int) -> int:
    """Scenarios per chunk when ``--chunk-size`` is not given: a sixteenth of the plan, 16 to 256 scenarios.

    It depends on the plan alone, not on the workers, so a sweep started on one
    machine resumes in the same chunks on another (any chunk size resumes: the
    chunks are read by scenario index). At 10 000 one-hour scenarios on two
    workers (``benchmarks/bench_sweep_scale.py``'s grid), chunks of 256 took 26 s
    and 66 s where chunks of 157 (a sixty-fourth) took 35 s and 86 s, in two runs
    on a machine loaded by others: the batched solver likes its batches large.

    Parameters
    ----------
    size : int
        Scenarios in the plan [-].

    Returns
    -------
    int
        Scenarios per chunk [-].
    """
    return max(1, min(256, max(16, math.ceil(size / 16)), size))


def _pieces(missing: Sequence[int], chunk: int) -> list[list[int]]:
    """The missing scenario indices in chunks of consecutive ones, at most ``chunk`` long."""
    pieces: list[list[int]] = []
    for i in missing:
        if pieces and pieces[-1][-1] == i - 1 and len(pieces[-1]) < chunk:
            pieces[-1].append(i)
        else:
            pieces.append([i])
    return pieces


#: The smallest chunk the tail is split into [-]: below it the batched solver's cost per call shows
#: (per scenario, 64-scenario batches took 1.1x and 16-scenario ones 1.8x the time of 256-scenario ones).
TAIL_CHUNK = 32


def _short_tail(pieces: list[list[int]], processes: int) -> list[list[int]]:
    """The pieces with the last ``2 * processes`` of them split in four, and the last ``2 * processes`` of those
    in two again (down to :data:`TAIL_CHUNK`).

    The processes take chunks in order, so the last chunks decide how long one
    process waits for the others at the end (a worker holds the chunk it solves
    and the next one queued): an eighth-size end shortens that wait to about an
    eighth, at little cost in the batched solver (bench_two_cores.py: the wait
    was 0.64-0.68 s at quarter size). Any split checkpoints and resumes the same
    (chunks are read by scenario index).
    """
    return _split_last(_split_last(pieces, 2 * processes, 4), 2 * processes, 2)


def _split_last(pieces: list[list[int]], count: int, parts: int) -> list[list[int]]:
    """The last ``count`` pieces each split in ``parts`` (none below :data:`TAIL_CHUNK`)."""
    cut = max(0, len(pieces) - count)
    tail: list[list[int]] = []
    for piece in pieces[cut:]:
        step = max(TAIL_CHUNK, math.ceil(len(piece) / parts))
        tail += [piece[k:k + step] for k in range(0, len(piece), step)]
    return pieces[:cut] + tail


def run_sweep(scenario: Scenario, plan: SweepPlan, out: Path, workers: int | None = None,
              scheduler: str | None = None, resume: bool = False, chunk_size: int | None = None,
              progress: bool = True, cluster: Any = None, keep_interval: float | None = None,
              engine: str = "batch", force: bool = False, meanwhile: Callable | None = None) -> list[dict[str, Any]]:
    """Run every scenario of a plan, checkpointing each chunk; returns the rows in plan order.

    The output folder is held (:func:`thermoelec.analysis.transaction.hold`) while it runs.

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    plan : SweepPlan
        The sweep (:func:`thermoelec.analysis.sweep.plan.plan_sweep`).
    out : Path
        The sweep's folder: the chunks go to ``out/chunks``
        (:class:`~thermoelec.analysis.sweep.checkpoint.Checkpoints`).
    workers : int, optional
        Local worker processes (default: the number of cores).
    scheduler : str, optional
        Address of a dask.distributed scheduler to run the chunks on instead.
    resume : bool
        Keep the chunks already finished in ``out`` (refused when the sweep's identity changed).
    chunk_size : int, optional
        Scenarios per task (default :func:`default_chunk_size`, independent of ``workers``).
    progress : bool
        Print the progress line on stderr.
    cluster : object, optional
        A dask.distributed Client or cluster object (tests).
    keep_interval : float, optional
        Interval [s] of the decimated series kept per scenario.
    engine : str
        ``"batch"`` (default) or ``"solo"``, as in :func:`run_chunk`.
    force : bool
        Discard finished chunks in ``out`` (another sweep's, or this one's) and start again.
    meanwhile : callable, optional
        Called once when the chunks start, after the local workers (a thread it starts keeps none
        from being a fork, :func:`process_pool`): the command line's imports for the figures.

    Returns
    -------
    list of dict
        One row per scenario in plan order (:func:`run_chunk`).

    Raises
    ------
    ScenarioError
        Another command holds ``out``; finished chunks there and neither ``resume`` nor
        ``force``; ``resume`` when the sweep's identity changed.
    """
    with hold(out):
        checkpoints = Checkpoints(out / "chunks")
        done = checkpoints.open(sweep_identity(scenario, plan, engine, keep_interval), plan.size, resume, force)
        scenario = scenario.for_variants()  # the plan has read the sweep's tables: no variant copies them again
        workers = workers or os.cpu_count() or 1
        pieces = _pieces([i for i in range(plan.size) if i not in done], chunk_size or default_chunk_size(plan.size))
        bar = Progress(plan.size, enabled=progress)
        bar.start_at(len(done))

        def finish(indices: list[int], rows: list[dict[str, Any]]) -> None:
            with deferred_signals():  # a chunk file is written whole, and counted, or not at all
                checkpoints.write(indices[0], rows)
                done.update(zip(indices, rows, strict=True))
            bar.update(len(rows))

        task = (scenario, plan, keep_interval, engine, current())
        started = meanwhile or (lambda: None)
        try:
            if scheduler is None and cluster is None and workers > 1 and len(pieces) > 1:
                _run_processes(task, _short_tail(pieces, workers), finish, workers, started)
            else:
                started()  # no local workers to start first
                if pieces and (scheduler is not None or cluster is not None):
                    _run_dask(task, pieces, finish, scheduler, cluster)
                else:
                    for indices in pieces:
                        finish(indices, _timed_chunk(scenario, plan, indices, keep_interval, engine))
        finally:
            bar.close()
        return [done[i] for i in range(plan.size)]


def _timed_chunk(scenario: Scenario, plan: SweepPlan, indices: Sequence[int], keep_interval: float | None,
                 engine: str) -> list[dict[str, Any]]:
    """:func:`run_chunk`, with a line in the file ``$THERMOELEC_SWEEP_TIMING`` names, if it names one."""
    log = os.environ.get(TIMING_ENV)
    began, cpu = _time.time(), _time.process_time()
    rows = run_chunk(scenario, plan, indices, keep_interval, engine)
    if log:
        # the process's CPU time before the chunk too: for its first chunk, what its start-up cost
        line = json.dumps({"pid": os.getpid(), "start": indices[0], "count": len(indices), "began": began,
                           "ended": _time.time(), "cpu_before": cpu, "cpu": _time.process_time() - cpu})
        with open(log, "a", encoding="utf-8") as handle:  # one short append: whole lines from any process
            handle.write(line + "\n")
    return rows


def _chunk_task(scenario: Scenario, plan: SweepPlan, keep_interval: float | None, engine: str, budgets: Budgets,
                indices: list[int]) -> list[dict[str, Any]]:
    """:func:`run_chunk` in a dask worker, under the budgets of the command that started it."""
    with using(budgets):
        return _timed_chunk(scenario, plan, indices, keep_interval, engine)


#: The sweep a local worker process solves chunks of (set once, when it starts: :func:`_worker_start`).
_WORKER_TASK: tuple | None = None


def _worker_start(budgets: Budgets, task: tuple | None = None) -> None:
    """A worker takes its command's budgets (and its sweep, ``(scenario, plan, keep_interval, engine)``,
    pickled once rather than with every chunk) and leaves SIGINT to the command (which ends it):
    Ctrl-C reaches the whole process group."""
    global _WORKER_TASK
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a forked worker had the command's handler: it just ends
    install(budgets)
    _WORKER_TASK = task


def _worker_chunk(indices: list[int]) -> list[dict[str, Any]]:
    """A chunk of the sweep this worker process was started with (:func:`_worker_start`)."""
    assert _WORKER_TASK is not None, "a worker started without its sweep"
    scenario, plan, keep_interval, engine = _WORKER_TASK
    return _timed_chunk(scenario, plan, indices, keep_interval, engine)


@contextmanager
def process_pool(workers: int, task: tuple | None = None) -> Iterator[ProcessPoolExecutor]:
    """Worker processes that never outlive the block: on any exception, an interrupt included, the
    workers (and the fork server) are stopped before it propagates. The workers take the budgets in
    force (:func:`thermoelec.inputs.budgets.current`).

    Where the system forks and this process runs no other Python thread, the workers are forks of
    it: they start with the engine loaded and the sweep in memory, in milliseconds rather than the
    0.6-0.7 s of CPU a fresh worker spends importing and unpickling (bench_two_cores.py). A fork
    copies the calling thread only (a lock another thread holds would stay locked in the child), so
    with another thread running they come from a fork server that imports nothing, as on systems
    that do not fork.

    Parameters
    ----------
    workers : int
        Processes [-].
    task : tuple, optional
        ``(scenario, plan, keep_interval, engine)``: the sweep whose chunks :func:`_worker_chunk` solves.

    Yields
    ------
    concurrent.futures.ProcessPoolExecutor
        The pool.
    """
    import multiprocessing

    if "fork" in multiprocessing.get_all_start_methods() and threading.active_count() == 1:
        context = multiprocessing.get_context("fork")
    else:
        context = multiprocessing.get_context("forkserver")
        # the server imports nothing: starting a worker waits for the server's start-up, and the command
        # would wait too (it solves chunks meanwhile); each worker imports the engine on its own
        context.set_forkserver_preload([])
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=context, initializer=_worker_start,
                               initargs=(current(), task))
    try:
        yield pool
    except BaseException:
        stop_pool(pool)
        raise
    pool.shutdown(wait=True)


def stop_pool(pool: ProcessPoolExecutor, grace: float = 2.0) -> None:
    """End a pool's workers now (SIGTERM, then SIGKILL after ``grace`` seconds) and the fork server.

    Parameters
    ----------
    pool : concurrent.futures.ProcessPoolExecutor
        The pool.
    grace : float
        Seconds a worker has to end after SIGTERM [s].
    """
    processes = list((getattr(pool, "_processes", None) or {}).values())  # private, stable since Python 3.8
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        if process.is_alive():
            process.terminate()
    deadline = _time.monotonic() + grace
    for process in processes:
        process.join(max(0.0, deadline - _time.monotonic()))
        if process.is_alive():
            process.kill()
            process.join(1.0)
    from multiprocessing import forkserver

    server = getattr(forkserver, "_forkserver", None)
    stop = getattr(server, "_stop", None)  # private: the server would otherwise live until this process ends
    if stop is not None:
        stop()


def _run_processes(task: tuple, pieces: list[list[int]], finish: Callable, workers: int,
                   started: Callable[[], None]) -> None:
    """The chunks on ``workers`` processes, this one included.

    ``workers - 1`` processes are started and handed every chunk, in order; this
    process, which has the scenario and the engine loaded already, takes the
    first chunk no worker has begun (cancelling it in the pool) and solves it,
    from the first moment rather than after the workers' start-up, writing the
    chunks the workers finished in between; when every chunk is begun it waits
    for the last. The workers get the sweep once and then only scenario indices.
    ``started`` is called once every chunk is handed to the pool (the workers run).
    """
    scenario, plan, keep_interval, engine, _ = task
    with process_pool(workers - 1, (scenario, plan, keep_interval, engine)) as pool:
        futures = [pool.submit(_worker_chunk, indices) for indices in pieces]
        started()
        pending: dict[Future, int] = dict(zip(futures, range(len(pieces)), strict=True))

        def collect(timeout: float | None) -> None:
            finished, _ = wait(list(pending), timeout=timeout, return_when=FIRST_COMPLETED)
            for future in finished:
                n = pending.pop(future)
                if not future.cancelled():
                    finish(pieces[n], future.result())

        for n, future in enumerate(futures):
            if not future.cancel():
                continue  # a worker has it
            pending.pop(future)
            finish(pieces[n], _timed_chunk(scenario, plan, pieces[n], keep_interval, engine))
            collect(0)
        while pending:
            collect(None)


def _run_dask(task: tuple, pieces: list[list[int]], finish: Callable, scheduler: str | None, cluster: Any) -> None:
    from distributed import Client
    from distributed import as_completed as dask_completed

    client = cluster if isinstance(cluster, Client) else Client(cluster if cluster is not None else scheduler)
    futures: dict = {}
    try:
        # a task lost with its worker is run again elsewhere (retries), so no scenario is lost
        futures = {client.submit(_chunk_task, *task, indices, pure=False, retries=3): n
                   for n, indices in enumerate(pieces)}
        for future in dask_completed(futures):
            finish(pieces[futures[future]], future.result())
    except BaseException:
        client.cancel(list(futures))
        raise
    finally:
        if client is not cluster:
            client.close()
