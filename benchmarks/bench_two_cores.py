"""The second core: ``thermoelec sweep --workers 2`` on two cores against ``--workers 1`` on one.

The sweep of ``bench_sweep_scale.py`` (the 1 h mission at 1 Hz, 3 600 power
segments, swept over ambient x sink conductance x initial SoC x demand scale,
10 000 scenarios by default), run as a user runs it:
``thermoelec sweep FILE --out DIR --workers N --no-figures --quiet`` in a fresh
process, pinned with ``os.sched_setaffinity`` (inherited by its workers) to one
core for one worker and to two cores for two. The reference is the same
command on one core in the same run; the target is a ratio of at least 1.8.

Printed, the best of ``--repeats`` runs of each (the machine is shared):

- the wall time of each and their ratio;
- the fixed start-up: a one-scenario sweep of the same mission, wall time;
- from the per-chunk log (``THERMOELEC_SWEEP_TIMING``): the start-up until the
  first chunk begins, the solve time summed per process (wall and CPU: the
  CPU time does not depend on the load), each process's CPU time before its
  first chunk (its start-up: imports, the sweep unpickled), the span from the
  first chunk's start to the last chunk's end, how long each process waited
  for the other at the end (the tail), and the gather and output after the
  last chunk (``sweep.nc``, ``sweep.csv``) until the command ends.

Run: ``.venv/bin/python benchmarks/bench_two_cores.py`` (``--quick`` for a few
hundred scenarios of a 10-minute mission, a check that the script works).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from bench_sweep_scale import sweep_axes, write_mission

from thermoelec.analysis.sweep.run import TIMING_ENV

THERMOELEC = [sys.executable, "-m", "thermoelec.cli"]
#: The target ratio of one worker's wall time to two workers'.
TARGET = 1.8


@dataclass
class Timing:
    """One timed command: wall time and what its chunk log says [s]."""

    wall: float
    cpu: dict[int, float]  # CPU time of the chunks' solves per process
    before: dict[int, float]  # CPU time of each process before its first chunk (its start-up)
    startup: float  # launch to the first chunk's start
    solve: dict[int, float]  # solve time per process
    span: float  # first chunk's start to the last chunk's end
    tail: float  # the last process to finish against the first
    gather: float  # the last chunk's end to the command's end
    chunks: int
    first: list[float]  # each process's first chunk start, from the launch (the last: a worker's start-up)


def cores(count: int) -> set[int]:
    """The first ``count`` cores this process may run on."""
    allowed = sorted(os.sched_getaffinity(0))
    if len(allowed) < count:
        raise SystemExit(f"needs {count} cores, this process may use {len(allowed)}")
    return set(allowed[:count])


def timed(command: list[str], on: set[int], log: Path) -> Timing:
    """Run ``command`` pinned to the cores ``on`` (its workers inherit them), with its chunk log in ``log``."""
    log.unlink(missing_ok=True)
    env = {**os.environ, TIMING_ENV: str(log)}
    launched = time.time()
    started = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, env=env,
                   preexec_fn=lambda: os.sched_setaffinity(0, on))
    wall = time.perf_counter() - started
    ended = launched + wall
    lines = [json.loads(line) for line in log.read_text().splitlines()] if log.exists() else []
    if not lines:
        return Timing(wall, {}, {}, float("nan"), {}, float("nan"), float("nan"), float("nan"), 0, [])
    solve: dict[int, float] = {}
    cpu: dict[int, float] = {}
    before: dict[int, float] = {}
    begun: dict[int, float] = {}
    last: dict[int, float] = {}
    for line in lines:
        solve[line["pid"]] = solve.get(line["pid"], 0.0) + line["ended"] - line["began"]
        cpu[line["pid"]] = cpu.get(line["pid"], 0.0) + line["cpu"]
        before[line["pid"]] = min(before.get(line["pid"], line["cpu_before"]), line["cpu_before"])
        begun[line["pid"]] = min(begun.get(line["pid"], line["began"]), line["began"])
        last[line["pid"]] = max(last.get(line["pid"], 0.0), line["ended"])
    first = min(begun.values())
    final = max(last.values())
    return Timing(wall, cpu, before, first - launched, solve, final - first, final - min(last.values()), ended - final,
                  len(lines), sorted(b - launched for b in begun.values()))


def best(runs: list[Timing]) -> Timing:
    return min(runs, key=lambda t: t.wall)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="about 300 scenarios of a 10-minute mission")
    parser.add_argument("--repeats", type=int, default=3, help="runs of each command (default 3, the best kept)")
    args = parser.parse_args()
    seconds, axis, scales = (600, 7, 1) if args.quick else (3600, 10, 10)
    repeats = 1 if args.quick else args.repeats
    axes = sweep_axes(scales, axis)
    count = axis ** 3 * scales
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        mission = write_mission(seconds, folder)
        log = folder / "chunks.jsonl"

        def sweep(workers: int, out: str, options: list[str]) -> list[str]:
            return [*THERMOELEC, "sweep", str(mission), "--out", str(folder / out), "--workers", str(workers),
                    "--no-figures", "--quiet", "--force", *options]

        one_scenario = sweep(1, "single", ["--sweep", "thermal.ambient_temperature=25 degC"])
        subprocess.run(one_scenario, check=True, stdout=subprocess.DEVNULL)  # kernels from numba's cache
        load = os.getloadavg()[0]
        runs: dict[int, list[Timing]] = {1: [], 2: []}
        for _ in range(repeats):  # interleaved, so a burst of load elsewhere hits both alike
            for workers in (1, 2):
                runs[workers].append(timed(sweep(workers, f"w{workers}", axes), cores(workers), log))
        single = best([timed(one_scenario, cores(1), log) for _ in range(max(repeats, 2))])
        load = max(load, os.getloadavg()[0])

    one, two = best(runs[1]), best(runs[2])
    ratio = one.wall / two.wall
    print(f"thermoelec sweep of {count} scenarios, {seconds // 60} min missions at 1 Hz, metrics only; "
          f"best of {repeats}; load average up to {load:.2f} (1 min) while measuring")
    print(f"{'':>22} {'wall [s]':>9} {'start-up [s]':>13} {'solve/process [s]':>18} {'span [s]':>9} "
          f"{'tail [s]':>9} {'gather+out [s]':>15} {'chunks':>7}")
    for label, t in (("--workers 1, 1 core", one), ("--workers 2, 2 cores", two)):
        solves = " + ".join(f"{v:.1f}" for v in sorted(t.solve.values(), reverse=True))
        print(f"{label:>22} {t.wall:9.2f} {t.startup:13.2f} {solves:>18} {t.span:9.2f} {t.tail:9.2f} "
              f"{t.gather:15.2f} {t.chunks:7d}")
    print(f"every run, wall [s]: 1 worker {', '.join(f'{t.wall:.1f}' for t in runs[1])}; "
          f"2 workers {', '.join(f'{t.wall:.1f}' for t in runs[2])}")
    print("each process's first chunk began after [s]: " + "; ".join(
        f"{w} worker{'s' if w > 1 else ''} " + ", ".join(f"{b:.2f}" for b in t.first)
        for w, t in ((1, one), (2, two))))
    for label, t in (("1 worker", one), ("2 workers", two)):
        print(f"CPU time of the solves, {label} [s]: " + " + ".join(f"{v:.1f}" for v in t.cpu.values())
              + "; each process's CPU time before its first chunk [s]: "
              + ", ".join(f"{v:.2f}" for v in t.before.values()))
    print(f"CPU time of the solves, 2 workers / 1 worker: {sum(two.cpu.values()) / sum(one.cpu.values()):.2f} "
          "(what solving on two processes costs in all, whatever the load)")
    print(f"fixed start-up, a one-scenario sweep: {single.wall:.2f} s wall")
    print(f"ratio 1 worker / 2 workers: {ratio:.2f} (target >= {TARGET}: {'met' if ratio >= TARGET else 'not met'})")


if __name__ == "__main__":
    main()
