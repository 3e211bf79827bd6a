"""The command line and the Python API: output contract, overrides, metadata."""

from __future__ import annotations

import json
import os
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import xarray as xr

import thermoelec
from thermoelec import cli

from .helpers import SCENARIOS

CONTRACT_KEYS = [
    "completed", "stop_reason", "duration_s", "cell_temperature_max_degC", "cell_temperature_rise_K",
    "sink_temperature_max_degC", "voltage_min_V", "current_max_A", "energy_battery_Wh", "energy_load_Wh",
    "energy_dissipated_Wh", "heat_generated_Wh", "heat_to_ambient_Wh", "efficiency", "charge_throughput_Ah",
    "soc_end", "warnings",
]
COLUMNS = ["time_s", "current_A", "voltage_V", "power_W", "soc", "ocv_V", "cell_temperature_degC",
           "sink_temperature_degC", "ambient_temperature_degC", "heat_W"]
DRONE = SCENARIOS / "drone_delivery.toml"


@pytest.fixture(scope="module")
def drone_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("drone")
    code = cli.main(["run", str(DRONE), "--out", str(out), "--quiet"])
    assert code == 0
    return out


def test_run_writes_the_contract(drone_run):
    summary = json.loads((drone_run / "summary.json").read_text())
    assert all(k in summary for k in CONTRACT_KEYS)
    assert summary["stop_reason"] == "end_of_profile" and summary["completed"] is True
    frame = pd.read_csv(drone_run / "timeseries.csv")
    assert list(frame.columns[:10]) == COLUMNS
    ds = xr.open_dataset(drone_run / "timeseries.nc")
    assert ds["voltage_V"].attrs["units"] == "V"
    assert ds["cell_temperature_degC"].attrs["units"] == "degC"
    assert ds.attrs["thermoelec_version"] == thermoelec.__version__
    assert len(ds.attrs["scenario_sha256"]) == 64
    assert ds.attrs["solver_NumSteps"] > 0
    np.testing.assert_allclose(ds["voltage_V"].values, frame["voltage_V"].values, rtol=1e-8)
    ds.close()


def test_csv_power_is_voltage_times_current(drone_run):
    frame = pd.read_csv(drone_run / "timeseries.csv")
    np.testing.assert_allclose(frame["power_W"], frame["voltage_V"] * frame["current_A"], rtol=1e-7, atol=1e-6)
    # the demo flies at constant power: P holds the segment's value
    assert frame["power_W"].iloc[0] == pytest.approx(950.0, rel=1e-7)


def test_set_override_changes_the_run(tmp_path):
    code = cli.main(["run", str(DRONE), "--out", str(tmp_path), "--quiet", "--no-figures",
                     "--set", "thermal.ambient_temperature=-5 degC", "--set", "profile.segment[3].value=600 W"])
    assert code == 0
    summary = json.loads((tmp_path / "summary.json").read_text())
    frame = pd.read_csv(tmp_path / "timeseries.csv")
    assert frame["ambient_temperature_degC"].iloc[0] == pytest.approx(-5.0)
    assert summary["cell_temperature_min_degC"] == pytest.approx(-5.0)
    assert frame.loc[frame["time_s"] == 100.0, "power_W"].iloc[-1] == pytest.approx(600.0, rel=1e-7)


def test_terminal_summary(tmp_path, capsys):
    code = cli.main(["run", str(DRONE), "--out", str(tmp_path), "--no-figures"])
    out = capsys.readouterr().out
    assert code == 0
    assert "peak cell temperature" in out and "end_of_profile" in out


def test_stop_is_exit_zero(tmp_path):
    # a run that ends on a limit finished: exit 0 with completed = false
    code = cli.main(["run", str(DRONE), "--out", str(tmp_path), "--quiet", "--no-figures",
                     "--set", "thermal.ambient_temperature=-30 degC"])
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert code == 0
    # at -30 degC (R0 held at its -20 degC row): R_tot = 6 x 0.074 / 2 + 0.004 = 0.226 ohm,
    # E = 6 x 4.20 V, so E^2 / (4 R_tot) = 702 W < 950 W take-off power: not deliverable at t = 0
    assert summary["completed"] is False and summary["stop_reason"] == "power_limit"
    assert summary["duration_s"] == 0.0


