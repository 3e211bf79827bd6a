"""Property-based: whatever the values, quantity strings, overrides or CSV profiles, loading a scenario
either gives a valid scenario or raises the project's input error with a message, and nothing else.

Source: the contract of the scenario format (exit 2 with one message for any
invalid input; ``SCENARIO-FORMAT.md``), checked on inputs that hypothesis
generates around a valid scenario. Each property is bounded in examples and in
time per example (a unit parser that hangs on ``10**10**10`` shows as a missed
deadline), so the suite runs in seconds; no example database is written.
"""

from __future__ import annotations

import copy
import math
import string

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from thermoelec.analysis.estimates import check_run
from thermoelec.inputs import ScenarioError, to_si
from thermoelec.scenario import load_scenario, parse_value, scenario_from_dict

from ..helpers import scenario

PROPERTY = settings(max_examples=120, deadline=2000, database=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

UNITS = ["Ah", "mAh", "V", "mV", "A", "W", "kW", "ohm", "mohm", "degC", "K", "degF", "s", "min", "h", "kg", "g",
         "J/kg/K", "W/K", "W/m^2/K", "m^2", "J/mol", "kJ/mol", "F", "m", "%", "1/s", "e", "m/s"]
UNIT_BITS = st.sampled_from([*UNITS, "*", "/", "^", "**", "(", ")", " ", "-", "2", "0", "1e9", "10", ".", "+", "__"])
NUMBERS = st.one_of(st.integers(-10**6, 10**6), st.floats(allow_nan=True, allow_infinity=True),
                    st.sampled_from(["1e400", "-0", ".5", "5.", "1e-400", "nan", "inf"]))


def _number_text(n) -> str:
    return n if isinstance(n, str) else repr(n)


QUANTITY_TEXT = st.one_of(
    st.builds(lambda n, parts: f"{_number_text(n)} {''.join(parts)}", NUMBERS, st.lists(UNIT_BITS, max_size=6)),
    st.text(alphabet=string.digits + string.ascii_letters + " ./*^()-+_%#[]{}'\"", max_size=24),
)
VALUES = st.recursive(
    st.one_of(NUMBERS, st.booleans(), QUANTITY_TEXT, st.text(max_size=8), st.none().map(lambda _: "")),
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(st.sampled_from(
        ["value", "soc", "values", "temperature", "mode", "duration", "x"]), inner, max_size=3)),
    max_leaves=8,
)

#: Keys of a scenario, with their parents' tables: where hostile values go.
KEYS = ["cell.capacity", "cell.voltage_max", "cell.voltage_min", "cell.mass", "cell.specific_heat",
        "cell.initial_soc", "cell.ocv.soc", "cell.ocv.voltage", "cell.ocv.entropic", "cell.ocv.reference_temperature",
        "cell.r0.value", "cell.r0", "cell.r0.activation_energy", "cell.rc", "pack.series", "pack.parallel",
        "pack.interconnect_resistance", "thermal.ambient_temperature", "thermal.sink_heat_capacity",
        "thermal.cell_to_sink", "thermal.sink_to_ambient", "thermal.convection", "thermal.fan", "thermal.heater",
        "thermal.initial_cell_temperature", "profile.repeat", "profile.scale", "profile.segment",
        "profile.segment[1].mode", "profile.segment[1].value", "profile.segment[1].duration",
        "profile.segment[1].file", "limits.cell_temperature_max", "limits.charge_temperature_min", "solver.rtol",
        "solver.output_interval", "solver.max_steps", "solver.backend", "stress.activation_energy", "format",
        "scenario", "include"]

ROUTE = "time_s,current_A\n0,1.0\n10,2.0\n20,0.5\n"


def assert_input_error_only(load) -> None:
    """``load()`` succeeds (and its budget check raises at most an input error) or raises an input error."""
    try:
        loaded = load()
    except ScenarioError as exc:
        assert str(exc).strip() and exc.message.strip(), repr(exc)
        return
    try:
        check_run(loaded)
    except ScenarioError as exc:
        assert exc.message.strip()


@PROPERTY
@given(text=QUANTITY_TEXT, unit=st.sampled_from([("Ah", "C"), ("degC", "K"), ("W/m^2/K", "W/m^2/K"), ("", "")]))
def test_a_quantity_string_converts_or_fails_naming_itself(text, unit):
    try:
        value = to_si(text, *unit)
    except ValueError as exc:
        assert repr(text) in str(exc) or "longer than" in str(exc), str(exc)
    else:
        assert math.isfinite(value)


@PROPERTY
@given(key=st.sampled_from(KEYS), value=VALUES)
def test_any_value_at_any_key_loads_or_is_an_input_error(tmp_path_factory, key, value):
    folder = tmp_path_factory.mktemp("values", numbered=True)
    (folder / "route.csv").write_text(ROUTE)
    data = scenario(segments=[{"mode": "power", "value": "3 W", "duration": "60 s"}, {"file": "route.csv"}])
    assert_input_error_only(lambda: scenario_from_dict(data, folder, overrides={key: value}))


@PROPERTY
@given(pairs=st.lists(st.tuples(st.one_of(st.sampled_from(KEYS), st.text(alphabet="abcelrmopt._[]019 ", max_size=20)),
                                st.text(max_size=16)), min_size=1, max_size=3))
def test_any_set_override_loads_or_is_an_input_error(tmp_path_factory, pairs):
    folder = tmp_path_factory.mktemp("overrides", numbered=True)
    path = folder / "s.toml"
    path.write_text(SCENARIO_TOML)
    (folder / "route.csv").write_text(ROUTE)
    overrides = {k: parse_value(v) for k, v in pairs}
    assert_input_error_only(lambda: load_scenario(path, overrides, overrides_from="--set"))


CELLS = st.one_of(NUMBERS.map(_number_text), st.text(alphabet=string.printable, max_size=6))
HEADERS = st.lists(st.sampled_from(["time_s", "current_A", "power_W", "resistance_ohm", "voltage_V",
                                    "ambient_temperature_degC", " time_s", "speed", "", "#x"]), min_size=0, max_size=4)


@PROPERTY
@given(header=HEADERS, rows=st.lists(st.lists(CELLS, min_size=0, max_size=4), max_size=6),
       raw=st.one_of(st.none(), st.binary(max_size=40)))
def test_any_csv_profile_loads_or_is_an_input_error(tmp_path_factory, header, rows, raw):
    folder = tmp_path_factory.mktemp("csv", numbered=True)
    path = folder / "s.toml"
    path.write_text(SCENARIO_TOML)
    text = "\n".join([",".join(header), *(",".join(r) for r in rows)]) + "\n"
    (folder / "route.csv").write_bytes(raw if raw is not None else text.encode("utf-8", "replace"))
    assert_input_error_only(lambda: load_scenario(path))


def _toml(data: dict) -> str:
    from ..analysis.test_sweep import _toml as write

    return write(copy.deepcopy(data))


SCENARIO_TOML = _toml(scenario(segments=[{"mode": "power", "value": "3 W", "duration": "60 s"},
                                         {"file": "route.csv"}]))
