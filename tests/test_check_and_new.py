"""``thermoelec check`` and ``thermoelec new``, the help texts and the progress display.

``check`` validates without running: on every demo scenario it exits 0, and on
every bad-input case of ``tests/scenario/test_bad_input.py`` it exits 2 with the
very message ``run`` gives (the same loading, the same CSV reading). The demo
cell file in ``scenarios/cells/`` is an include, not a scenario: it is checked
through the scenario that includes it.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

from thermoelec import cli

from .helpers import SCENARIOS, cell_section, scenario
from .scenario.test_bad_input import BASE, CSV_CASES, ROUTE, SCENARIO_CASES

DEMO_FILES = sorted(SCENARIOS.glob("*.toml"))


def test_the_demo_files_are_found():
    assert {p.stem for p in DEMO_FILES} == {"cargo_robot_pack", "drone_delivery", "ebike_route", "robot_cooling",
                                            "scooter_commute", "delivery_robot_options", "drone_cold_bms"}


@pytest.mark.parametrize("path", DEMO_FILES, ids=lambda p: p.stem)
def test_check_passes_every_demo_scenario(path, capsys):
    assert cli.main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "valid scenario" in out and "[default]" in out and "peak power demanded" in out


def test_check_lists_defaults_units_and_the_profile(capsys):
    assert cli.main(["check", str(SCENARIOS / "drone_delivery.toml"), "--set", "pack.series=4"]) == 0
    out = capsys.readouterr().out
    lines = {line.split()[0]: line for line in out.splitlines() if line.startswith("  ") and line.split()}
    assert "38 degC" in lines["thermal.ambient_temperature"] and "[given]" in lines["thermal.ambient_temperature"]
    assert "[override]" in lines["pack.series"]
    assert "1e-06" in lines["solver.rtol"] and "[given]" in lines["solver.rtol"]
    assert "[default: the ambient at t = 0]" in lines["thermal.initial_cell_temperature"]
    assert "25 degC" in lines["cell.rc[1].reference_temperature"]
    # the sortie: 20 s at 950 W, 60 s at 820 W, 7 min at 560 W, 90 s at 720 W, 7 min at 520 W, 40 s at 640 W,
    # then 3 min on the pad
    energy = (20 * 950 + 60 * 820 + 420 * 560 + 90 * 720 + 420 * 520 + 40 * 640) / 3600
    profile = {line.strip().rsplit("  ", 1)[0].strip(): line.strip().rsplit("  ", 1)[1].strip()
               for line in out.split("profile:")[1].splitlines()[1:] if "  " in line.strip()}
    assert profile["energy demanded, discharge"] == f"{energy:.4g} Wh"
    assert profile["duration"] == "1230 s" and profile["peak power demanded"] == "950 W"
    # the peak C-rate per cell at the initial OCV of 4 cells in series, 2 in parallel of 5 Ah: 950 / 16.8 / 2 / 5
    assert profile["peak C-rate, discharge (per cell)"] == f"{950 / 16.8 / 2 / 5:.4g}"


def _run_and_check(tmp_path, capsys, *arguments: str) -> tuple[tuple[int, str], tuple[int, str]]:
    code_run = cli.main(["run", *arguments, "--out", str(tmp_path / "out"), "--quiet"])
    err_run = capsys.readouterr().err
    code_check = cli.main(["check", *arguments])
    err_check = capsys.readouterr().err
    return (code_run, err_run), (code_check, err_check)


@pytest.mark.parametrize(("old", "new"), [c[1:3] for c in SCENARIO_CASES], ids=[c[0] for c in SCENARIO_CASES])
def test_check_gives_runs_message_for_a_bad_scenario(tmp_path, capsys, old, new):
    path = tmp_path / "scenario.toml"
    path.write_text(BASE.replace(old, new, 1))
    (tmp_path / "route.csv").write_text(ROUTE)
    run, check = _run_and_check(tmp_path, capsys, str(path))
    assert run[0] == check[0] == 2
    assert check[1] == run[1] and "Traceback" not in check[1]


@pytest.mark.parametrize("route", [c[1] for c in CSV_CASES], ids=[c[0] for c in CSV_CASES])
def test_check_gives_runs_message_for_a_bad_profile(tmp_path, capsys, route):
    path = tmp_path / "scenario.toml"
    path.write_text(BASE)
    if route is not None:
        (tmp_path / "route.csv").write_text(route)
    run, check = _run_and_check(tmp_path, capsys, str(path))
    assert run[0] == check[0] == 2 and check[1] == run[1]


@pytest.mark.parametrize("arguments", [["--set", "cell.capacity=5 V"], ["--set", "novalue"]])
def test_check_gives_runs_message_for_a_bad_override(tmp_path, capsys, arguments):
    path = tmp_path / "scenario.toml"
    path.write_text(BASE)
    (tmp_path / "route.csv").write_text(ROUTE)
    run, check = _run_and_check(tmp_path, capsys, str(path), *arguments)
    assert run[0] == check[0] == 2 and check[1] == run[1]


def test_check_of_a_missing_file(tmp_path, capsys):
    run, check = _run_and_check(tmp_path, capsys, str(tmp_path / "nope.toml"))
    assert run[0] == check[0] == 2 and check[1] == run[1] and "not found" in check[1]


def test_new_writes_a_template_that_checks_and_runs(tmp_path, capsys):
    path = tmp_path / "mine.toml"
    assert cli.main(["new", str(path)]) == 0
    text = path.read_text()
    assert text.count("#") > 40  # commented
    assert cli.main(["check", str(path), "--quiet"]) == 0
    assert cli.main(["run", str(path), "--out", str(tmp_path / "run"), "--quiet", "--no-figures"]) == 0
    capsys.readouterr()
    assert cli.main(["new", str(path)]) == 2  # never overwrites without --force
    assert "exists" in capsys.readouterr().err
    assert cli.main(["new", str(path), "--force"]) == 0


def test_segment_names_must_not_be_empty(tmp_path, capsys):
    import thermoelec

    data = scenario(cell=cell_section(), segments=[{"name": " ", "mode": "rest", "duration": "1 s"}])
    with pytest.raises(thermoelec.ScenarioError, match=r"profile.segment\[1\].name"):
        thermoelec.scenario_from_dict(data)


def test_help_lists_every_command_and_each_fit_kind_has_its_own(capsys):
    with pytest.raises(SystemExit):
        cli.main(["--help"])
    top = capsys.readouterr().out
    for command in ("run SCENARIO", "compare SCENARIO", "sweep SCENARIO", "fit {ocv,pulse,thermal}", "check SCENARIO",
                    "new FILE"):
        assert command in top
    assert "``" not in top and ":func:" not in top  # plain words, no markup
    helps = {}
    for kind in ("ocv", "pulse", "thermal"):
        with pytest.raises(SystemExit):
            cli.main(["fit", kind, "--help"])
        helps[kind] = capsys.readouterr().out
    assert "--points" in helps["ocv"] and "--points" not in helps["pulse"]
    assert "--arrhenius" in helps["pulse"] and "--arrhenius" not in helps["thermal"]
    assert "--mass" in helps["thermal"] and "--mass" not in helps["ocv"]


def test_no_progress_display_when_stderr_is_no_terminal(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(BASE.replace('[[profile.segment]]\nfile = "route.csv"\n', ""))
    proc = subprocess.run([sys.executable, "-m", "thermoelec.cli", "run", str(path), "--out", str(tmp_path / "o"),
                           "--no-figures"], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""  # a pipe: tqdm stays quiet
    assert proc.stdout.rstrip().splitlines()[-1].startswith("verdict: ")  # the summary ends with the verdict
