"""Malformed scenarios and profiles: exit status 2, one message naming the file and key, no traceback."""

from __future__ import annotations

import pytest

from thermoelec import cli

BASE = """format = 1
[scenario]
name = "bad input base"
[cell]
capacity = "2.5 Ah"
voltage_max = "4.2 V"
voltage_min = "2.7 V"
mass = "0.045 kg"
specific_heat = "950 J/kg/K"
[cell.ocv]
soc = [0.0, 0.5, 1.0]
voltage = [3.2, 3.7, 4.15]
[cell.r0]
value = "25 mohm"
[[cell.rc]]
resistance = "10 mohm"
time_constant = "15 s"
[thermal]
ambient_temperature = "20 degC"
sink_heat_capacity = "150 J/K"
cell_to_sink = "0.8 W/K"
sink_to_ambient = "0.3 W/K"
[[profile.segment]]
mode = "power"
value = "6 W"
duration = "10 min"
[[profile.segment]]
file = "route.csv"
"""
ROUTE = "time_s,current_A\n0,1.0\n10,2.0\n20,0.5\n"

# (id, text to replace, replacement, key the message must name)
SCENARIO_CASES = [
    ("wrong-unit", 'capacity = "2.5 Ah"', 'capacity = "2.5 V"', "cell.capacity"),
    ("unknown-unit", 'mass = "0.045 kg"', 'mass = "0.045 kgs"', "cell.mass"),
    ("negative-capacity", 'capacity = "2.5 Ah"', 'capacity = "-2.5 Ah"', "cell.capacity"),
    ("zero-mass", 'mass = "0.045 kg"', "mass = 0", "cell.mass"),
    ("zero-heat-capacity", 'sink_heat_capacity = "150 J/K"', "sink_heat_capacity = 0", "thermal.sink_heat_capacity"),
    ("negative-conductance", 'cell_to_sink = "0.8 W/K"', 'cell_to_sink = "-0.8 W/K"', "thermal.cell_to_sink"),
    ("vmin-above-vmax", 'voltage_min = "2.7 V"', 'voltage_min = "4.3 V"', "cell"),
    ("soc-unsorted", "soc = [0.0, 0.5, 1.0]", "soc = [0.0, 0.7, 0.5, 1.0]", "cell.ocv"),
    ("soc-not-covering", "soc = [0.0, 0.5, 1.0]", "soc = [0.1, 0.5, 1.0]", "cell.ocv"),
    ("ocv-length-mismatch", "voltage = [3.2, 3.7, 4.15]", "voltage = [3.2, 3.7]", "cell.ocv"),
    ("ocv-nan", "voltage = [3.2, 3.7, 4.15]", "voltage = [3.2, nan, 4.15]", "cell.ocv.voltage"),
    ("entropic-mismatch", "voltage = [3.2, 3.7, 4.15]", "voltage = [3.2, 3.7, 4.15]\nentropic = [0.0]",
     "cell.ocv"),
    ("r0-two-forms", 'value = "25 mohm"', 'value = "25 mohm"\nsoc = [0.0, 1.0]\nvalues = [0.02, 0.03]',
     "cell.r0"),
    ("r0-table-mismatch", 'value = "25 mohm"', "soc = [0.0, 0.5, 1.0]\nvalues = [[0.02, 0.03]]", "cell.r0"),
    ("r0-2d-rows", 'value = "25 mohm"',
     'soc = [0.0, 1.0]\ntemperature = ["0 degC", "25 degC"]\nvalues = [[0.02, 0.03]]', "cell.r0"),
    ("r0-2d-unsorted-temperature", 'value = "25 mohm"',
     'soc = [0.0, 1.0]\ntemperature = ["25 degC", "0 degC"]\nvalues = [[0.02, 0.03], [0.02, 0.03]]', "cell.r0"),
    ("r0-negative", 'value = "25 mohm"', 'value = "-25 mohm"', "cell.r0"),
    ("rc-both-forms", 'time_constant = "15 s"', 'time_constant = "15 s"\ncapacitance = "100 F"', "cell.rc[1]"),
    ("rc-wrong-unit", 'time_constant = "15 s"', 'time_constant = "15 V"', "cell.rc[1].time_constant"),
    ("unknown-mode", 'mode = "power"', 'mode = "torque"', "profile.segment[1].mode"),
    ("unknown-key", 'name = "bad input base"', 'name = "bad input base"\ncolour = "red"', "scenario.colour"),
    ("unknown-section", "[thermal]", "[cooling]\nfan = 1\n[thermal]", "cooling"),
    ("missing-required", 'specific_heat = "950 J/kg/K"\n', "", "cell.specific_heat"),
    ("missing-duration", 'duration = "10 min"', "", "profile.segment[1]"),
    ("zero-duration", 'duration = "10 min"', "duration = 0", "profile.segment[1]"),
    ("power-wrong-unit", 'value = "6 W"', 'value = "6 A"', "profile.segment[1]"),
    ("soc-out-of-range", 'specific_heat = "950 J/kg/K"', 'specific_heat = "950 J/kg/K"\ninitial_soc = 1.2',
     "cell"),
    ("toml-syntax", 'name = "bad input base"', 'name = "bad input base', ""),
    ("format-version", "format = 1", "format = 2", "format"),
    ("both-cooling-forms", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.convection]\ncoefficient = 10\narea = 0.01', "thermal"),
    ("cccv-positive-current", 'mode = "power"\nvalue = "6 W"\nduration = "10 min"',
     'mode = "cccv"\ncurrent = "2 A"\nvoltage = "4.2 V"\ncutoff_current = "0.1 A"', "profile.segment[1]"),
    ("backend-unknown", "[[profile.segment]]\nfile", '[solver]\nbackend = "euler"\n[[profile.segment]]\nfile',
     "solver"),
    ("bool-as-quantity", 'mass = "0.045 kg"', "mass = true", "cell.mass"),
    ("pack-zero-series", "[thermal]", "[pack]\nseries = 0\n[thermal]", "pack.series"),
    ("geometry-half-cylinder", 'specific_heat = "950 J/kg/K"', 'specific_heat = "950 J/kg/K"\ndiameter = "21 mm"',
     "cell.length"),
    ("geometry-both-shapes", 'specific_heat = "950 J/kg/K"',
     'specific_heat = "950 J/kg/K"\ndiameter = "21 mm"\nlength = "70 mm"\nthickness = "5 mm"', "cell"),
    ("conductivity-without-geometry", 'specific_heat = "950 J/kg/K"',
     'specific_heat = "950 J/kg/K"\nthermal_conductivity = "0.5 W/m/K"', "cell.thermal_conductivity"),
    ("correlation-without-length", 'sink_to_ambient = "0.3 W/K"',
     '[thermal.convection]\nnatural = "vertical_plate"\narea = "0.05 m^2"', "thermal.convection.length"),
    ("correlation-unknown", 'sink_to_ambient = "0.3 W/K"',
     '[thermal.convection]\nnatural = "no_such_correlation"\nlength = 0.1\narea = 0.05', "thermal.convection.natural"),
    ("air-speed-without-forced", 'sink_to_ambient = "0.3 W/K"',
     '[thermal.convection]\nnatural = "vertical_plate"\nlength = 0.1\narea = 0.05\nair_speed = "2 m/s"',
     "thermal.convection.air_speed"),
    ("emissivity-above-one", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.radiation]\nemissivity = 1.3\narea = 0.05',
     "thermal.radiation.emissivity"),
    ("fan-thresholds-reversed", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.fan]\non_above = "30 degC"\noff_below = "35 degC"\nconductance = 1',
     "thermal.fan.off_below"),
    ("fan-nothing-to-do", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.fan]\non_above = "35 degC"\noff_below = "30 degC"',
     "thermal.fan.air_speed"),
    ("heater-wrong-unit", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.heater]\npower = "20 A"\non_below = "0 degC"\noff_above = "5 degC"',
     "thermal.heater.power"),
    ("heater-source-unknown", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.heater]\npower = 20\non_below = 0\noff_above = 5\nsource = "sun"',
     "thermal.heater.source"),
    ("pump-without-coolant", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.pump]\non_above = "35 degC"\noff_below = "30 degC"', "thermal.pump"),
    ("coolant-both-forms", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.coolant]\ninlet_temperature = 20\nflow_rate = "0.01 kg/s"\n'
     'plate_conductance = 10\nconductance = 5', "thermal.coolant.conductance"),
    ("coolant-flow-wrong-unit", 'sink_to_ambient = "0.3 W/K"',
     'sink_to_ambient = "0.3 W/K"\n[thermal.coolant]\ninlet_temperature = 20\nflow_rate = "0.01 m/s"\n'
     'plate_conductance = 10', "thermal.coolant.flow_rate"),
    ("soak-not-first", "[[profile.segment]]\nfile", '[[profile.segment]]\nmode = "soak"\nduration = "1 h"\n'
     "[[profile.segment]]\nfile", "profile.segment"),
    ("ambient-twice", 'ambient_temperature = "20 degC"', 'ambient_temperature = "20 degC"\nambient_profile = "a.csv"',
     "thermal.ambient_profile"),
    ("include-missing", "format = 1", 'format = 1\ninclude = "nowhere.toml"', "include"),
    ("include-not-a-name", "format = 1", "format = 1\ninclude = 3", "include"),
    ("stress-negative-energy", "[thermal]", '[stress]\nactivation_energy = "-3 kJ/mol"\n[thermal]',
     "stress.activation_energy"),
]

