"""Compare: every case validated before any is computed, one folder per case, budgets up front.

Sources: the case names themselves (two that differ only in case and
punctuation must not share a folder) and the count of simulations started
(none, when any case is invalid or over budget).
"""

from __future__ import annotations

import json

import pytest

from thermoelec import cli
from thermoelec.analysis import compare

from ..helpers import SCENARIOS

DRONE = SCENARIOS / "drone_delivery.toml"


@pytest.fixture
def no_simulation(monkeypatch):
    def refuse(*args, **kwargs):
        raise AssertionError("a case was computed before every case was checked")

    monkeypatch.setattr(compare, "simulate", refuse)


@pytest.mark.parametrize("extra, key", [
    (["--case", "fine", "thermal.ambient_temperature=0 degC", "--case", "last", "thermal.ambient_temperature=5 V"],
     '--case "last": thermal.ambient_temperature'),
    (["--case", "last", "thermal.no_such_key=1"], '--case "last": thermal.no_such_key'),
    (["--case", "long", "solver.output_interval=1e-6 s"], 'case 3 "long" would take'),  # after the file's two
])
def test_an_invalid_or_oversized_last_case_is_refused_before_any_case_runs(tmp_path, capsys, no_simulation, extra,
                                                                          key):
    code = cli.main(["compare", str(DRONE), "--out", str(tmp_path / "o"), "--no-figures", *extra])
    err = capsys.readouterr().err
    assert code == 2 and key in err and len(err.strip().splitlines()) == 1, err
    assert not (tmp_path / "o").exists()


def test_case_names_that_differ_only_in_case_or_punctuation_get_folders_of_their_own(tmp_path):
    assert compare.case_folders(["Cold start", "cold-start", "COLD  START!", "?"]) == \
        ["cold-start", "cold-start-2", "cold-start-3", "case"]
    out = tmp_path / "o"
    code = cli.main(["compare", str(DRONE), "--out", str(out), "--quiet", "--no-figures",
                     "--case", "Cold start", "thermal.ambient_temperature=0 degC",
                     "--case", "cold-start", "thermal.ambient_temperature=5 degC"])
    assert code == 0
    cases = {c["name"]: c for c in json.loads((out / "comparison.json").read_text())["cases"]}
    for name, ambient in (("Cold start", 0.0), ("cold-start", 5.0)):
        summary = json.loads((out / cases[name]["folder"] / "summary.json").read_text())
        assert summary["cell_temperature_min_degC"] == pytest.approx(ambient)
