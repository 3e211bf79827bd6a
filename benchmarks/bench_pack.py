"""Resolved packs: every cell its own states, on the batched solver and on CVODE, against the lumped run and a loop.

The mission of the demo (``scenarios/cargo_robot_pack.toml``): one hour at 1 Hz,
3 600 power segments with regeneration, one RC pair, a 2-D R0 table, entropic
heat, cells built with a spread, neighbour conduction, wall cells and a coolant
along the rows. Two packs: the demo's 14s4p (56 cells, 181 states) and a 96s4p
of the same cells and plate (384 cells, 1 165 states; demand and coolant flow
scaled with the cells, so each cell works as hard).

Measured in the same run, each by its best of ``--repeats`` (the machine is noisy):

- the resolved pack on the batched solver and on CVODE (the engine's driver,
  Krylov linear solves), wall time of the integration (targets: 14s4p under 1 s
  batched and under 10 s on CVODE, 96s4p under 5 s on one core);
- the same scenario with the lumped pack (identical cells in one node), on both
  engines: what resolving the cells costs;
- the reference a user would write: ``solve_ivp`` (LSODA, rtol 1e-6) restarted at
  every segment on the same per-cell equations (the engine's right-hand side for
  every cell); for the 96s4p only its first ``--reference-seconds`` (default 600 s),
  scaled to the hour (its cost per segment is steady);
- the accuracy of each: the hottest cell's peak (over the loop's span) against CVODE
  at rtol 1e-10, every engine at rtol 1e-6;
- a sweep of 1 000 builds of the 14s4p pack (``pack.spread.seed`` = 1 .. 1 000) with
  ``thermoelec sweep --workers 2`` end to end in a fresh process (target: under
  3 minutes; figures left out, ``--no-figures``).

Run: ``.venv/bin/python benchmarks/bench_pack.py`` (``--quick`` for a 5-minute
mission, 20 builds and one repeat, which only checks that the script works).
"""

from __future__ import annotations

import argparse
import math
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

import thermoelec
from thermoelec.engine import batch
from thermoelec.engine import layout as L
from thermoelec.engine import model as m
from thermoelec.engine.driver import integrate_problem
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import pack_parameters
from thermoelec.physics.loads import LOAD_MODES

DEMO = Path(__file__).resolve().parents[1] / "scenarios" / "cargo_robot_pack.toml"
THERMOELEC = [sys.executable, "-m", "thermoelec.cli"]
TARGETS = {("14s4p", "batched"): 1.0, ("14s4p", "CVODE"): 10.0, ("96s4p", "batched"): 5.0}
SWEEP_TARGET = 180.0


def packs() -> dict[str, thermoelec.Scenario]:
    """The demo pack and its 96s4p sibling (the mission is cut to length by :func:`first`)."""
    demo = thermoelec.load_scenario(DEMO)
    big = demo.with_overrides({"pack.series": 96, "pack.layout.columns": 96, "profile.scale": 96 / 14,
                               "thermal.coolant.plate_conductance": f"{0.1 * 384} W/K",
                               "thermal.coolant.flow_rate": f"{0.004 * 96 / 14} kg/s"})
    return {"14s4p": demo, "96s4p": big}


def lumped(scenario: thermoelec.Scenario) -> thermoelec.Scenario:
    """The same scenario with the lumped pack, identical cells in one node: what resolving the cells costs."""
    return scenario.with_overrides({"pack": {"series": scenario.spec.pack.series,
                                             "parallel": scenario.spec.pack.parallel}})


def first(problem, seconds: float):
    """The problem cut to the segments of its first ``seconds``."""
    if seconds >= sum(s.duration for s in problem.segments):
        return problem
    ends = np.cumsum([s.duration for s in problem.segments])
    return replace(problem, segments=problem.segments[:int(np.searchsorted(ends, seconds, side="right"))])


def on_cvode(problem, rtol: float = 1e-6) -> tuple[float, float]:
    """Wall time [s] and the hottest cell's peak [degC] on the engine's CVODE driver."""
    trajectory = integrate_problem(problem, SolverOptions(rtol=rtol))
    assert trajectory.status == "ok", trajectory.message
    hot = trajectory.algebraics()[:, L.A_TEMPERATURE_HIGH].max()
    return trajectory.wall_time, float(hot - 273.15)


def on_batch(problem) -> tuple[float, float]:
    """Wall time [s] and the hottest cell's peak [degC] on the batched solver (one scenario)."""
    started = time.perf_counter()
    outcome = batch.solve_batch([problem], SolverOptions())
    wall = time.perf_counter() - started
    assert outcome.status == ["ok"], outcome.status
    return wall, float(outcome.extras[0][batch.X_TC_MAX] - 273.15)


def segment_loop(problem) -> tuple[float, float]:
    """What a user writes: ``solve_ivp`` LSODA restarted at every segment on the same per-cell equations."""
    p = pack_parameters(problem)
    kernels = m.Kernels(p, problem.n_states)
    atol = SolverOptions().atol_vector(problem.n_rc, problem.n_cells)
    temperature = L.cell_state_indices(problem.n_rc, problem.n_cells)[1]
    y = problem.initial_state()
    hot = y[temperature].max()
    t = 0.0
    started = time.perf_counter()
    for seg in problem.segments:
        p[L.H_MODE] = LOAD_MODES[seg.mode].code if seg.mode in LOAD_MODES else LOAD_MODES["current"].code
        p[L.H_VALUE] = seg.value
        sol = solve_ivp(kernels.scipy_rhs, (t, t + seg.duration), y, method="LSODA", rtol=1e-6, atol=atol)
        y = sol.y[:, -1]
        hot = max(hot, sol.y[temperature].max())
        t += seg.duration
    return time.perf_counter() - started, float(hot - 273.15)


