"""Fixed cost of a command: start-up and output of ``thermoelec run`` and of a one-scenario ``thermoelec sweep``.

What a user waits for on a short mission is mostly not the solve: it is the
interpreter, the libraries and the kernels loading, and the result files being
written. Measured, each in fresh processes, the best of several runs (the
machine is shared and noisy):

- the floor: ``python -c pass`` and ``python -c "import numpy, scipy, pandas"``
  (what any scientific Python command pays before doing anything);
- ``thermoelec run MISSION --out DIR --no-figures`` of the 10-minute mission of
  ``bench_single_mission.py`` (1 Hz power profile with regeneration, one RC
  pair, a 2-D R0 table, entropic heat, 4s2p), summary, time series CSV and NetCDF;
- the same ``run`` and sweep with ``THERMOELEC_AOT=0``: their kernels from
  numba's cache, not from the ahead-of-time build ``make setup`` makes
  (``thermoelec.jit``);
- ``thermoelec sweep MISSION --out DIR --no-figures --sweep KEY=ONE_VALUE``: the
  same mission as a one-scenario sweep (batched solver, ``sweep.nc`` and ``sweep.csv``);
- the solve alone, in this process after a first call: the CVODE integration
  of the mission (``integrate_problem``) and the batched solve of the sweep's one
  scenario (``run_chunk``).

Printed: each wall time, the fixed cost (wall - solve), its ratio to the floor,
and whether each command meets the target of 1.5 s wall. A first command
compiles the kernels (or loads them from numba's cache) and fills the unit
conversion cache; one untimed run of each command comes first, as after any
first use.

Run: ``.venv/bin/python benchmarks/bench_fixed_cost.py`` (``--quick`` for one
timed run of each, a check that the script works).
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_sweep_scale import write_mission

import thermoelec
from thermoelec import jit
from thermoelec.analysis import sweep
from thermoelec.engine.driver import integrate_problem

#: The target for each command's wall time [s].
TARGET_S = 1.5
#: The mission [s] (10 minutes at 1 Hz).
MISSION_S = 600
SWEEP_ITEM = "thermal.ambient_temperature=25 degC"
THERMOELEC = [sys.executable, "-m", "thermoelec.cli"]


def fresh_wall(command: list[str], repeats: int, env: dict[str, str] | None = None) -> float:
    """The best wall time [s] of ``repeats`` fresh processes running ``command`` (in ``env``, default ours)."""
    best = float("inf")
    for _ in range(repeats):
        started = time.perf_counter()
        subprocess.run(command, check=True, stdout=subprocess.DEVNULL, env=env)
        best = min(best, time.perf_counter() - started)
    return best


def best_of(task, repeats: int) -> float:
    """The best time [s] of ``repeats`` calls of ``task`` in this process."""
    best = float("inf")
    for _ in range(repeats):
        started = time.perf_counter()
        task()
        best = min(best, time.perf_counter() - started)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one timed run of each (checks the script works)")
    parser.add_argument("--repeats", type=int, default=5, help="fresh processes per command (default 5)")
    args = parser.parse_args()
    repeats = 1 if args.quick else args.repeats
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        mission = write_mission(MISSION_S, folder)
        run = [*THERMOELEC, "run", str(mission), "--out", str(folder / "run"), "--no-figures", "--quiet"]
        one = [*THERMOELEC, "sweep", str(mission), "--out", str(folder / "sweep"), "--no-figures", "--quiet",
               "--sweep", SWEEP_ITEM]
        numba_only = {**os.environ, jit.AOT_ENV: "0"}
        for command in (run, one):  # kernels from numba's cache, conversions from the unit cache
            subprocess.run(command, check=True, stdout=subprocess.DEVNULL)
        for command in (run, one):
            subprocess.run(command, check=True, stdout=subprocess.DEVNULL, env=numba_only)
        floors = {"python -c pass": fresh_wall([sys.executable, "-c", "pass"], repeats),
                  "import numpy, scipy, pandas": fresh_wall([sys.executable, "-c", "import numpy, scipy, pandas"],
                                                            repeats)}
        walls = {"run --no-figures": fresh_wall(run, repeats),
                 "run, numba only": fresh_wall(run, repeats, numba_only),
                 "one-scenario sweep": fresh_wall(one, repeats),
                 "sweep, numba only": fresh_wall(one, repeats, numba_only)}

        scenario = thermoelec.load_scenario(mission)
        problem, options = scenario.problem(), scenario.solver_options()
        plan = sweep.plan_sweep(scenario, [SWEEP_ITEM])

        def solve_run() -> None:
            assert integrate_problem(problem, options).status == "ok"

        def solve_sweep() -> None:
            (row,) = sweep.run_chunk(scenario, plan, [0])
            assert row["status"] == "ok", row.get("message")

        solve_run(), solve_sweep()  # the kernels loaded once in this process
        solves = {"run --no-figures": best_of(solve_run, max(repeats, 2)),
                  "one-scenario sweep": best_of(solve_sweep, max(repeats, 2))}
        solves["run, numba only"] = solves["run --no-figures"]
        solves["sweep, numba only"] = solves["one-scenario sweep"]

    floor = floors["import numpy, scipy, pandas"]
    build = jit.find_build(jit.build_folder())
    print(f"fixed cost of a command, {MISSION_S // 60}-minute mission at 1 Hz; best of {repeats} fresh processes")
    kernels = f"built ahead of time, {build.name}" if build else "no ahead-of-time build (make setup)"
    print(f"  kernels: {kernels}")
    for label, wall in floors.items():
        print(f"  floor: {label:<29} {wall:6.2f} s")
    print(f"{'command':<20} {'wall [s]':>9} {'solve [s]':>10} {'fixed [s]':>10} {'fixed / floor':>14}  "
          f"target < {TARGET_S} s")
    for label, wall in walls.items():
        solve = solves[label]
        fixed = wall - solve
        print(f"{label:<20} {wall:9.2f} {solve:10.3f} {fixed:10.2f} {fixed / floor:14.1f}  "
              f"{'met' if wall < TARGET_S else 'not met'}")


if __name__ == "__main__":
    main()
