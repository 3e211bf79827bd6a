"""Option groups as sweep axes and the design review.

Sources: the engine's own solo runs with the same overrides applied by hand (a plan must
give each scenario exactly), the design search run on its own (Brent's method on the
engine: the review's refined value must equal it to the search tolerance), and a
brute-force choice over the grid results (the recommendation must equal it).
"""

from __future__ import annotations

import copy
import itertools

import numpy as np
import pytest

import thermoelec
from thermoelec import cli
from thermoelec.analysis import sweep
from thermoelec.analysis.sweep.review import design_review, parse_requirement, with_requirement_point
from thermoelec.analysis.verdict import PASS

from .test_sweep import BASE, _toml

GROUP = [
    {"name": "still air", "thermal.sink_to_ambient": "0.3 W/K", "attributes": {"cost": "0 EUR", "mass": "0 g"}},
    {"name": "fin", "thermal.sink_to_ambient": "0.6 W/K", "attributes": {"cost": "4 EUR", "mass": "60 g"}},
    {"name": "big fin", "thermal.sink_to_ambient": "1.2 W/K", "attributes": {"cost": "9 EUR", "mass": "0.15 kg"}},
]


def write(folder, sweep_table: dict, options=None, **changes):
    data = copy.deepcopy(BASE)
    data.update(changes)
    data["option"] = {"cooling": copy.deepcopy(GROUP if options is None else options)}
    data["sweep"] = sweep_table
    path = folder / "options.toml"
    path.write_text(_toml(data))
    return path


def test_a_mixed_plan_enumerates_every_combination_each_equal_to_its_overrides_by_hand(tmp_path):
    table = {"thermal.ambient_temperature": ["15 degC", "25 degC"],
             "zip": {"duty": {"profile.segment[1].value": ["3 A", "5 A"],
                              "profile.segment[1].duration": ["25 min", "10 min"]}}}
    loaded = thermoelec.load_scenario(write(tmp_path, table, options=GROUP[:2]))
    plan = sweep.plan_sweep(loaded)
    assert plan.dim_names == ("cooling", "thermal.ambient_temperature", "duty") and plan.shape == (2, 2, 2)
    expected = [{"thermal.sink_to_ambient": sink, "thermal.ambient_temperature": ambient,
                 "profile.segment[1].value": current, "profile.segment[1].duration": duration}
                for sink, ambient, (current, duration) in itertools.product(
                    ("0.3 W/K", "0.6 W/K"), ("15 degC", "25 degC"), (("3 A", "25 min"), ("5 A", "10 min")))]
    assert [plan.overrides(i) for i in range(plan.size)] == expected
    rows = sweep.run_chunk(loaded, plan, list(range(plan.size)), engine="solo")
    for row, overrides in zip(rows, expected, strict=True):
        by_hand = thermoelec.simulate(loaded, overrides=overrides).summary
        for key in sweep.METRICS:
            want = np.nan if by_hand[key] is None else float(by_hand[key])
            got = np.nan if row[key] is None else float(row[key])
            assert got == pytest.approx(want, rel=1e-12, abs=1e-12, nan_ok=True), key
    ds = sweep.sweep_dataset(loaded, plan, rows)
    assert list(ds["cooling"].values) == ["still air", "fin"]
    assert list(ds["cooling.mass"].values) == [0.0, 60.0] and ds["cooling.mass"].attrs["units"] == "g"
    assert list(ds["profile.segment[1].value"].values) == [3.0, 5.0]


def test_highest_passing_ambient_rises_with_the_sink_and_equals_the_search_on_its_own(tmp_path):
    table = {"thermal.ambient_temperature": {"start": "10 degC", "stop": "29.5 degC", "step": "1.5 degC"}}
    loaded = thermoelec.load_scenario(write(tmp_path, table))
    requirement = parse_requirement("temperature_margin_K >= 1 at thermal.ambient_temperature = 20 degC")
    plan = with_requirement_point(sweep.plan_sweep(loaded), requirement)
    assert 20.0 in plan.dim("thermal.ambient_temperature").keys[0].coords  # added to the grid
    rows = sweep.run_sweep(loaded, plan, tmp_path / "out", workers=1, progress=False)
    ds = sweep.sweep_dataset(loaded, plan, rows)
    review = design_review(loaded, plan, ds, requirement, refine=True, tolerance=1e-4)
    refined = review["refined"].values
    assert (np.diff(refined) > 0).all() and (review["refined_status"].values == "ok").all()
    criterion = sweep.parse_criterion("temperature_margin_K >= 0")
    for i, option in enumerate(GROUP):
        alone = loaded.with_overrides({"thermal.sink_to_ambient": option["thermal.sink_to_ambient"]})
        found = sweep.design_search(alone, None, "thermal.ambient_temperature", 5.0, 29.9, "degC", criterion,
                                    greatest=True, tolerance=1e-4, workers=1)
        value = float(found["greatest_thermal.ambient_temperature"].values[0])
        # each within its own tolerance of the crossing: 1e-4 of its range (24.9 K) and of the bracket (1.5 K)
        assert refined[i] == pytest.approx(value, abs=1e-4 * 24.9 + 1e-4 * 1.5), option["name"]
        # the grid bracket and its interpolation hold the crossing
        assert review["highest_passing"].values[i] <= value + 1e-9