CSV_CASES = [
    ("csv-missing-file", None, "route.csv"),
    ("csv-unsorted", "time_s,current_A\n0,1.0\n20,2.0\n10,0.5\n", "time_s"),
    ("csv-non-numeric", "time_s,current_A\n0,1.0\n10,lots\n20,0.5\n", "current_A"),
    ("csv-nan", "time_s,current_A\n0,1.0\n10,nan\n20,0.5\n", "current_A"),
    ("csv-no-time", "t,current_A\n0,1.0\n10,2.0\n", "time_s"),
    ("csv-two-demands", "time_s,current_A,power_W\n0,1.0,3\n10,2.0,4\n", "route.csv"),
    ("csv-one-row", "time_s,current_A\n0,1.0\n", "time_s"),
    ("csv-unknown-column", "time_s,current_A,speed\n0,1.0,3\n10,2.0,4\n", "speed"),
]


def run_cli(tmp_path, text: str, route: str | None = ROUTE) -> tuple[int, str]:
    scenario = tmp_path / "scenario.toml"
    scenario.write_text(text)
    if route is not None:
        (tmp_path / "route.csv").write_text(route)
    return cli.main(["run", str(scenario), "--out", str(tmp_path / "out"), "--quiet"]), str(scenario)


def assert_one_clear_message(capsys, code: int, file_name: str, key: str) -> str:
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert file_name in lines[0], err
    assert key in lines[0], err
    return lines[0]