def best(repeats: int, job) -> tuple[float, float]:
    """The best wall time of ``repeats`` runs, and the value the job reports."""
    wall, value = math.inf, math.nan
    for _ in range(repeats):
        w, value = job()
        wall = min(wall, w)
    return wall, value


def timed_sweep(builds: int, folder: Path) -> float:
    """Wall time [s] of ``thermoelec sweep`` over ``builds`` seeds of the demo pack, two workers, end to end."""
    seeds = ",".join(str(k) for k in range(1, builds + 1))
    command = [*THERMOELEC, "sweep", str(DEMO), "--out", str(folder / "sweep"), "--workers", "2", "--quiet",
               "--no-figures", "--sweep", f"pack.spread.seed={seeds}"]
    started = time.perf_counter()
    code = subprocess.run(command, check=False).returncode
    if code != 0:
        raise SystemExit(f"thermoelec sweep exited with {code}")
    return time.perf_counter() - started


def report_pack(name: str, scenario: thermoelec.Scenario, seconds: int, repeats: int,
                reference_seconds: int) -> None:
    problem = first(scenario.problem(), seconds)
    estimate = first(lumped(scenario).problem(), seconds)
    on_batch(first(problem, 5))  # compile / load the jitted kernels once, outside the timings
    on_batch(first(estimate, 5))
    walls = {"resolved, batched": best(repeats, lambda: on_batch(problem))[0],
             "resolved, CVODE": best(repeats, lambda: on_cvode(problem))[0],
             "lumped, batched": best(repeats, lambda: on_batch(estimate))[0],
             "lumped, CVODE": best(repeats, lambda: on_cvode(estimate))[0]}
    # the loop a user writes, on the first reference_seconds (the whole mission for the 14s4p pack)
    span = min(seconds, reference_seconds)
    part = first(problem, span)
    loop_wall, loop_hot = segment_loop(part)
    loop_wall *= seconds / span
    # accuracy over that span: the hottest cell's peak against CVODE at rtol 1e-10
    truth = on_cvode(part, 1e-10)[1]
    errors = {"batched": on_batch(part)[1] - truth, "CVODE": on_cvode(part)[1] - truth, "loop": loop_hot - truth}
    print(f"\n{name}: {problem.n_cells} cells, {problem.n_states} states, {len(problem.segments)} power segments "
          f"of 1 s")
    print(f"  {'engine':<32} {'wall [s]':>9} {'target':>9} {'/ lumped':>9} {'loop / it':>10} {'peak error [K]':>15}")
    for label, wall in walls.items():
        engine = label.split(", ")[1]
        resolved = label.startswith("resolved")
        target = TARGETS.get((name, engine)) if resolved else None
        ratio = f"{wall / walls[f'lumped, {engine}']:9.2f}" if resolved else f"{'':>9}"
        error = f"{errors[engine]:15.1e}" if resolved else ""
        print(f"  {label:<32} {wall:9.3f} {(f'< {target:g} s' if target else ''):>9} {ratio} "
              f"{loop_wall / wall:10.2f} {error}")
    scaled = f"  (its first {span} s, scaled)" if span < seconds else ""
    print(f"  {'solve_ivp LSODA loop, per cell':<32} {loop_wall:9.3f} {'':>9} {'':>9} {1.0:10.2f} "
          f"{errors['loop']:15.1e}{scaled}")
    print(f"  (peak error: the hottest cell's peak over the first {span} s against CVODE at rtol 1e-10; "
          "every engine at rtol 1e-6)")
    for engine in ("batched", "CVODE"):
        target = TARGETS.get((name, engine))
        if target is not None:
            wall = walls[f"resolved, {engine}"]
            print(f"  target {name} on the {engine} engine < {target:g} s: {'met' if wall < target else 'NOT met'} "
                  f"({wall:.3f} s)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a 5-minute mission, 20 builds, one repeat")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--reference-seconds", type=int, default=600,
                        help="seconds of the 96s4p mission the solve_ivp loop runs (scaled to the whole)")
    parser.add_argument("--builds", type=int, default=1000, help="scenarios of the sweep")
    args = parser.parse_args()
    seconds = 300 if args.quick else 3600
    repeats = 1 if args.quick else args.repeats
    builds = 20 if args.quick else args.builds
    for name, scenario in packs().items():
        report_pack(name, scenario, seconds, repeats, seconds if name == "14s4p" else args.reference_seconds)
    with tempfile.TemporaryDirectory() as folder:
        wall = timed_sweep(builds, Path(folder))
    per_second = builds / wall
    print(f"\nsweep of {builds} builds of the 14s4p pack (pack.spread.seed), thermoelec sweep --workers 2, end to end: "
          f"{wall:.1f} s, {per_second:.1f} scenario-hours a second")
    if builds == 1000:
        print(f"  target < {SWEEP_TARGET:g} s: {'met' if wall < SWEEP_TARGET else 'NOT met'}")
    else:
        print(f"  (target: 1 000 builds in < {SWEEP_TARGET:g} s; a run this small is mostly start-up: the full "
              "run measures the target)")


if __name__ == "__main__":
    main()