def test_the_recommendation_equals_a_brute_force_choice_over_the_grid(tmp_path):
    table = {"thermal.ambient_temperature": ["14 degC", "18 degC", "22 degC"],
             "profile.segment[1].value": ["3 A", "3.5 A", "4 A"]}
    loaded = thermoelec.load_scenario(write(tmp_path, table))
    text = "temperature_margin_K >= 10 at thermal.ambient_temperature = 18 degC"
    plan = sweep.plan_sweep(loaded)
    rows = sweep.run_sweep(loaded, plan, tmp_path / "out", workers=1, progress=False)
    ds = sweep.sweep_dataset(loaded, plan, rows)
    review = design_review(loaded, plan, ds, parse_requirement(text), rank_by="mass")
    # brute force: at 18 degC every current must pass with a margin of 10 K; the lightest such option
    meeting = []
    for i, option in enumerate(GROUP):
        cell = ds.isel({"cooling": i}).sel({"thermal.ambient_temperature": 18.0})
        if (cell["verdict"].values == PASS).all() and (cell["temperature_margin_K"].values >= 10).all():
            meeting.append((float(ds["cooling.mass"].values[i]), option["name"]))
    assert meeting and review.attrs["recommended"] == min(meeting)[1]
    assert list(review["meets_requirement"].values) == [o["name"] in {m[1] for m in meeting} for o in GROUP]
    assert review.attrs["recommended"] in review.attrs["statement"]


def test_the_command_writes_the_review_and_its_report(tmp_path, capsys):
    path = write(tmp_path, {"thermal.ambient_temperature": ["14 degC", "20 degC", "26 degC"]})
    out = tmp_path / "o"
    assert cli.main(["sweep", str(path), "--out", str(out), "--workers", "1", "--require",
                     "temperature_margin_K >= 1 at thermal.ambient_temperature = 20 degC"]) == 0
    printed = capsys.readouterr().out
    assert "recommended:" in printed
    for name in ("review.nc", "review.csv", "design_report.html", "pareto.png", "option_maps.png",
                 "sweep_cell_temperature_max_degC.png"):
        assert (out / name).exists(), name
    report = (out / "design_report.html").read_text()
    assert "Cautions" in report and "recommended" in report and "data:image/png;base64" in report
    assert cli.main(["compare", str(path), "--out", str(tmp_path / "c"), "--options", "cooling", "--quiet",
                     "--no-figures"]) == 0
    assert (tmp_path / "c" / "cases" / "big-fin" / "summary.json").exists()


@pytest.mark.parametrize("options, table, extra, key", [
    ([{"name": "x", "thermal.no_such_key": 1}], {"thermal.ambient_temperature": ["20 degC"]}, [],
     "thermal.no_such_key"),
    ([{"name": "x"}, {"name": "x"}], {"thermal.ambient_temperature": ["20 degC"]}, [], "two options"),
    ([{"name": "x", "attributes": {"cost": "cheap"}}], {"thermal.ambient_temperature": ["20 degC"]}, [],
     "attributes.cost"),
    (GROUP, {"thermal.ambient_temperature": ["20 degC"]}, ["--require", "hotness_K >= 1 at "
                                                           "thermal.ambient_temperature = 20 degC"], "hotness_K"),
    (GROUP, {"zip": {"pair": {"thermal.ambient_temperature": ["10 degC", "20 degC"],
                              "profile.segment[1].value": ["3 A"]}}}, [], "sweep.zip.pair"),
])
def test_bad_options_and_requirements_exit_2_with_one_message(tmp_path, capsys, options, table, extra, key):
    path = write(tmp_path, table, options=options)
    code = cli.main(["sweep", str(path), "--out", str(tmp_path / "o"), "--quiet", "--workers", "1", *extra])
    err = capsys.readouterr().err
    assert code == 2 and key in err and "Traceback" not in err and err.count("\n") == 1