def test_base_is_valid(tmp_path, capsys):
    code, _ = run_cli(tmp_path, BASE)
    assert code == 0, capsys.readouterr().err


@pytest.mark.parametrize(("old", "new", "key"), [c[1:] for c in SCENARIO_CASES], ids=[c[0] for c in SCENARIO_CASES])
def test_bad_scenario(tmp_path, capsys, old, new, key):
    assert old in BASE
    code, path = run_cli(tmp_path, BASE.replace(old, new, 1))
    assert_one_clear_message(capsys, code, path, key)
    assert not (tmp_path / "out" / "summary.json").exists()


@pytest.mark.parametrize(("route", "key"), [c[1:] for c in CSV_CASES], ids=[c[0] for c in CSV_CASES])
def test_bad_profile_csv(tmp_path, capsys, route, key):
    code, _ = run_cli(tmp_path, BASE, route=route)
    assert_one_clear_message(capsys, code, "route.csv", key)


def test_messages_give_the_line(tmp_path, capsys):
    code, path = run_cli(tmp_path, BASE.replace('capacity = "2.5 Ah"', 'capacity = "2.5 V"'))
    line = assert_one_clear_message(capsys, code, path, "cell.capacity")
    assert "line 5" in line


def test_unknown_key_lists_the_valid_ones(tmp_path, capsys):
    code, path = run_cli(tmp_path, BASE.replace('mass = "0.045 kg"', 'mass = "0.045 kg"\nweight = 1'))
    line = assert_one_clear_message(capsys, code, path, "cell.weight")
    assert "specific_heat" in line


def test_missing_scenario_file(tmp_path, capsys):
    code = cli.main(["run", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "o")])
    assert_one_clear_message(capsys, code, "nope.toml", "not found")


@pytest.mark.parametrize(("override", "key"), [
    ("cell.capacity=5 V", "cell.capacity"),
    ("profile.segment[9].value=1", "profile.segment[9]"),
    ("novalue", "novalue"),
])
def test_bad_override(tmp_path, capsys, override, key):
    (tmp_path / "route.csv").write_text(ROUTE)
    scenario = tmp_path / "s.toml"
    scenario.write_text(BASE)
    code = cli.main(["run", str(scenario), "--out", str(tmp_path / "o"), "--set", override])
    err = capsys.readouterr().err
    assert code == 2 and key in err and "Traceback" not in err


@pytest.mark.parametrize("content, key", [
    (None, "thermal.ambient_profile"),
    ("time_s,ambient_temperature_degC\n0,10\n0,12\n", "time_s"),
    ("time_s,ambient_temperature_degC\n0,10\n60,nan\n", "ambient_temperature_degC"),
    ("time_s,temperature\n0,10\n60,12\n", "ambient_temperature_degC"),
])
def test_bad_ambient_profile(tmp_path, capsys, content, key):
    if content is not None:
        (tmp_path / "air.csv").write_text(content)
    text = BASE.replace('ambient_temperature = "20 degC"', 'ambient_profile = "air.csv"')
    code, _ = run_cli(tmp_path, text)
    err = capsys.readouterr().err
    assert code == 2 and "Traceback" not in err
    assert "air.csv" in err and key in err
    assert len([line for line in err.splitlines() if line.strip()]) == 1


