"""An options sweep with its design review against the same overrides as a plain grid, in the same run.

The mission of ``bench_single_mission.py`` (1 h at 1 Hz) with four cooling options, each
setting the sink conductance (0.5, 1, 2 and 4 W/K) and carrying a cost and a mass, crossed
with 50 ambient temperatures and 50 initial SoC values: 10 000 scenarios. Measured in the
same run, each a fresh ``thermoelec sweep ... --workers 2 --no-figures`` process, alternated,
best of two:

- the options sweep as a user runs it, with a requirement: the batched engine, the
  dataset with the option coordinate and its attributes, and the design review
  (``review.nc``, ``review.csv``, ``design_report.html``);
- the reference: the same four conductances as a plain grid key, the rest alike.

Printed: both wall times and what the options and the review add.

Run: ``.venv/bin/python benchmarks/bench_options.py`` (``--quick``: 4 x 10 x 10 of a
10-minute mission, to check that the script works).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

import numpy as np
from bench_sweep_scale import THERMOELEC, write_mission
from bench_uncertainty import timed

CONDUCTANCES = ("0.5 W/K", "1 W/K", "2 W/K", "4 W/K")


def with_options(mission: Path, folder: Path) -> Path:
    """The mission with an option group ``cooling`` of four conductances."""
    lines = [mission.read_text()]
    for i, g in enumerate(CONDUCTANCES):
        lines += ["", "[[option.cooling]]", f'name = "option {i + 1}"', f'"thermal.sink_to_ambient" = "{g}"',
                  f'attributes = {{ cost = "{10 * i} EUR", added_mass = "{0.1 * i:.1f} kg" }}']
    path = folder / "options.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="4 x 10 x 10 of a 10-minute mission")
    parser.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    parser.add_argument("--repeats", type=int, default=2, help="runs of each command, alternated (default 2)")
    args = parser.parse_args()
    seconds, n = (600, 10) if args.quick else (3600, 50)
    ambients = ",".join(f"{v:.4g} degC" for v in np.linspace(0, 45, n))
    socs = ",".join(f"{v:.4g}" for v in np.linspace(0.6, 0.95, n))
    grid = ["--sweep", f"thermal.ambient_temperature={ambients}", "--sweep", f"cell.initial_soc={socs}"]
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        mission = write_mission(seconds, folder)
        options = with_options(mission, folder)
        common = ["--workers", str(args.workers), "--quiet", "--no-figures", *grid]
        reviewed = [*THERMOELEC, "sweep", str(options), *common, "--require",
                    "temperature_margin_K >= 2 at thermal.ambient_temperature = 45 degC"]
        plain = [*THERMOELEC, "sweep", str(mission), *common, "--sweep",
                 f"thermal.sink_to_ambient={','.join(CONDUCTANCES)}"]
        timed([*THERMOELEC, "sweep", str(mission), "--out", str(folder / "warm"), "--quiet", "--no-figures",
               "--workers", "1", "--sweep", "thermal.ambient_temperature=20 degC,30 degC"])
        best_options = best_plain = float("inf")
        for k in range(args.repeats):
            best_plain = min(best_plain, timed([*plain, "--out", str(folder / f"plain{k}")]))
            best_options = min(best_options, timed([*reviewed, "--out", str(folder / f"options{k}")]))
    print(f"thermoelec sweep, 4 options x {n} ambients x {n} initial SoC = {4 * n * n} scenarios of a {seconds} s "
          f"1 Hz mission, {args.workers} workers")
    print(f"  options with the design review     {best_options:8.2f} s")
    print(f"  reference, the same plain grid     {best_plain:8.2f} s")
    print(f"  options and review add {best_options / best_plain - 1.0:+.1%} of the plain grid's time")
    sys.stdout.flush()


if __name__ == "__main__":
    main()
