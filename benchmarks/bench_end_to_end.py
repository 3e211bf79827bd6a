"""A sweep end to end, figures included: where its wall time goes, against a hand-written floor in the same run.

``thermoelec sweep FILE --out DIR --workers 2`` as a user runs it, in a fresh
process, on the mission of ``bench_single_mission.py`` (1 h at 1 Hz, 3 600
power segments with regeneration) swept over ambient x sink conductance x
initial SoC (1 000 scenarios) and x demand scale (10 000); the targets are under
3 s and under 15 s. From the chunk log (``THERMOELEC_SWEEP_TIMING``) and the
same command with ``--no-figures``, alternated with it, the wall time is split
into:

- fixed cost: the launch until the first chunk begins (imports, scenario, plan);
- solve: the first chunk's start to the last chunk's end, two processes;
- output: the last chunk's end to the end of the ``--no-figures`` command
  (gather, ``sweep.nc``, ``sweep.csv``, the summary);
- figures: what the figures add to that (the heat maps, PNG and SVG).

The reference, in the same run: the tight floor of ``tight_floor.py``
(fixed-step RK4 of the same equations, one step per segment, constants compiled
in, no limits, no integrals, no output) as a whole fresh process on one core,
numpy and numba imported and the loop compiled, over the same scenarios; and its
loop time alone split over two cores. The ratios to thermoelec's wall time are
printed.

Run: ``.venv/bin/python benchmarks/bench_end_to_end.py`` (``--quick``: 64
scenarios of a 2-minute mission, a check that the script works).
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

import numpy as np
from bench_sweep_scale import THERMOELEC, sweep_axes, write_mission

import thermoelec
from thermoelec.analysis.sweep.run import TIMING_ENV

#: Targets of the end-to-end wall time [s] by the number of scenarios.
TARGETS = {1_000: 3.0, 10_000: 15.0}
HERE = Path(__file__).resolve().parent

#: The floor as a whole process: arrays from ``argv[1]`` (.npz), RK4 over every demand scale; prints the loop's time.
FLOOR_JOB = """
import sys, time
import numpy as np
from tight_floor import rk4_floor
data = np.load(sys.argv[1])
rk4_floor(data["powers"][:2], data["ambient"][:1], data["g_sa"][:1], data["soc0"][:1], data["t0"][:1])
started = time.perf_counter()
for scale in data["scales"]:
    rk4_floor(data["powers"] * scale, data["ambient"], data["g_sa"], data["soc0"], data["t0"])
print(time.perf_counter() - started)
"""


@dataclass
class Split:
    """One command's wall time and its parts from the chunk log [s]."""

    wall: float
    fixed: float  # launch to the first chunk's start
    solve: float  # first chunk's start to the last chunk's end
    after: float  # last chunk's end to the command's end


def timed(command: list[str], log: Path) -> Split:
    """Run ``command`` with its chunk log in ``log``; its wall time split by the log."""
    log.unlink(missing_ok=True)
    launched = time.time()
    started = time.perf_counter()
    subprocess.run(command, check=True, stdout=subprocess.DEVNULL, env={**os.environ, TIMING_ENV: str(log)})
    wall = time.perf_counter() - started
    lines = [json.loads(line) for line in log.read_text().splitlines()]
    first = min(line["began"] for line in lines)
    last = max(line["ended"] for line in lines)
    return Split(wall, first - launched, last - first, launched + wall - last)


def floor_inputs(mission: Path, axis: int, n_scale: int, path: Path) -> int:
    """Write the floor's arrays for the grid of :func:`bench_sweep_scale.sweep_axes`; returns the scenario count."""
    problem = thermoelec.load_scenario(mission).problem()
    powers = np.array([segment.value for segment in problem.segments])
    ambient, g_sa, soc0 = np.meshgrid(273.15 + np.linspace(-10, 40, axis), np.linspace(0.3, 3.0, axis),
                                      np.linspace(0.6, 0.95, axis), indexing="ij")
    # the mission starts at the ambient temperature (no initial temperature of its own)
    assert problem.initial_cell_temperature == problem.ambient_temperature
    scales = np.linspace(0.6, 1.4, n_scale) if n_scale > 1 else np.array([1.0])
    np.savez(path, powers=powers, ambient=ambient.ravel(), g_sa=g_sa.ravel(), soc0=soc0.ravel(),
             t0=ambient.ravel(), scales=scales)
    return ambient.size * scales.size


def floor_process(inputs: Path) -> tuple[float, float]:
    """Wall time of the floor as a fresh process, and its loop's time, both on one core [s]."""
    started = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", FLOOR_JOB, str(inputs)], check=True, capture_output=True,
                          text=True, cwd=HERE, env={**os.environ, "PYTHONPATH": str(HERE)})
    return time.perf_counter() - started, float(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="64 scenarios of a 2-minute mission")
    parser.add_argument("--repeats", type=int, default=2, help="runs of each command (default 2, the best kept)")
    args = parser.parse_args()
    seconds, axis, sizes = (120, 4, (1,)) if args.quick else (3600, 10, (1, 10))
    repeats = 1 if args.quick else args.repeats
    rows = []
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        mission = write_mission(seconds, folder)
        log = folder / "chunks.jsonl"
        warm = [*THERMOELEC, "sweep", str(mission), "--out", str(folder / "warm"), "--quiet", "--no-figures",
                "--sweep", "thermal.ambient_temperature=25 degC"]
        subprocess.run(warm, check=True, stdout=subprocess.DEVNULL)  # kernels and unit conversions cached
        for n_scale in sizes:
            sweep = [*THERMOELEC, "sweep", str(mission), "--workers", "2", "--quiet", "--force",
                     *sweep_axes(n_scale, axis)]
            inputs = folder / f"floor_{n_scale}.npz"
            count = floor_inputs(mission, axis, n_scale, inputs)
            figures, bare, floors = [], [], []
            for _ in range(repeats):
                figures.append(timed([*sweep, "--out", str(folder / "figures")], log))
                bare.append(timed([*sweep, "--out", str(folder / "bare"), "--no-figures"], log))
                floors.append(floor_process(inputs))
            rows.append((count, min(figures, key=lambda s: s.wall), min(bare, key=lambda s: s.wall),
                         min(f[0] for f in floors), min(f[1] for f in floors)))

    hours = seconds / 3600.0
    print(f"thermoelec sweep --workers 2 end to end, {seconds // 60} min missions at 1 Hz; best of {repeats}")
    print(f"{'scenarios':>10} {'wall [s]':>9} {'fixed':>7} {'solve':>7} {'output':>7} {'figures':>8}  "
          f"{'no figures':>10}  {'floor process':>13} {'floor loop/2':>12}  {'wall/floor':>10}  target")
    for count, with_figures, without, floor_wall, floor_loop in rows:
        figure_cost = with_figures.after - without.after
        target = TARGETS.get(count)
        verdict = f"< {target:g} s: {'met' if with_figures.wall < target else 'not met'}" if target else "-"
        print(f"{count:>10} {with_figures.wall:9.2f} {with_figures.fixed:7.2f} {with_figures.solve:7.2f} "
              f"{without.after:7.2f} {figure_cost:8.2f}  {without.wall:10.2f}  {floor_wall:13.2f} "
              f"{floor_loop / 2:12.2f}  {with_figures.wall / floor_wall:10.2f}  {verdict}")
        print(f"{'':>10} solve rate {count * hours / with_figures.solve:.0f} scenario-hours/s on 2 processes; "
              f"the floor's loop {count * hours / floor_loop:.0f} on one core")


if __name__ == "__main__":
    main()
