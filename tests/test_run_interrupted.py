"""``run`` stopped by SIGTERM at any moment: the folder holds one run's outputs, complete, never a mixture.

Sources: the outputs of each run name the ambient temperature it was given
(the first row of the series, the summary's coldest cell at the start, the
report's table of parameters and the NetCDF's overrides), so a folder mixing two
runs shows two temperatures; and the run that completes untouched, whose
duration sets the moments of the signals.
"""

from __future__ import annotations

import json
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import xarray as xr

from thermoelec.analysis.transaction import MANIFEST

from .helpers import SCENARIOS

DRONE = SCENARIOS / "drone_delivery.toml"
OVERRIDE = r"thermal\.ambient_temperature=(-?\d+) degC"


def command(out: Path, ambient: int) -> list[str]:
    # the pack starts at the ambient: it is the first cell temperature and the coldest
    return [sys.executable, "-m", "thermoelec.cli", "run", str(DRONE), "--out", str(out), "--quiet",
            "--set", f"thermal.ambient_temperature={ambient} degC"]


def ambients_in(out: Path) -> set[float]:
    """The ambient temperature each output of the folder was made with, and a check that all are there."""
    manifest = json.loads((out / MANIFEST).read_text())["outputs"]
    present = sorted(p.name for p in out.iterdir() if not p.name.startswith(".") and p.name != MANIFEST)
    assert present == manifest, (present, manifest)
    found = {round(float(pd.read_csv(out / "timeseries.csv")["ambient_temperature_degC"].iloc[0]), 6),
             round(json.loads((out / "summary.json").read_text())["cell_temperature_min_degC"], 6)}
    with xr.open_dataset(out / "timeseries.nc") as ds:
        found |= {float(re.fullmatch(OVERRIDE, o).group(1)) for o in json.loads(ds.attrs["overrides"])}
    if "report.html" in manifest:
        found |= {float(t) for t in re.findall(OVERRIDE, (out / "report.html").read_text())}
    return found


def test_sigterm_during_run_leaves_the_previous_or_the_new_outputs_whole(tmp_path):
    out = tmp_path / "out"
    subprocess.run(command(out, 10), check=True)  # on a new machine this first run compiles the kernels
    started = time.perf_counter()
    subprocess.run(command(out, 10), check=True)
    delay = 0.6 * (time.perf_counter() - started)
    assert ambients_in(out) == {10.0}
    outcomes = []
    for k in range(3):
        ambient = 12 + 2 * k
        before = ambients_in(out)
        proc = subprocess.Popen(command(out, ambient), stderr=subprocess.PIPE, text=True)
        time.sleep(delay)
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=120)
        # 143 from the command's handler, or killed by the signal's default while Python was still importing
        assert proc.returncode in (0, 143, -signal.SIGTERM), err
        assert "Traceback" not in err
        # interrupted: the previous outputs, or the new ones if the signal came while they were put in place
        assert ambients_in(out) in (({float(ambient)},) if proc.returncode == 0 else (before, {float(ambient)})), err
        assert not list(out.glob(".thermoelec-*-*"))  # no staging folder left
        outcomes.append(proc.returncode)
        # the next signal earlier if this one came after the end, later if before the command began,
        # else a little later, into the writing of the outputs (the machine's speed varies)
        delay *= {0: 0.6, -signal.SIGTERM: 1.5}.get(proc.returncode, 1.15)
    assert 143 in outcomes  # signals landed inside the run
    # and a re-run without figures leaves no figure or report of the earlier run beside its summary
    subprocess.run([*command(out, 30), "--no-figures"], check=True)
    names = {p.name for p in out.iterdir() if not p.name.startswith(".")}
    assert names == {"summary.json", "timeseries.csv", "timeseries.nc", MANIFEST}
    assert ambients_in(out) == {30.0}
