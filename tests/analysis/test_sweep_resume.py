"""A resumed sweep cannot mix answers: its identity, chunks read by scenario index, the lock, signals.

Sources: a sweep run whole in another folder (the dataset a resumed sweep must
equal, value for value), and the operating system's own account of the process
tree (psutil) for the workers a SIGTERM must end.
"""

from __future__ import annotations

import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import psutil
import pytest
import xarray as xr

from thermoelec import cli
from thermoelec.analysis import sweep

from .test_sweep import load, write_scenario

ROUTE = "time_s,current_A\n0,3.0\n300,4.5\n600,2.0\n900,3.5\n1200,0.0\n"
TABLE = {"thermal.sink_to_ambient": ["0.1 W/K", "0.3 W/K", "1 W/K"],
         "thermal.ambient_temperature": ["0 degC", "15 degC", "25 degC", "35 degC"]}


def route_scenario(folder: Path) -> Path:
    (folder / "route.csv").write_text(ROUTE)
    return write_scenario(folder, TABLE, profile={"segment": [{"file": "route.csv"}]})


def partial_sweep(path: Path, out: Path, keep_every: int = 3) -> int:
    """Chunks of a sweep of ``path`` in ``out``, one scenario each, some of them removed (a killed sweep)."""
    scenario = load(path)
    sweep.run_sweep(scenario, sweep.plan_sweep(scenario), out, workers=1, chunk_size=1, progress=False)
    chunks = sorted((out / "chunks").glob("rows_*.json"))
    for k, chunk in enumerate(chunks):
        if k % keep_every:
            chunk.unlink()
    return len(list((out / "chunks").glob("rows_*.json")))


def sweep_cli(path: Path, out: Path, *extra: str) -> int:
    return cli.main(["sweep", str(path), "--out", str(out), "--quiet", "--no-figures", *extra])


def assert_same_dataset(a: Path, b: Path) -> None:
    with xr.open_dataset(a / "sweep.nc") as x, xr.open_dataset(b / "sweep.nc") as y:
        assert set(x.data_vars) == set(y.data_vars)
        for name in x.data_vars:
            np.testing.assert_array_equal(x[name].values, y[name].values, err_msg=name)


@pytest.mark.parametrize("extra", [["--chunk-size", "5", "--workers", "2"], ["--workers", "1"]],
                         ids=["chunks-of-5-on-2-workers", "default-chunks-on-1-worker"])
def test_resume_with_another_chunk_size_or_worker_count_gives_the_identical_dataset(tmp_path, extra):
    path = route_scenario(tmp_path)
    assert sweep_cli(path, tmp_path / "whole", "--chunk-size", "4", "--workers", "1") == 0
    kept = partial_sweep(path, tmp_path / "resumed")
    assert 0 < kept < 12
    assert sweep_cli(path, tmp_path / "resumed", "--resume", *extra) == 0
    assert_same_dataset(tmp_path / "whole", tmp_path / "resumed")
    assert not (tmp_path / "resumed" / "chunks").exists()  # the dataset holds them now


@pytest.mark.parametrize("change, named", [
    (lambda folder: (folder / "route.csv").write_text(ROUTE.replace("4.5", "4.6")), "route.csv"),
    (lambda folder: None, "the overrides (--set)"),
], ids=["profile-csv-edited", "another-set"])
def test_resume_after_a_change_refuses_naming_it(tmp_path, capsys, change, named):
    path = route_scenario(tmp_path)
    partial_sweep(path, tmp_path / "o")
    change(tmp_path)
    extra = ["--set", "cell.initial_soc=0.8"] if named.startswith("the overrides") else []
    code = sweep_cli(path, tmp_path / "o", "--resume", *extra)
    err = capsys.readouterr().err
    assert code == 2 and named in err and "changed" in err and "--force" in err, err
    assert len(err.strip().splitlines()) == 1 and not (tmp_path / "o" / "sweep.nc").exists()


def test_an_included_file_edited_refuses_the_resume(tmp_path, capsys):
    path = route_scenario(tmp_path)
    (tmp_path / "extra.toml").write_text("[stress]\nhot_temperature = \"45 degC\"\n")
    path.write_text('include = "extra.toml"\n' + path.read_text())
    partial_sweep(path, tmp_path / "o")
    (tmp_path / "extra.toml").write_text("[stress]\nhot_temperature = \"40 degC\"\n")
    assert sweep_cli(path, tmp_path / "o", "--resume") == 2
    assert "the included file" in capsys.readouterr().err