#: Unit strings the unit parser (pint) fails on in every way it can: a tokenizer error, a division by
#: zero, a bare assertion, a syntax error, a power it would evaluate for ever, an offset unit in a product,
#: an overflow; each must be the input error, quoting the string.
UNIT_FAILURES = ["2.5 (Ah", "2.5 Ah)", "2.5 Ah)(", "2.5 Ah/0", "2.5 Ah**", "2.5 ^", "2.5 Ah +", "2.5 /", "2.5 ..",
                 "2.5 ()", "2.5 */Ah", "2.5 10**10**10", "2.5 (Ah)**2", "2.5 Ah**99", "2.5 degC*m", "1e300 MAh",
                 "2.5 Ahh", "2.5 " + "m" * 300, "2.5 V"]


@pytest.mark.parametrize("text", UNIT_FAILURES)
def test_every_unit_parser_failure_is_an_input_error_quoting_the_string(tmp_path, capsys, text):
    code, path = run_cli(tmp_path, BASE.replace('capacity = "2.5 Ah"', f'capacity = "{text}"'))
    line = assert_one_clear_message(capsys, code, path, "cell.capacity")
    assert repr(text) in line or "longer than" in line, line


@pytest.mark.parametrize("text", ["5 (A", "5 A/0", "5 A**"])
def test_a_unit_failure_in_a_set_names_the_flag(tmp_path, capsys, text):
    (tmp_path / "route.csv").write_text(ROUTE)
    scenario = tmp_path / "s.toml"
    scenario.write_text(BASE)
    code = cli.main(["run", str(scenario), "--out", str(tmp_path / "o"), "--set", f"profile.segment[1].value={text}"])
    line = assert_one_clear_message(capsys, code, "--set profile.segment[1].value=", "profile.segment[1].value")
    assert repr(text) in line


def test_a_bad_value_in_an_included_file_is_reported_at_its_own_line(tmp_path, capsys):
    # the scenario file holds a valid capacity at line 5; the included file's mass is the fault
    (tmp_path / "cell.toml").write_text('[cell]\n# the cell\nmass = "-45 g"\n')
    code, path = run_cli(tmp_path, BASE.replace("format = 1", 'format = 1\ninclude = "cell.toml"')
                         .replace('mass = "0.045 kg"\n', ""))
    line = assert_one_clear_message(capsys, code, "cell.toml, line 3", "cell.mass")
    assert path not in line


@pytest.mark.parametrize("old, new, key", [
    ('ambient_temperature = "20 degC"', 'ambient_temperature = "-300 degC"', "thermal.ambient_temperature"),
    ("[thermal]", '[limits]\ncell_temperature_max = "-280 degC"\n[thermal]', "limits.cell_temperature_max"),
    ("[thermal]", '[limits]\ncharge_temperature_min = "70 degC"\n[thermal]', "limits.charge_temperature_min"),
    ("", '[thermal.coolant]\ninlet_temperature = "-500 degC"\nconductance = 1\n', "thermal.coolant.inlet_temperature"),
    ('value = "25 mohm"', 'soc = [0, 1]\ntemperature = ["-300 degC", "25 degC"]\nvalues = [[0.02, 0.02], [0.02, 0.02]]',
     "cell.r0.temperature"),
    ("[[profile.segment]]\nfile", "[solver]\nrtol = 1e-20\n[[profile.segment]]\nfile", "solver.rtol"),
    ("[[profile.segment]]\nfile", "[solver]\nmax_steps = 100000000000000000000\n[[profile.segment]]\nfile",
     "solver.max_steps"),
    ("[thermal]", '[stress]\nactivation_energy = "1e9 J/mol"\n[thermal]', "stress.activation_energy"),
    ("format = 1", 'format = 1\ninclude = ""', "include"),
    ("format = 1", 'format = 1\ninclude = "."', "include"),
])
def test_absurd_values_are_refused(tmp_path, capsys, old, new, key):
    code, path = run_cli(tmp_path, BASE.replace(old, new, 1) if old else BASE + new)  # no old text: a table added
    assert_one_clear_message(capsys, code, path, key)


@pytest.mark.parametrize("route, key", [
    ("time_s, time_s,current_A\n0,0,1\n10,10,2\n", "time_s"),
    ("time_s,current_A\n0,1\n10,\n", "current_A"),
])
def test_a_repeated_column_or_an_empty_field_is_named(tmp_path, capsys, route, key):
    code, _ = run_cli(tmp_path, BASE, route=route)
    assert_one_clear_message(capsys, code, "route.csv", key)


def test_a_csv_with_a_byte_order_mark_reads(tmp_path, capsys):
    code, _ = run_cli(tmp_path, BASE, route="\ufeff" + ROUTE)
    assert code == 0, capsys.readouterr().err
