"""``thermoelec capability`` end to end, and the bad input of limits, derating and the capability grid.

Sources: circuit theory for a source behind a resistance (the voltage-limited current
``(U - V_min)/R0`` of a flat-OCV cell with no RC pair, the same closed form as
tests/analysis/test_capability.py; VALIDATION.md section 7 gives 35 A for U = 3.7 V,
V_min = 3.0 V, R0 = 20 mohm); the file contract of the command (README: capability.csv,
capability.nc with dimensions duration x temperature x SoC and ``units`` attributes, a heat
map per duration, report.html with the cautions).
"""

from __future__ import annotations

import pandas as pd
import pytest
import xarray as xr

from thermoelec import cli

from .scenario.test_bad_input import assert_one_clear_message

# a flat-OCV cell with a constant R0 and no RC pair: the capability has closed forms (see the module docstring)
FLAT = """format = 1
[scenario]
name = "flat cell"
[cell]
capacity = "5 Ah"
voltage_max = "4.2 V"
voltage_min = "3.0 V"
mass = "0.070 kg"
specific_heat = "900 J/kg/K"
[cell.ocv]
soc = [0.0, 1.0]
voltage = [3.7, 3.7]
[cell.r0]
value = "20 mohm"
[thermal]
ambient_temperature = "25 degC"
sink_heat_capacity = "200 J/K"
cell_to_sink = "0 W/K"
sink_to_ambient = "0.5 W/K"
[[profile.segment]]
mode = "current"
value = "5 A"
duration = "10 min"
"""
U, V_MIN, R0 = 3.7, 3.0, 0.020


def _write(tmp_path, text: str = FLAT):
    path = tmp_path / "scenario.toml"
    path.write_text(text)
    return path


@pytest.fixture(scope="module")
def flat_outputs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("capability")
    scenario = _write(folder)
    code = cli.main(["capability", str(scenario), "--out", str(folder / "out"), "--quiet",
                     "--pulse", "2 s,10 s", "--temperature", "10 degC,25 degC", "--soc", "0.3,0.7",
                     "--set", "solver.rtol=1e-8"])
    assert code == 0
    return folder / "out"


def test_the_command_writes_the_tidy_table_the_dataset_the_heat_maps_and_the_report(flat_outputs):
    table = pd.read_csv(flat_outputs / "capability.csv")
    assert len(table) == 2 * 2 * 2
    assert {"duration_s", "temperature_degC", "soc", "discharge_current_A", "discharge_current_limit",
            "charge_power_W", "charge_power_limit"} <= set(table.columns)
    # no RC pair and no heating to speak of: the voltage-limited current, 35 A (VALIDATION.md section 7)
    assert table["discharge_current_A"].to_numpy() == pytest.approx((U - V_MIN) / R0, rel=1e-6)
    assert set(table["discharge_current_limit"]) == {"voltage_min"}
    with xr.open_dataset(flat_outputs / "capability.nc") as ds:
        assert ds["discharge_current_A"].dims == ("duration", "temperature", "soc")
        assert ds["discharge_current_A"].attrs["units"] == "A"
        assert ds["discharge_power_W"].attrs["units"] == "W"
        assert ds["duration"].attrs["units"] == "s"
    assert (flat_outputs / "capability_2s.png").stat().st_size > 0
    assert (flat_outputs / "capability_10s.png").stat().st_size > 0
    report = (flat_outputs / "report.html").read_text()
    assert "voltage_min" in report and "safety standards" in report


def test_the_command_prints_the_capability_near_25_degc_and_half_charge(tmp_path, capsys):
    code = cli.main(["capability", str(_write(tmp_path)), "--out", str(tmp_path / "out"), "--no-figures",
                     "--pulse", "10 s", "--temperature", "25 degC", "--soc", "0.5"])
    out = capsys.readouterr().out
    assert code == 0
    assert "at 25 degC, SoC 0.5" in out and "discharge current 35 A (voltage_min)" in out
    assert not (tmp_path / "out" / "report.html").exists()


# (id, extra TOML, key the message must name)
SCENARIO_CASES = [
    ("negative-allowance", '[derating]\ndischarge_current = "-5 A"\n', "derating.discharge_current"),
    ("negative-allowance-in-a-table",
     '[derating.charge_current]\ntemperature = ["0 degC", "25 degC"]\nvalues = ["1 A", "-2 A"]\n',
     "derating.charge_current.values"),
    ("breakpoints-out-of-order",
     '[derating.discharge_current]\ntemperature = ["25 degC", "0 degC"]\nvalues = ["10 A", "5 A"]\n',
     "derating.discharge_current.temperature"),
    ("soc-breakpoints-out-of-order",
     '[limits.discharge_power_max]\nsoc = [0.5, 0.2]\nvalues = ["100 W", "50 W"]\n',
     "limits.discharge_power_max.soc"),
    ("limit-in-the-wrong-unit", '[limits]\ndischarge_current_max = "20 W"\n', "limits.discharge_current_max"),
    ("temperature-limit-in-the-wrong-unit", '[limits]\nsink_temperature_max = "50 A"\n',
     "limits.sink_temperature_max"),
    ("ramp-in-the-wrong-unit", '[derating]\nramp_rate = "5 A"\n', "derating.ramp_rate"),
    ("current-and-c-rate", '[derating]\ndischarge_current = "5 A"\ndischarge_c_rate = 2\n',
     "derating.discharge_c_rate"),
]


@pytest.mark.parametrize(("extra", "key"), [c[1:] for c in SCENARIO_CASES], ids=[c[0] for c in SCENARIO_CASES])
@pytest.mark.parametrize("command", ["run", "capability"])
def test_bad_limits_and_derating(tmp_path, capsys, command, extra, key):
    scenario = _write(tmp_path, FLAT + extra)
    code = cli.main([command, str(scenario), "--out", str(tmp_path / "out"), "--quiet"])
    assert_one_clear_message(capsys, code, str(scenario), key)
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


@pytest.mark.parametrize(("option", "value"), [
    ("--pulse", "0 s"),
    ("--pulse", "-2 s"),
    ("--pulse", "10 s,0"),
    ("--pulse", ""),
    ("--soc", ""),
    ("--soc", ","),
    ("--temperature", " "),
    ("--soc", "0.5,1.2"),
    ("--temperature", "25 V"),
])
def test_bad_capability_grid(tmp_path, capsys, option, value):
    code = cli.main(["capability", str(_write(tmp_path)), "--out", str(tmp_path / "out"), "--quiet",
                     option, value])
    assert_one_clear_message(capsys, code, option, option)
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())
