"""Sweep scale, end to end: ``thermoelec sweep`` with two local workers, up to 10 000 one-hour scenarios.

The mission of ``bench_single_mission.py`` (1 h at 1 Hz, 3 600 power segments
with regeneration, one RC pair, 2-D R0 table, entropic heat), in a scenario
file swept over ambient x sink conductance x initial SoC x demand scale, run as
a user runs it: ``thermoelec sweep FILE --out DIR --workers 2`` in a fresh
process, metrics only (the default), start-up, chunk checkpoints and the
final ``sweep.nc`` included.

Measured, in the same run:

- wall time and peak memory (resident set of the command and its workers,
  summed, sampled every 50 ms) for 1 000, 2 000, 5 000 and 10 000 scenarios
  (targets: 10 000 in under 60 s, under 2 GB); the least-squares slope and
  intercept of wall time against the number of scenarios, and the largest
  relative departure from that line (linear growth);
- wall time for 5 000 scenarios of 15, 30 and 60 min missions: the slope per
  scenario-hour and the departure from the line;
- the reference: the loop a user would write (``solve_ivp`` LSODA restarted at
  every segment, rtol 1e-6), timed per scenario on a few scenarios and scaled to
  10 000 scenarios on two cores; the ratio is printed.

Run: ``.venv/bin/python benchmarks/bench_sweep_scale.py`` (``--quick`` for a
small check that the script works).
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np
import psutil
from bench_single_mission import mission_scenario, segment_loop

import thermoelec
from thermoelec.engine.options import SolverOptions

THERMOELEC = [sys.executable, "-m", "thermoelec.cli"]


def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return '"' + value + '"'
    if isinstance(value, list):
        return "[" + ", ".join(_toml_value(v) for v in value) + "]"
    return repr(value)


def _toml(data: dict, prefix: str = "") -> str:
    """TOML text of the benchmark scenario (tables, arrays of tables, scalars, lists)."""
    lines, tables = [], []
    for key, value in data.items():
        if isinstance(value, dict) or (isinstance(value, list) and value and isinstance(value[0], dict)):
            tables.append((key, value))
        else:
            lines.append(f"{key} = {_toml_value(value)}")
    text = "\n".join(lines) + "\n"
    for key, value in tables:
        name = f"{prefix}.{key}" if prefix else key
        for item in value if isinstance(value, list) else [value]:
            text += f"\n[[{name}]]\n" if isinstance(value, list) else f"\n[{name}]\n"
            text += _toml(item, name)
    return text


def write_mission(seconds: int, folder: Path) -> Path:
    path = folder / f"mission_{seconds}s.toml"
    path.write_text(_toml(mission_scenario(seconds, folder)))
    return path


def sweep_axes(n_scale: int, axis: int) -> list[str]:
    """``--sweep`` options: ambient x conductance x SoC on ``axis`` values each, x ``n_scale`` demand scales."""
    def values(lo: float, hi: float, unit: str) -> str:
        return ",".join(f"{v:.4g} {unit}".strip() for v in np.linspace(lo, hi, axis))

    options = ["--sweep", f"thermal.ambient_temperature={values(-10, 40, 'degC')}",
               "--sweep", f"thermal.sink_to_ambient={values(0.3, 3.0, 'W/K')}",
               "--sweep", f"cell.initial_soc={values(0.6, 0.95, '')}"]
    if n_scale > 1:
        options += ["--sweep", f"profile.scale={','.join(f'{v:.3g}' for v in np.linspace(0.6, 1.4, n_scale))}"]
    return options


def timed_sweep(path: Path, out: Path, axes: list[str], workers: int) -> tuple[float, float]:
    """Wall time [s] and peak summed resident memory [bytes] of one ``thermoelec sweep`` command."""
    command = [*THERMOELEC, "sweep", str(path), "--out", str(out), "--workers", str(workers), "--quiet",
               "--no-figures", *axes]
    started = time.perf_counter()
    proc = subprocess.Popen(command)
    peak = 0
    watched = psutil.Process(proc.pid)
    stop = threading.Event()

    def sample() -> None:
        nonlocal peak
        while not stop.is_set():
            try:
                total = watched.memory_info().rss + sum(c.memory_info().rss for c in watched.children(recursive=True))
            except psutil.Error:
                total = 0
            peak = max(peak, total)
            time.sleep(0.05)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    code = proc.wait()
    wall = time.perf_counter() - started
    stop.set()
    sampler.join()
    if code != 0:
        raise SystemExit(f"thermoelec sweep exited with {code}")
    return wall, peak


def fit_line(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float]:
    """Slope, intercept and the largest relative departure of ``y`` from the least-squares line."""
    slope, intercept = np.polyfit(x, y, 1)
    departure = float(np.max(np.abs(y - (slope * x + intercept)) / y))
    return float(slope), float(intercept), departure


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="2-minute missions, up to 128 scenarios")
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    seconds = 120 if args.quick else 3600
    axis = 4 if args.quick else 10
    scales = (1, 2) if args.quick else (1, 2, 5, 10)
    with tempfile.TemporaryDirectory() as name:
        folder = Path(name)
        mission = write_mission(seconds, folder)
        subprocess.run([*THERMOELEC, "run", str(mission), "--out", str(folder / "warm"), "--quiet",
                        "--no-figures"], check=True)  # compiled kernels cached on disk, as after any first run
        counts, walls, peaks = [], [], []
        for n_scale in scales:
            wall, peak = timed_sweep(mission, folder / f"n{n_scale}", sweep_axes(n_scale, axis), args.workers)
            counts.append(axis ** 3 * n_scale)
            walls.append(wall)
            peaks.append(peak)
        # mission length at the size whose solving time dwarfs the start-up (the third size)
        lengths, length_walls = [], []
        for minutes in ((1,) if args.quick else (15, 30)):
            path = write_mission(60 * minutes, folder)
            wall, _ = timed_sweep(path, folder / f"m{minutes}", sweep_axes(scales[-2], axis), args.workers)
            lengths.append(minutes / 60.0)
            length_walls.append(wall)
        lengths.append(seconds / 3600.0)
        length_walls.append(walls[-2])
        problem = thermoelec.load_scenario(mission).problem()
    atol = SolverOptions(rtol=1e-6).atol_vector(problem.n_rc)
    t_lsoda = float(np.mean([segment_loop(problem, "LSODA", 1e-6, atol)[0] for _ in range(2)]))

    counts_a, walls_a = np.array(counts, float), np.array(walls)
    slope, intercept, departure = fit_line(counts_a, walls_a)
    h_slope, h_intercept, h_departure = fit_line(np.array(lengths), np.array(length_walls))
    largest = counts[-1]
    lsoda_total = t_lsoda * largest / args.workers
    print(f"thermoelec sweep, {args.workers} local workers, {seconds / 60:.0f} min missions at 1 Hz, metrics only")
    print(f"{'scenarios':>10} {'wall [s]':>9} {'scenarios/s':>12} {'peak memory [MB]':>17}")
    for n, wall, peak in zip(counts, walls, peaks, strict=True):
        print(f"{n:>10} {wall:9.1f} {n / wall:12.0f} {peak / 2**20:17.0f}")
    print(f"linear in scenarios: {slope * 1e3:.2f} ms per scenario + {intercept:.1f} s start-up; "
          f"largest departure from the line {departure:.1%}")
    n_length = counts[-2]
    print(f"linear in mission length ({n_length} scenarios of 15, 30, 60 min): "
          f"{h_slope / n_length * 1e3:.2f} ms per scenario-hour + {h_intercept:.1f} s; "
          f"largest departure from the line {h_departure:.1%}")
    print(f"{largest} scenarios: {walls[-1]:.1f} s (target < 60 s), peak memory {peaks[-1] / 2**30:.2f} GB "
          f"(target < 2 GB)")
    print(f"the solve_ivp LSODA loop: {t_lsoda:.3f} s per scenario, {lsoda_total:.0f} s for {largest} on "
          f"{args.workers} cores; thermoelec sweep is {lsoda_total / walls[-1]:.0f}x faster end to end")


if __name__ == "__main__":
    main()