def test_starting_over_finished_chunks_needs_force(tmp_path, capsys):
    path = route_scenario(tmp_path)
    kept = partial_sweep(path, tmp_path / "o")
    assert sweep_cli(path, tmp_path / "o") == 2
    err = capsys.readouterr().err
    assert "--resume" in err and "--force" in err and f"{kept} finished chunks" in err
    assert len(list((tmp_path / "o" / "chunks").glob("rows_*.json"))) == kept  # nothing deleted
    assert sweep_cli(path, tmp_path / "o", "--force", "--workers", "1") == 0


#: 24 scenarios of 12 000 one-second segments (200 min at 0.3 A, 1 Ah of the 1.8 Ah left: no early
#: stop) on the solo engine, one a chunk: about a second each here, so that the sweep on two workers
#: outlasts by far the checks made while it runs.
SLOW = {"thermal.sink_to_ambient": ["0.1 W/K", "0.3 W/K", "1 W/K"],
        "thermal.ambient_temperature": [f"{t} degC" for t in range(0, 40, 5)]}


def _slow_sweep(folder: Path) -> Path:
    pulses = {"repeat": 6000, "segment": [{"mode": "current", "value": "0.4 A", "duration": "1 s"},
                                          {"mode": "current", "value": "0.2 A", "duration": "1 s"}]}
    return write_scenario(folder, SLOW, profile=pulses)


def _wait_for_chunks(out: Path, count: int, proc: subprocess.Popen, timeout: float = 120.0) -> None:
    deadline = time.time() + timeout
    while len(list((out / "chunks").glob("rows_*.json"))) < count:
        assert proc.poll() is None and time.time() < deadline, "the sweep ended or stalled"
        time.sleep(0.02)


def test_sigterm_ends_every_worker_keeps_the_chunks_and_a_second_sweep_is_refused(tmp_path):
    path = _slow_sweep(tmp_path)
    out = tmp_path / "o"
    command = [sys.executable, "-m", "thermoelec.cli", "sweep", str(path), "--out", str(out), "--no-figures",
               "--chunk-size", "1", "--engine", "solo"]
    proc = subprocess.Popen([*command, "--workers", "2"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    _wait_for_chunks(out, 1, proc)
    children = psutil.Process(proc.pid).children(recursive=True)
    # the worker (the command is the other), a fork of the command (analysis.sweep.run.process_pool)
    assert len(children) >= 1 and not any("forkserver" in " ".join(child.cmdline()) for child in children)
    # a second sweep into the folder is refused, naming the first
    second = subprocess.run([*command, "--workers", "1", "--quiet"], capture_output=True, text=True, timeout=120)
    assert second.returncode == 2 and f"in use by process {proc.pid}" in second.stderr, second.stderr
    assert proc.poll() is None, "the sweep ended before the signal"
    proc.send_signal(signal.SIGTERM)  # to the command alone, as a job scheduler sends it
    _, err = proc.communicate(timeout=60)  # returns only when no process holds its pipes
    assert proc.returncode == 143, err
    assert "resume with" in err and "--resume" in err and "Traceback" not in err
    _, alive = psutil.wait_procs(children, timeout=10)
    assert not alive, alive
    kept = len(list((out / "chunks").glob("rows_*.json")))
    assert 1 <= kept < 24 and not (out / "sweep.nc").exists()
    # the chunks finished before the signal are whole and belong to this sweep: a resume reads them
    scenario = load(path)
    plan = sweep.plan_sweep(scenario)
    rows = sweep.Checkpoints(out / "chunks").open(sweep.sweep_identity(scenario, plan, "solo", None), plan.size,
                                                  resume=True, force=False)
    assert len(rows) == kept and all(row["status"] == "ok" for row in rows.values())


def test_the_default_chunk_size_ignores_the_workers():
    # a function of the plan's size alone: the same chunks on any machine
    assert [sweep.default_chunk_size(n) for n in (1, 10, 100, 1000, 10_000, 1_000_000)] == [1, 10, 16, 63, 256, 256]
