"""A sampled sweep end to end against the same scenarios as a plain (zipped) sweep, in the same run.

The mission of ``bench_single_mission.py`` (1 h at 1 Hz, 3 600 power segments with
regeneration) with three uncertain inputs, the sink conductance ``normal(1 W/K, 0.2 W/K,
low = 0.3 W/K)``, the ambient ``uniform(20 degC, 35 degC)`` and the initial SoC
``triangular(0.7, 0.85, 0.95)``, 10 000 Latin-hypercube samples. Measured in the same run,
each a fresh ``thermoelec sweep ... --workers 2 --no-figures`` process, alternated, best of two:

- the sampled sweep as a user runs it: planning the samples, the batched engine, the
  statistics (percentiles, pass probabilities with their intervals, Spearman ranking),
  ``uncertainty.nc``, ``uncertainty.csv`` and the report;
- the reference: the very same 10 000 scenarios (the sampled values written out as
  ``mode = "zip"`` lists) as a plain sweep, which samples and summarises nothing.

Printed: both wall times, the sampled sweep's time against the 60 s target, and what sampling
and statistics add (target: under 5 %).

Run: ``.venv/bin/python benchmarks/bench_uncertainty.py`` (``--quick``: 400 samples of a
10-minute mission, to check that the script works).
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from bench_sweep_scale import THERMOELEC, write_mission

DISTRIBUTIONS = ["thermal.sink_to_ambient=normal(1 W/K, 0.2 W/K, low=0.3 W/K)",
                 "thermal.ambient_temperature=uniform(20 degC, 35 degC)",
                 "cell.initial_soc=triangular(0.7, 0.85, 0.95)"]


def timed(command: list[str]) -> float:
    """Wall time [s] of one command in a fresh process."""
    started = time.perf_counter()
    proc = subprocess.run(command, capture_output=True, text=True)
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(command[:4])} ... exited with {proc.returncode}: {proc.stderr[-2000:]}")
    return time.perf_counter() - started


def zipped_copy(mission: Path, samples: int, folder: Path) -> Path:
    """The mission with the sampled values of every input as ``mode = "zip"`` lists: the same scenarios."""
    import thermoelec
    from thermoelec.analysis import sweep

    loaded = thermoelec.load_scenario(mission)
    plan = sweep.plan_sweep(loaded, [f"{d}" for d in DISTRIBUTIONS], samples=samples)
    rows = [plan.overrides(i) for i in range(plan.size)]
    lines = [mission.read_text(), "", "[sweep]", 'mode = "zip"']
    for key in rows[0]:
        lines.append(f"{json.dumps(key)} = {json.dumps([row[key] for row in rows])}")
    path = folder / "zipped.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="400 samples of a 10-minute mission")
    parser.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    parser.add_argument("--repeats", type=int, default=2, help="runs of each command, alternated (default 2)")
    args = parser.parse_args()
    seconds, samples = (600, 400) if args.quick else (3600, 10_000)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        mission = write_mission(seconds, folder)
        zipped = zipped_copy(mission, samples, folder)
        common = ["--workers", str(args.workers), "--quiet", "--no-figures"]
        items = [part for item in DISTRIBUTIONS for part in ("--sweep", item)]
        sampled = [*THERMOELEC, "sweep", str(mission), *common, "--samples", str(samples), *items]
        plain = [*THERMOELEC, "sweep", str(zipped), *common]
        timed([*THERMOELEC, "sweep", str(mission), "--out", str(folder / "warm"), "--quiet", "--no-figures",
               "--workers", "1", "--samples", "4", *items])
        best_sampled = best_plain = float("inf")
        for k in range(args.repeats):
            best_plain = min(best_plain, timed([*plain, "--out", str(folder / f"plain{k}")]))
            best_sampled = min(best_sampled, timed([*sampled, "--out", str(folder / f"sampled{k}")]))
    print(f"thermoelec sweep, {samples} Latin-hypercube samples of 3 inputs, a {seconds} s 1 Hz mission, "
          f"{args.workers} workers")
    print(f"  sampled sweep with its statistics   {best_sampled:8.2f} s  (target for 10 000 one-hour samples: < 60 s)")
    print(f"  reference, the same scenarios zipped {best_plain:7.2f} s")
    print(f"  sampling and statistics add {best_sampled / best_plain - 1.0:+.1%} of the plain sweep's time "
          "(target < 5 %)")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
