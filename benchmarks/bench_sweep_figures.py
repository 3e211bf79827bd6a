"""The share of a sweep's wall time its figures take, end to end, on a 10 x 10 x 100 grid.

The mission of ``bench_single_mission.py`` (1 h at 1 Hz, 3 600 power segments
with regeneration) swept over 10 ambient temperatures x 10 sink conductances x
100 initial SoC values: 10 000 scenarios, the third key faceted in the heat
maps. Measured in the same run:

- ``thermoelec sweep FILE --out DIR --workers 2`` as a user runs it (a fresh
  process, figures included): its wall time, best of two;
- the reference: the same command with ``--no-figures``, alternated with it;
- the figures alone: ``write_sweep_figures`` on the dataset that run wrote
  (PNG and SVG of both heat maps), timed in this process.

Printed: the figures' share of the end-to-end time (target: under 10 %), both
from the figures' own time and from the difference of the two commands. The
heat maps draw at most 12 facets whatever the size of the third key, so their
time is bounded; before that bound, a 10 x 10 x 100 sweep took 159 s, most of
it drawing 100 facets.

Run: ``.venv/bin/python benchmarks/bench_sweep_figures.py`` (``--quick``: a
4 x 4 x 20 grid of a 10-minute mission, to check that the script works).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from bench_sweep_scale import THERMOELEC, write_mission


def axes(n_ambient: int, n_sink: int, n_soc: int) -> list[str]:
    """``--sweep`` options of the grid: ambient x sink conductance x initial SoC."""
    def values(lo: float, hi: float, n: int, unit: str) -> str:
        return ",".join(f"{v:.6g} {unit}".strip() for v in np.linspace(lo, hi, n))

    return ["--sweep", f"thermal.ambient_temperature={values(-10, 40, n_ambient, 'degC')}",
            "--sweep", f"thermal.sink_to_ambient={values(0.3, 3.0, n_sink, 'W/K')}",
            "--sweep", f"cell.initial_soc={values(0.5, 0.95, n_soc, '')}"]


def timed(command: list[str]) -> float:
    """Wall time [s] of one command in a fresh process."""
    started = time.perf_counter()
    proc = subprocess.run(command, capture_output=True, text=True)
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(command[:4])} ... exited with {proc.returncode}: {proc.stderr[-2000:]}")
    return time.perf_counter() - started


def figures_alone(out: Path) -> float:
    """Time [s] of drawing and writing the heat maps of the sweep in ``out`` (as the command does)."""
    import xarray as xr

    from thermoelec.output.sweep_figures import write_sweep_figures

    with xr.open_dataset(out / "sweep.nc") as ds:
        ds = ds.load()
    started = time.perf_counter()
    write_sweep_figures(ds, out / "again")
    return time.perf_counter() - started


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a 4 x 4 x 20 grid of a 10-minute mission")
    parser.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    parser.add_argument("--repeats", type=int, default=2, help="runs of each command, alternated (default 2)")
    args = parser.parse_args()
    seconds, grid = (600, (4, 4, 20)) if args.quick else (3600, (10, 10, 100))
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        mission = write_mission(seconds, folder)
        sweep = [*THERMOELEC, "sweep", str(mission), "--workers", str(args.workers), "--quiet", *axes(*grid)]
        # warm numba's cache once, so neither timed command pays the compile
        timed([*THERMOELEC, "sweep", str(mission), "--out", str(folder / "warm"), "--quiet", "--no-figures",
               "--workers", "1", *axes(2, 1, 1)])
        # alternated, best of each: the machine is shared, and a first command pays for cold caches
        without = with_figures = float("inf")
        for k in range(args.repeats):
            without = min(without, timed([*sweep, "--out", str(folder / f"without{k}"), "--no-figures"]))
            with_figures = min(with_figures, timed([*sweep, "--out", str(folder / "with")]))
        (folder / "with" / "again").mkdir()
        drawing = figures_alone(folder / "with")
    n = int(np.prod(grid))
    print(f"thermoelec sweep, {grid[0]} x {grid[1]} x {grid[2]} = {n} scenarios of a {seconds} s 1 Hz mission, "
          f"{args.workers} workers")
    print(f"  end to end with figures     {with_figures:8.2f} s")
    print(f"  reference, --no-figures     {without:8.2f} s")
    print(f"  the heat maps alone         {drawing:8.2f} s  (2 metrics, PNG and SVG, at most 12 facets)")
    print(f"  figures' share of the wall time: {drawing / with_figures:.1%} (their own time), "
          f"{max(with_figures - without, 0.0) / with_figures:.1%} (difference of the commands); target < 10 %")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
