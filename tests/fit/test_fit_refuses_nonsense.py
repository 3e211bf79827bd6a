"""Fits of logs that do not hold the answer: exit 2 with the reason, or a warning; never an impossible cell.

Sources: the demo's invented lab logs (``scenarios/logs``, made by the engine
from known parameters) spoiled in one way each: a temperature that never moves,
a discharge cut short, a log copied as another temperature's, a mass off by a
factor of a thousand. What a cell can be: a coulombic efficiency near 1 and a
specific heat of 800 to 1100 J/(kg K) (common practice for Li-ion cells); no
solid outside 100 to 5000 J/(kg K) (Incropera et al., Tables A.1 and A.6, from
memory).
"""

from __future__ import annotations

import pandas as pd
import pytest

from thermoelec import cli

from ..helpers import SCENARIOS

LOGS = SCENARIOS / "logs"
OCV = SCENARIOS / "cells" / "scooter_cell.toml"


def fit(capsys, *argv: str) -> tuple[int, str]:
    code = cli.main(["fit", *argv, "--quiet"])
    err = capsys.readouterr().err
    assert "Traceback" not in err and "internal error" not in err, err
    return code, err


def spoiled(tmp_path, name: str, change) -> str:
    frame = pd.read_csv(LOGS / name)
    frame = change(frame)
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return str(path)


def test_a_temperature_that_never_responds_is_refused(tmp_path, capsys):
    # the heater test with the cell temperature held at the ambient: C -> infinity, residual 0
    log = spoiled(tmp_path, "scooter_heater_test.csv",
                  lambda f: f.assign(temperature_degC=f["ambient_temperature_degC"]))
    code, err = fit(capsys, "thermal", log, "--mass", "68 g", "--out", str(tmp_path / "cell.toml"))
    assert code == 2 and "does not respond to the heat input" in err
    assert not (tmp_path / "cell.toml").exists()


def test_a_truncated_discharge_is_refused(tmp_path, capsys):
    log = spoiled(tmp_path, "scooter_c20_discharge.csv", lambda f: f.iloc[: len(f) // 40])
    code, err = fit(capsys, "ocv", log, str(LOGS / "scooter_c20_charge.csv"), "--out", str(tmp_path / "cell.toml"))
    assert code == 2 and "coulombic ratio" in err and "Ah" in err
    assert not (tmp_path / "cell.toml").exists()


def test_a_log_copied_as_another_temperature_is_refused(tmp_path, capsys):
    copy = spoiled(tmp_path, "scooter_hppc_25C.csv", lambda f: f)
    code, err = fit(capsys, "pulse", str(LOGS / "scooter_hppc_25C.csv"), copy, "--cell", str(OCV),
                    "--out", str(tmp_path / "cell.toml"))
    assert code == 2 and "both at 25" in err


@pytest.mark.parametrize("mass, outcome", [("68 kg", 2), ("0.060 kg", "warning"), ("68 g", 0)],
                         ids=["a-thousand-times-off", "implausible", "right"])
def test_the_specific_heat_is_checked_against_what_a_cell_can_be(tmp_path, capsys, mass, outcome):
    code, err = fit(capsys, "thermal", str(LOGS / "scooter_heater_test.csv"), "--mass", mass,
                    "--out", str(tmp_path / "cell.toml"))
    if outcome == 2:
        assert code == 2 and "no solid has" in err and not (tmp_path / "cell.toml").exists()
    elif outcome == "warning":  # 66.5 J/K over 60 g: 1108 J/(kg K), just outside 800..1100
        assert code == 0 and "warning: the specific heat" in err and "plausible range" in err
        assert "warning" in (tmp_path / "cell_report.html").read_text()
    else:
        assert code == 0 and "warning" not in err


@pytest.mark.parametrize("options, message", [
    (["--mass", "-68 g"], "must be > 0"),
    (["--mass", "0"], "must be > 0"),
    (["--mass", "68 V"], "wrong dimension"),
    (["--ambient", "-300 degC"], "absolute zero"),
])
def test_bad_options_of_a_thermal_fit_exit_2(tmp_path, capsys, options, message):
    code, err = fit(capsys, "thermal", str(LOGS / "scooter_heater_test.csv"), *options,
                    "--out", str(tmp_path / "cell.toml"))
    assert code == 2 and message in err


@pytest.mark.parametrize("points", ["1", "0", "-3", "2.5"])
def test_too_few_ocv_points_exit_2(tmp_path, capsys, points):
    with pytest.raises(SystemExit) as caught:
        cli.main(["fit", "ocv", str(LOGS / "scooter_c20_discharge.csv"), str(LOGS / "scooter_c20_charge.csv"),
                  "--points", points, "--out", str(tmp_path / "cell.toml")])
    assert caught.value.code == 2 and "--points" in capsys.readouterr().err


@pytest.mark.parametrize("content, key", [
    ('[cell]\ncapacity = "4.2 V"\n', "cell.capacity"),
    ('[cell.ocv]\nsoc = [0.0, "half", 1.0]\nvoltage = [3.0, 3.6, 4.2]\n', "cell.ocv.soc"),
    ('[cell]\nmass = "-68 g"\n', "cell.mass"),
    ('[cell]\ncapacity = "4.2 Ah"\n[thermal]\ncell_to_sink = 1\n', "thermal"),
    (b"\xff\xfe[cell]\n", "not UTF-8"),
    (None, "is a folder"),
])
def test_the_cell_file_is_validated_as_a_scenario_would_include_it(tmp_path, capsys, content, key):
    cell = tmp_path / "given.toml"
    if content is None:
        cell.mkdir()
    elif isinstance(content, bytes):
        cell.write_bytes(content)
    else:
        cell.write_text(content)
    code, err = fit(capsys, "thermal", str(LOGS / "scooter_heater_test.csv"), "--cell", str(cell),
                    "--out", str(tmp_path / "cell.toml"))
    assert code == 2 and key in err and str(cell) in err


@pytest.mark.parametrize("content, key, expected", [
    ('[units]\ncurrent = "V"\n', "units.current", "'A'"),
    ('[units]\ntemperature = "mA"\n', "units.temperature", "'degC'"),
    ('[units]\ncurrent = "m(A"\n', "units.current", "m(A"),
    ("[units]\ncurrent = 5\n", "units.current", "expected a text"),
    ('[columns]\ncurrent = ["a"]\n', "columns.current", "expected a text"),
    (b"\xff[units]\n", "", "not UTF-8"),
])
def test_the_mapping_file_is_validated_naming_the_key_and_the_unit_expected(tmp_path, capsys, content, key,
                                                                           expected):
    mapping = tmp_path / "map.toml"
    mapping.write_bytes(content) if isinstance(content, bytes) else mapping.write_text(content)
    code, err = fit(capsys, "ocv", str(LOGS / "scooter_c20_discharge.csv"), str(LOGS / "scooter_c20_charge.csv"),
                    "--mapping", str(mapping), "--out", str(tmp_path / "cell.toml"))
    assert code == 2 and key in err and expected in err and str(mapping) in err
