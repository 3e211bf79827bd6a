"""Input helpers: quantities to SI, CSV columns, times; the layer's imports.

Sources: the SI definitions (SI Brochure, 9th ed.: 0 degC = 273.15 K, §2.3.1;
the prefixes milli and kilo, §3; 1 h = 3600 s, Table 8) and the rows of the
CSV files written here.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from thermoelec.inputs import ScenarioError, check_increasing, numeric_column, read_csv_frame, to_si

PACKAGE = Path(__file__).resolve().parents[2] / "thermoelec"


@pytest.mark.parametrize(("value", "default", "si", "expected"), [
    ("-40 degC", "degC", "K", 233.15),  # SI Brochure §2.3.1: T/K = t/degC + 273.15
    (25, "degC", "K", 298.15),
    ("2.5 Ah", "Ah", "C", 9000.0),  # 1 A h = 3600 C
    ("25 mohm", "ohm", "ohm", 0.025),
    ("1.5 kW", "W", "W", 1500.0),
    ("10 min", "s", "s", 600.0),
    ("0.5", "", "", 0.5),
])
def test_quantities_in_si(value, default, si, expected):
    assert to_si(value, default, si) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(("value", "message"), [
    (True, "expected a number"),
    ([1.0], "expected a number"),
    ("2.5 V", "wrong dimension"),
    ("2.5 Ahh", "unknown unit"),
    ("lots", "is not a quantity"),
    (float("nan"), "not a finite number"),
])
def test_bad_quantities_say_why(value, message):
    with pytest.raises(ValueError, match=message):
        to_si(value, "Ah", "C")


def test_a_scenario_error_names_file_key_and_line():
    assert str(ScenarioError("s.toml", "cell.mass", "must be > 0", 7)) == "s.toml, line 7: cell.mass: must be > 0"
    assert str(ScenarioError("s.toml", "", "scenario file not found")) == "s.toml: scenario file not found"


def test_csv_columns_are_stripped_and_bad_rows_named(tmp_path):
    path = tmp_path / "log.csv"
    path.write_text("# a comment line\n time_s , current_A\n0, 1.0\n1, 2.5\n2, oops\n")
    frame = read_csv_frame(path, "log", "log")
    assert list(frame.columns) == ["time_s", "current_A"]
    np.testing.assert_array_equal(numeric_column(frame, "time_s", str(path)), [0.0, 1.0, 2.0])
    with pytest.raises(ScenarioError, match=r"log\.csv: current_A: row 3 \(line 4\): 'oops' is not a finite number"):
        numeric_column(frame, "current_A", str(path))
    with pytest.raises(ScenarioError, match="log file not found"):
        read_csv_frame(tmp_path / "none.csv", "log", "log")


def test_times_must_increase():
    check_increasing(np.array([0.0, 1.0, 5.0]), "f.csv", "time_s")
    with pytest.raises(ScenarioError, match=r"time_s: time must be strictly increasing: row 3 \(line 4\) has 1 s "
                                            "after 1 s"):
        check_increasing(np.array([0.0, 1.0, 1.0]), "f.csv", "time_s")


def test_numeric_column_reads_what_pandas_reads():
    # pandas as the reference reader of the numbers
    frame = pd.DataFrame({"v": ["1e-3", " 2.5", "-7"]})
    np.testing.assert_array_equal(numeric_column(frame, "v", "f"), [1e-3, 2.5, -7.0])


def _thermoelec_imports(folder: Path) -> set[str]:
    """Every thermoelec module the files of a folder import, lazy imports included."""
    found = set()
    for path in folder.glob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            names = [node.module] if isinstance(node, ast.ImportFrom) and node.module else \
                [a.name for a in node.names] if isinstance(node, ast.Import) else []
            found.update(n for n in names if n.startswith("thermoelec"))
    return found


@pytest.mark.parametrize(("layer", "allowed"), [
    ("inputs", ("thermoelec.inputs", "thermoelec.physics")),
    ("scenario", ("thermoelec.inputs", "thermoelec.physics", "thermoelec.engine", "thermoelec.scenario")),
])
def test_the_layer_imports_nothing_above_it(layer, allowed):
    # the project's layering rule: a module imports from its own layer or below
    above = {name for name in _thermoelec_imports(PACKAGE / layer) if not name.startswith(allowed)}
    assert not above, above


_CONVERT = """
import json, sys
from thermoelec.inputs import to_si
values = [to_si(v, d, s) for v, d, s in json.loads(sys.argv[1])]
print(json.dumps({"values": [repr(v) for v in values], "pint": "pint" in sys.modules}))
"""
_QUANTITIES = [["-40 degC", "degC", "K"], ["2.5 Ah", "Ah", "C"], ["25 mohm", "ohm", "ohm"], [0.1, "Ah", "C"],
               ["950 J/kg/K", "J/kg/K", "J/kg/K"], ["3 mAh", "Ah", "C"], ["72 km/h", "m/s", "m/s"]]


def _convert_in_a_fresh_process(cache: Path | str, quantities=_QUANTITIES) -> dict:
    import json
    import os
    import subprocess
    import sys

    env = {**os.environ, "THERMOELEC_CACHE_DIR": str(cache), "PYTHONPATH": str(PACKAGE.parent)}
    proc = subprocess.run([sys.executable, "-c", _CONVERT, json.dumps(quantities)], capture_output=True, text=True,
                          env=env, timeout=120, check=True)
    return json.loads(proc.stdout)


def test_the_disk_memo_gives_pints_own_floats_without_importing_pint(tmp_path):
    import pint

    ureg = pint.UnitRegistry()  # the source: pint itself, in this process, no cache
    expected = [repr(float(ureg.Quantity(*((float(v), d) if not isinstance(v, str) else
                                           (float(v.split()[0]), v.split(None, 1)[1]))).to(s).magnitude))
                for v, d, s in _QUANTITIES]
    first = _convert_in_a_fresh_process(tmp_path)
    assert first["pint"] and first["values"] == expected
    assert list(tmp_path.glob("conversions-*.json")) and list((tmp_path / "pint").iterdir())  # both caches on disk
    again = _convert_in_a_fresh_process(tmp_path)
    assert not again["pint"] and again["values"] == expected  # to the last bit, from the memo


def test_a_damaged_memo_is_an_empty_one_and_no_cache_folder_writes_nothing(tmp_path, monkeypatch):
    _convert_in_a_fresh_process(tmp_path)
    (memo,) = tmp_path.glob("conversions-*.json")
    memo.write_text("{not json")
    assert _convert_in_a_fresh_process(tmp_path)["pint"]  # pint again, and the memo written anew
    import json

    assert len(json.loads(memo.read_text())) == len(_QUANTITIES)
    empty = tmp_path / "nothing"
    empty.mkdir()
    monkeypatch.chdir(empty)
    assert _convert_in_a_fresh_process("")["pint"]
    assert not any(empty.iterdir())


def test_an_invalid_quantity_is_never_memoized(tmp_path):
    import json
    import subprocess

    with pytest.raises(subprocess.CalledProcessError):  # the unknown unit fails the conversion, as without a memo
        _convert_in_a_fresh_process(tmp_path, [["1 V", "V", "V"], ["2.5 Ahh", "Ah", "C"]])
    (memo,) = tmp_path.glob("conversions-*.json")
    assert list(json.loads(memo.read_text())) == ['["str", "1 V", "V", "V"]']


def _pandas_columns(path: Path) -> dict[str, np.ndarray]:
    frame = read_csv_frame(path, "file", "profile")
    return {str(c): numeric_column(frame, str(c), str(path)) for c in frame.columns}


def _bits(values: np.ndarray) -> list[int]:
    return np.asarray(values, dtype=np.float64).view(np.int64).tolist()  # -0.0 and 0.0 differ here


@pytest.mark.parametrize("rows", [
    ["0,1.5,25", "1,-2.25,25.5", "2,0,-0"],  # an integer column: -0 reads as 0.0, as pandas' int64 column
    ["0.0,5.,.5", "1e1,-0.0,1E-5", "2.5e+3,123456789012345,0.00000000000001"],
    ["0,45.123,-3.7", "1,12345.6789,1e22", "2,9.87654321e-7,-1e-22"],
])
def test_plain_numeric_files_read_as_pandas_reads_them_to_the_last_bit(tmp_path, rows):
    from thermoelec.inputs.csvfiles import _plain_numbers, read_numeric_csv

    path = tmp_path / "plain.csv"
    path.write_text("time_s,power_W,ambient_temperature_degC\n" + "\n".join(rows) + "\n")
    assert _plain_numbers(path, "file", "profile") is not None  # read without pandas
    table = read_numeric_csv(path, "file", "profile")
    expected = _pandas_columns(path)  # the source: pandas' own parser
    assert table.columns == list(expected)
    for column, values in expected.items():
        assert _bits(table.numeric(column)) == _bits(values), column


def test_random_plain_numbers_read_as_pandas_reads_them(tmp_path):
    from thermoelec.inputs.csvfiles import read_numeric_csv

    rng = np.random.default_rng(11)
    values = rng.normal(size=(2000, 3)) * 10.0 ** rng.integers(-8, 8, (2000, 3))
    lines = [",".join(f"{v:.{int(rng.integers(1, 14))}g}" for v in row) for row in values]
    path = tmp_path / "random.csv"
    path.write_text("time_s,current_A,x\n" + "\n".join(lines) + "\n")
    table, expected = read_numeric_csv(path, "file", "profile"), _pandas_columns(path)
    for column in expected:
        assert _bits(table.numeric(column)) == _bits(expected[column]), column


@pytest.mark.parametrize("text", [
    "time_s,power_W\n0,1.0\n1,1.2345678901234567\n",  # 17 digits: left to pandas
    "time_s,power_W\n# a comment\n0,1\n1,2\n",
    "time_s, power_W\n0, 1\n1, 2\n",
    "time_s,power_W\r\n0,1\r\n1,2\r\n",
    "time_s,power_W\n0,1\n1,nan\n",
    "time_s,power_W\n0,1\n1,\n",
    "time_s,power_W\n0,1\n1,2",
])
def test_anything_but_plain_numbers_is_read_by_pandas(tmp_path, text):
    from thermoelec.inputs.csvfiles import _plain_numbers, read_numeric_csv

    path = tmp_path / "other.csv"
    path.write_text(text)
    assert _plain_numbers(path, "file", "profile") is None
    table = read_numeric_csv(path, "file", "profile")
    frame = read_csv_frame(path, "file", "profile")
    assert table.columns == [str(c) for c in frame.columns]
    for column in table.columns:
        try:
            expected = numeric_column(frame, column, str(path))
        except ScenarioError as exc:
            with pytest.raises(ScenarioError, match=re.escape(str(exc))):
                table.numeric(column)
        else:
            assert _bits(table.numeric(column)) == _bits(expected)
