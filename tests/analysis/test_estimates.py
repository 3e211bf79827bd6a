"""Budgets up front: rows, memory and scenarios estimated before anything runs, refused with the estimate.

Sources: the runs themselves (the estimate of output rows is an upper bound of
the rows a run writes, and within twice them for a mission that completes) and
the counts of the inputs (CSV rows, plan sizes).
"""

from __future__ import annotations

import pytest

import thermoelec
from thermoelec import cli
from thermoelec.analysis.estimates import estimate_run

from ..helpers import SCENARIOS, scenario

DRONE = SCENARIOS / "drone_delivery.toml"


def run(tmp_path, capsys, *argv: str) -> tuple[int, str]:
    code = cli.main(["run", *argv, "--out", str(tmp_path / "o"), "--quiet", "--no-figures"])
    return code, capsys.readouterr().err


@pytest.mark.parametrize("path, factor", [(DRONE, 1.1), (SCENARIOS / "robot_cooling.toml", 2.0),
                                          (SCENARIOS / "ebike_route.toml", 3.0)])  # its CC-CV counted at its cap
def test_the_row_estimate_bounds_the_rows_a_run_writes(path, factor):
    loaded = thermoelec.load_scenario(path)
    rows = len(thermoelec.simulate(loaded).series["time_s"])
    estimate = estimate_run(loaded)
    assert rows <= estimate.rows <= factor * rows
    assert estimate.memory > estimate.rows * 1000  # about 1.5 kB a row, measured


def test_a_run_over_its_rows_is_refused_with_the_estimate_and_the_option(tmp_path, capsys):
    code, err = run(tmp_path, capsys, str(DRONE), "--set", "solver.output_interval=0.1 ms")
    assert code == 2 and "output rows" in err and "--max-rows 1.3e7" in err
    assert not (tmp_path / "o").exists()


def test_raising_the_budget_lets_the_run_go(tmp_path, capsys):
    args = [str(DRONE), "--set", "profile.repeat=3", "--set", "solver.output_interval=1 s"]
    assert run(tmp_path, capsys, *args, "--max-rows", "1000")[0] == 2
    code, err = run(tmp_path, capsys, *args, "--max-rows", "1e4")
    assert code == 0, err


def test_a_billion_repeats_and_a_tiny_memory_budget_are_refused(tmp_path, capsys):
    code, err = run(tmp_path, capsys, str(DRONE), "--set", "profile.repeat=1000000000")
    assert code == 2 and "segments" in err and "--max-rows" in err
    code, err = run(tmp_path, capsys, str(DRONE), "--max-memory", "100 MB")
    assert code == 2 and "--max-memory" in err and "over the budget of 100 MB" in err


def test_a_csv_over_the_row_budget_is_refused_before_it_is_read(tmp_path, capsys):
    (tmp_path / "long.csv").write_text("time_s,current_A\n" + "".join(f"{t},1.0\n" for t in range(5000)))
    path = tmp_path / "s.toml"
    from .test_sweep import _toml

    path.write_text(_toml(scenario(segments=[{"file": "long.csv"}], solver={"output_interval": "10 s"})))
    code, err = run(tmp_path, capsys, str(path), "--max-rows", "1000")
    assert code == 2 and "long.csv" in err and "5e+03 rows" in err and "--max-rows 5e3" in err


@pytest.mark.parametrize("sweeps, message", [
    (["thermal.ambient_temperature=" + ",".join(f"{t} degC" for t in range(-20, 40)),
      "thermal.sink_to_ambient=" + ",".join(f"{g} W/K" for g in range(1, 2001))],
     "3.6e+05 scenarios (60 x 3 x 2000)"),  # with the file's third key
])
def test_a_sweep_over_its_scenarios_is_refused_before_it_starts(tmp_path, capsys, sweeps, message):
    argv = ["sweep", str(DRONE), "--out", str(tmp_path / "o"), "--quiet", "--max-scenarios", "100000"]
    for item in sweeps:
        argv += ["--sweep", item]
    code = cli.main(argv)
    err = capsys.readouterr().err
    assert code == 2 and message in err and "--max-scenarios" in err
    assert not (tmp_path / "o").exists()


def test_a_range_of_a_billion_values_is_refused_before_it_is_made(tmp_path, capsys):
    path = tmp_path / "s.toml"
    from .test_sweep import _toml

    path.write_text(_toml(scenario(sweep={"thermal.sink_to_ambient": {"start": "0.1 W/K", "stop": "1 W/K",
                                                                      "num": 10**9}})))
    code = cli.main(["sweep", str(path), "--out", str(tmp_path / "o"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and "1e+09 values" in err and "--max-scenarios" in err