def test_invalid_input_from_a_subprocess_has_no_traceback(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text(DRONE.read_text().replace('capacity = "5 Ah"', 'capacity = "5 V"'))
    proc = subprocess.run([sys.executable, "-m", "thermoelec.cli", "run", str(bad), "--out", str(tmp_path / "o")],
                          capture_output=True, text=True)
    assert proc.returncode == 2
    assert "Traceback" not in proc.stderr and "cell.capacity" in proc.stderr


def test_the_command_ends_without_teardown_but_with_its_exit_handlers_and_streams(tmp_path):
    # thermoelec.cli.console ends the process with os._exit after main: the exit handlers must have run
    # (the unit memo is written at exit into the cache folder), the printed summary must be whole and the
    # exit status main's, for a run that passes and for input that is refused
    cache = tmp_path / "cache"
    env = {**os.environ, "THERMOELEC_CACHE_DIR": str(cache)}
    done = subprocess.run([sys.executable, "-m", "thermoelec.cli", "run", str(DRONE), "--out", str(tmp_path / "o"),
                           "--no-figures"], capture_output=True, text=True, env=env, timeout=300)
    assert done.returncode == 0, done.stderr
    assert "verdict" in done.stdout.lower() and done.stdout.endswith("\n")
    assert json.loads((tmp_path / "o" / "summary.json").read_text())["completed"] in (True, False)
    (memo,) = cache.glob("conversions-*.json")
    assert json.loads(memo.read_text())  # written by the exit handler
    bad = tmp_path / "bad.toml"
    bad.write_text(DRONE.read_text().replace('capacity = "5 Ah"', 'capacity = "5 V"'))
    refused = subprocess.run([sys.executable, "-m", "thermoelec.cli", "run", str(bad), "--out", str(tmp_path / "b")],
                             capture_output=True, text=True, env=env, timeout=300)
    assert refused.returncode == 2 and "cell.capacity" in refused.stderr


def test_api_from_file_dict_and_overrides():
    scenario = thermoelec.load_scenario(DRONE)
    hot = thermoelec.simulate(scenario)
    cold = thermoelec.simulate(scenario, overrides={"thermal.ambient_temperature": "-5 degC"})
    assert cold.summary["voltage_min_V"] < hot.summary["voltage_min_V"]
    assert cold.summary["energy_dissipated_Wh"] > hot.summary["energy_dissipated_Wh"]
    frame = hot.to_dataframe()
    assert list(frame.columns[:10]) == COLUMNS
    ds = hot.to_dataset()
    assert ds["soc"].attrs["units"] == "1"
    assert hot.statistics["NumSteps"] > 0 and hot.status == "ok"


def test_api_dict_matches_file(tmp_path):
    import tomllib

    data = tomllib.loads(DRONE.read_text())
    a = thermoelec.simulate(data)
    b = thermoelec.simulate_file(DRONE)
    assert a.summary["energy_load_Wh"] == b.summary["energy_load_Wh"]


def test_ebike_demo_reads_csv_and_recharges():
    result = thermoelec.simulate_file(SCENARIOS / "ebike_route.toml")
    events = [e["event"] for e in result.summary["events"]]
    assert result.completed
    assert "cv_switch" in events and "cv_cutoff" in events
    # regeneration on the descent: negative power appears within the route (0..2400 s)
    route = result.series["time_s"] <= 2400
    assert result.series["power_W"][route].min() < -100
    # the CSV's ambient column is used on the route, the scenario's at the depot
    assert result.series["ambient_temperature_degC"][0] == pytest.approx(18.0)
    assert result.series["ambient_temperature_degC"][-1] == pytest.approx(21.0)


def test_cold_charge_warning():
    data = thermoelec.load_scenario(SCENARIOS / "ebike_route.toml").raw
    result = thermoelec.simulate(data, overrides={"thermal.ambient_temperature": "-8 degC",
                                                   "profile.segment[1]": {"mode": "rest", "duration": "1 s"}})
    assert any("charge_temperature_min" in w for w in result.warnings)
    warm = thermoelec.simulate(data, overrides={"profile.segment[1]": {"mode": "rest", "duration": "1 s"}})
    assert not any("charge_temperature_min" in w for w in warm.warnings)


def test_api_plot_functions_draw_the_result():
    # the figures show the result's own series: the dashboard's current panel holds the current,
    # the energy chart's terminal curve ends at the last discharging voltage, the operating region
    # plots the mission's (current, power) points
    from matplotlib.figure import Figure

    result = thermoelec.simulate_file(DRONE)
    dashboard = thermoelec.plot_dashboard(result)
    energy = thermoelec.plot_energy(result)
    region = thermoelec.plot_operating_region(result)
    assert all(isinstance(fig, Figure) for fig in (dashboard, energy, region))
    assert len(dashboard.axes) == 6
    (current_line,) = [line for line in dashboard.axes[1].lines if len(line.get_ydata()) > 2]  # not the markers
    np.testing.assert_array_equal(current_line.get_ydata(), result.series["current_A"])
    assert energy.axes[1].get_xlabel() == "charge moved, discharge [Ah]"
    points = region.axes[0].collections[-1].get_offsets()
    discharging = result.series["current_A"] > 0
    np.testing.assert_allclose(points[:, 0], result.series["current_A"][discharging])
    np.testing.assert_allclose(points[:, 1], result.series["power_W"][discharging])


def test_import_thermoelec_loads_no_plotting():
    # the plot functions import the output layer when called, so a plain import stays light
    code = "import sys, thermoelec; print(any(m.startswith(('matplotlib', 'thermoelec.output')) for m in sys.modules))"
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert proc.stdout.strip() == "False"
