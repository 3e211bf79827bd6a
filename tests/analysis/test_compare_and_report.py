"""Case comparison and the HTML report.

The physical expectation of the demo comparison is common practice: a colder
cell has a higher resistance, so its voltage sags further, it dissipates more
and it reaches the voltage cutoff with less energy delivered.
"""

import json
import re

import numpy as np
import pandas as pd
import pytest

import thermoelec
from thermoelec import cli
from thermoelec.analysis import compare
from thermoelec.analysis.verdict import limit_checks
from thermoelec.output.html import CAUTIONS

from ..helpers import SCENARIOS, cell_section, scenario

DRONE = SCENARIOS / "drone_delivery.toml"
EBIKE = SCENARIOS / "ebike_route.toml"


@pytest.fixture(scope="module")
def drone_cases():
    loaded = thermoelec.load_scenario(DRONE)
    return {o.name: o for o in compare.run_cases(loaded, compare.case_list(loaded))}


@pytest.fixture(scope="module")
def drone_compare_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("compare")
    code = cli.main(["compare", str(DRONE), "--out", str(out), "--quiet",
                     "--case", "cold and heavy", "thermal.ambient_temperature=-5 degC",
                     "profile.segment[3].value=600 W"])
    assert code == 0
    return out


def test_cold_case_sags_dissipates_more_and_has_less_energy_to_cutoff(drone_cases):
    hot = drone_cases["hot afternoon"].metrics()
    cold = drone_cases["cold morning"].metrics()
    assert cold["voltage_min_V"] < hot["voltage_min_V"]
    assert cold["energy_dissipated_Wh"] > hot["energy_dissipated_Wh"]
    assert cold["energy_to_cutoff_Wh"] < hot["energy_to_cutoff_Wh"]
    assert cold["cell_temperature_start_degC"] == pytest.approx(-5.0)


def test_energy_to_cutoff_run_is_a_constant_power_discharge_to_a_limit(drone_cases):
    outcome = drone_cases["cold morning"]
    s = outcome.result.series
    moving = s["current_A"] > 0
    cutoff = outcome.cutoff
    assert cutoff.summary["stop_reason"] in {"voltage_min", "power_limit", "temperature_max", "soc_limit"}
    assert cutoff.series["power_W"] == pytest.approx(cutoff.series["power_W"][0], rel=1e-9)
    # the mean discharge power: energy discharged over time spent discharging
    assert cutoff.series["power_W"][0] == pytest.approx(
        outcome.result.summary["energy_discharged_Wh"] * 3600 / np.ptp(s["time_s"][moving]), rel=0.02)
    assert outcome.metrics()["energy_to_cutoff_Wh"] > outcome.result.summary["energy_discharged_Wh"]


def test_compare_writes_table_json_overlays_cases_and_report(drone_compare_dir):
    out = drone_compare_dir
    table = pd.read_csv(out / "comparison.csv")
    assert list(table.columns) == ["metric", "key", "unit", "hot afternoon", "cold morning", "cold and heavy"]
    assert {"energy_to_cutoff_Wh", "voltage_min_V", "cell_temperature_max_degC", "efficiency_discharge",
            "verdict"} <= set(table["key"])
    data = json.loads((out / "comparison.json").read_text())
    assert [c["name"] for c in data["cases"]] == ["hot afternoon", "cold morning", "cold and heavy"]
    heavy = data["cases"][2]
    assert heavy["overrides"] == {"thermal.ambient_temperature": "-5 degC", "profile.segment[3].value": "600 W"}
    for name in ("hot-afternoon", "cold-morning", "cold-and-heavy"):
        summary = json.loads((out / "cases" / name / "summary.json").read_text())
        assert summary["scenario"]
    assert (out / "comparison.png").stat().st_size > 10_000 and (out / "comparison.svg").exists()
    report = (out / "report.html").read_text()
    assert "hot afternoon" in report and "cold and heavy" in report
    assert report.count("data:image/png;base64,") == 1 + 2 * 3  # overlay + dashboard and energy per case


def test_compare_prints_the_table(tmp_path, capsys):
    code = cli.main(["compare", str(DRONE), "--out", str(tmp_path), "--no-figures"])
    out = capsys.readouterr().out
    assert code == 0
    assert "energy to voltage cutoff" in out and "hot afternoon" in out and "cold morning" in out
    assert not (tmp_path / "report.html").exists()


@pytest.mark.parametrize("extra, key", [
    ([], "case"),  # the scenario has no [[case]] and none is given
    (["--case", "a", "thermal.ambient_temperature=0 degC", "--case", "a", "thermal.ambient_temperature=5 degC"],
     "case"),
    (["--case", "bad", "thermal.ambient_temperature=5 V"], '--case "bad": thermal.ambient_temperature'),
    (["--case", "thermal.ambient_temperature=5 degC"], "thermal.ambient_temperature=5 degC"),
])
def test_compare_bad_cases_exit_2(tmp_path, capsys, extra, key):
    plain = tmp_path / "plain.toml"
    text = DRONE.read_text()
    plain.write_text(text[:text.index("[[case]]")])
    code = cli.main(["compare", str(plain), "--out", str(tmp_path / "o"), "--no-figures", *extra])
    err = capsys.readouterr().err
    assert code == 2
    assert key in err and "Traceback" not in err


def test_limit_checks_fail_on_the_limit_that_stopped_the_run():
    cell = cell_section(capacity="2 Ah", initial_soc=1.0, ocv={"soc": [0, 1], "voltage": [3.0, 4.1]},
                        voltage_min="3.2 V")
    result = thermoelec.simulate(scenario(cell=cell, segments=[{"mode": "current", "value": "6 A",
                                                                "duration": "1 h"}]))
    checks = {row["check"]: row for row in limit_checks(result.summary, result.limits)}
    assert not checks["voltage_min"]["passed"]
    assert checks["voltage_min"]["margin"] == pytest.approx(0.0, abs=1e-6)
    assert checks["temperature_max"]["passed"]
    assert not checks["completed"]["passed"]
    assert result.summary["verdict"] == "fail" and result.verdict == "fail"


def test_limit_checks_pass_a_completed_mission(drone_cases):
    result = drone_cases["hot afternoon"].result
    assert all(row["passed"] for row in limit_checks(result.summary, result.limits))


# ---------------------------------------------------------------------------
# The run report
# ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def run_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("run")
    assert cli.main(["run", str(EBIKE), "--out", str(out), "--quiet"]) == 0
    return out


def test_run_writes_figures_and_a_self_contained_report(run_dir):
    for stem in ("dashboard", "energy", "operating_region"):
        assert (run_dir / f"{stem}.png").stat().st_size > 10_000
        assert (run_dir / f"{stem}.svg").exists()
    report = (run_dir / "report.html").read_text()
    assert report.count("data:image/png;base64,") == 3
    assert not re.search(r"(src|href)\s*=\s*['\"]?(https?:)?//", report)  # nothing fetched
    assert "<script" not in report and "@import" not in report
    for caution in CAUTIONS:
        assert caution in report.replace("&#x27;", "'")
    for section in ("Limits", "Notes and warnings", "Energy", "Summary", "Events", "Soak", "Stress indicators",
                    "Overrides", "Parameters", "Run"):
        assert f"<h2>{section}</h2>" in report
    assert "cell.r0.temperature" in report  # parameters are listed by dotted key
    assert "scenario_sha256" in report
