"""Figures of a sweep and of a design search, checked on what they draw.

The datasets are built from hand-made rows by the analysis layer's own
constructors (:func:`thermoelec.analysis.sweep.sweep_dataset`), so the figures
are checked against known values, not against another run of the engine.
"""

from __future__ import annotations

import os

import numpy as np
import pytest
import xarray as xr
from matplotlib.collections import PathCollection
from matplotlib.figure import Figure

import thermoelec
from thermoelec.analysis import sweep
from thermoelec.output import sweep_figures

from ..helpers import scenario

SINK = ["0.1 W/K", "1 W/K", "3 W/K"]
CURRENT = ["2 A", "4 A"]


def _rows(plan, stopped_at=(0, 1), failed_at=(2, 0)):
    """Peak temperature 20 + 10 * (row + 2 column) degC; one scenario stopped on its temperature limit
    (a fail), one that failed to solve with a metric far off the others (-10 degC)."""
    rows = []
    for i in range(plan.size):
        index = np.unravel_index(i, plan.shape)
        row_index, column = index[0], index[1]
        stopped, failed = (row_index, column) == stopped_at, (row_index, column) == failed_at
        rows.append({**{key: 1.0 for key in sweep.METRICS}, "completed": not stopped and not failed,
                     "cell_temperature_max_degC": -10.0 if failed else 20.0 + 10.0 * (row_index + 2 * column),
                     "temperature_margin_K": -1.0 if stopped else 5.0, "status": "failed" if failed else "ok",
                     "message": "solver gave up" if failed else "", "verdict": "fail" if stopped or failed else "pass",
                     "failed_checks": "temperature_max,completed" if stopped else "",
                     "stop_reason": "temperature_max" if stopped else "end_of_profile", "engine": "batch"})
    return rows


@pytest.fixture(scope="module")
def grid():
    loaded = thermoelec.scenario_from_dict(scenario(sweep={"thermal.sink_to_ambient": SINK,
                                                           "profile.segment[1].value": CURRENT}))
    plan = sweep.plan_sweep(loaded)
    return plan, sweep.sweep_dataset(loaded, plan, _rows(plan))


def test_failed_scenarios_are_nan_with_their_status_and_message(grid):
    _, ds = grid
    assert np.isnan(ds["cell_temperature_max_degC"].values[2, 0])
    assert ds["status"].values[2, 0] == "failed" and ds["message"].values[2, 0] == "solver gave up"
    assert ds["verdict"].values[2, 0] == "" and ds["verdict"].values[0, 1] == "fail"
    assert int(sweep.passes(ds).sum()) == 4


def test_sweep_table_has_one_row_per_scenario(grid, tmp_path):
    _, ds = grid
    table = sweep.sweep_table(ds)
    assert len(table) == 6
    assert {"thermal.sink_to_ambient [W/K]", "profile.segment[1].value [A]", "verdict", "status",
            "cell_temperature_max_degC"} <= set(table.columns)
    row = table[(table["thermal.sink_to_ambient [W/K]"] == 0.1) & (table["profile.segment[1].value [A]"] == 4.0)]
    assert row["verdict"].item() == "fail" and row["cell_temperature_max_degC"].item() == 40.0
    written = sweep.write_sweep(ds, tmp_path)
    assert [p.name for p in written] == ["sweep.nc", "sweep.csv"]


def test_heat_map_masks_failures_marks_stops_and_labels_its_axes(grid):
    _, ds = grid
    data = sweep_figures.map_data(ds, "cell_temperature_max_degC")
    (values,) = data.values
    assert values.mask[2, 0] and not values.mask[0, 1]  # the failure masked, the stopped one shown
    assert data.limits == (20.0, 60.0)  # the failure's -10 degC does not stretch the colour scale
    assert data.x_label == "segment 1 value [A]" and data.y_label == "sink to ambient [W/K]"
    fig = sweep_figures.sweep_map(ds, "cell_temperature_max_degC")
    ax = fig.axes[0]
    marks = [c for c in ax.collections if isinstance(c, PathCollection)]
    assert len(marks) == 1 and len(marks[0].get_offsets()) == 1
    np.testing.assert_allclose(marks[0].get_offsets()[0], [4.0, 0.1])  # x: the current [A], y: the sink [W/K]
    mesh = ax.collections[0]
    expected = np.ma.masked_invalid(20.0 + 10.0 * (np.arange(3)[:, None] + 2 * np.arange(2)[None, :]))
    np.testing.assert_allclose(np.ma.getdata(mesh.get_array()).reshape(3, 2)[values.mask == 0],
                               expected[values.mask == 0])
    hatched = [c for c in ax.collections if c.get_hatch()]
    assert len(hatched) == 1 and len(hatched[0].get_paths()) == 1  # the one failure
    assert ax.get_xlabel() == data.x_label and ax.get_ylabel() == data.y_label


def test_the_boundary_runs_along_cell_edges():
    # centres 0, 1, 2 (edges -0.5, 0.5, 1.5, 2.5) by 0, 10 (edges -5, 5, 15); the first column fails
    good = np.array([[False, True, True], [False, True, True]])
    segments = sweep_figures.boundary_segments(np.array([0.0, 1.0, 2.0]), np.array([0.0, 10.0]), good)
    assert sorted(segments) == [((0.5, -5.0), (0.5, 5.0)), ((0.5, 5.0), (0.5, 15.0))]
    # nothing through a cell's centre, and a uniform map has no boundary
    assert all(seg[0][0] not in (0.0, 1.0, 2.0) for seg in segments)
    assert sweep_figures.boundary_segments(np.array([0.0, 1.0]), np.array([0.0, 1.0]), np.ones((2, 2), bool)) == []


def test_facets_are_bounded_and_spread_evenly():
    chosen = sweep_figures.facet_indices(100)
    assert len(chosen) == sweep_figures.MAX_FACETS and chosen[0] == 0 and chosen[-1] == 99
    assert max(np.diff(chosen)) - min(np.diff(chosen)) <= 1
    assert sweep_figures.facet_indices(5) == [0, 1, 2, 3, 4]


def test_a_big_third_axis_draws_at_most_a_dozen_facets():
    loaded = thermoelec.scenario_from_dict(scenario(sweep={
        "thermal.sink_to_ambient": SINK, "profile.segment[1].value": CURRENT,
        "thermal.ambient_temperature": {"start": "0 degC", "stop": "39 degC", "num": 40}}))
    plan = sweep.plan_sweep(loaded)
    ds = sweep.sweep_dataset(loaded, plan, _rows(plan))
    data = sweep_figures.map_data(ds, "cell_temperature_max_degC")
    assert len(data.facets) == sweep_figures.MAX_FACETS and ds.sizes["thermal.ambient_temperature"] == 40
    assert data.facet_titles[0] == "ambient temperature = 0 degC"
    fig = sweep_figures.sweep_map(ds, "cell_temperature_max_degC")
    assert sum(1 for ax in fig.axes if ax.get_title()) == sweep_figures.MAX_FACETS  # one title per facet drawn


def test_only_the_outer_facets_carry_ticks():
    # small multiples on shared axes: ticks along the bottom of each column and the left of each row
    # (common practice); ten facets on four columns leave the bottom of columns 3 and 4 on the second row
    loaded = thermoelec.scenario_from_dict(scenario(sweep={
        "thermal.sink_to_ambient": SINK, "profile.segment[1].value": CURRENT,
        "thermal.ambient_temperature": {"start": "0 degC", "stop": "36 degC", "num": 10}}))
    plan = sweep.plan_sweep(loaded)
    fig = sweep_figures.sweep_map(sweep.sweep_dataset(loaded, plan, _rows(plan)), "cell_temperature_max_degC")
    facets = [ax for ax in fig.axes if ax.get_title()]
    assert len(facets) == 10
    assert [k for k, ax in enumerate(facets) if ax.xaxis.get_visible()] == [6, 7, 8, 9]
    assert [k for k, ax in enumerate(facets) if ax.yaxis.get_visible()] == [0, 4, 8]
    assert all(ax.get_xlabel() for ax in facets[6:]) and all(ax.get_ylabel() for ax in facets[::4])
    fig.canvas.draw()  # the visible ones show their tick labels, shared axes notwithstanding
    assert all(any(t.get_visible() and t.get_text() for t in ax.get_xticklabels()) for ax in facets[6:])


def test_a_zipped_group_has_a_tick_at_each_case():
    loaded = thermoelec.scenario_from_dict(scenario(sweep={
        "thermal.sink_to_ambient": SINK, "zip": {"route": {"profile.scale": [0.85, 1.0, 1.15]}}}))
    plan = sweep.plan_sweep(loaded)
    ds = sweep.sweep_dataset(loaded, plan, _rows(plan, stopped_at=(0, 0), failed_at=(1, 1)))
    fig = sweep_figures.sweep_map(ds, "cell_temperature_max_degC")
    ax = fig.axes[0]
    cases = ax.get_xticks() if ds["cell_temperature_max_degC"].dims[1] == "route" else ax.get_yticks()
    np.testing.assert_array_equal(cases, [0, 1, 2])


def test_axis_labels_name_the_key_and_its_unit():
    assert sweep_figures.axis_label("thermal.convection.coefficient", "W/m^2/K") == \
        "convection coefficient [W/m^2/K]"
    assert sweep_figures.axis_label("profile.segment[3].value", "W") == "segment 3 value [W]"
    assert sweep_figures.axis_label("case") == "case"


def test_write_sweep_figures_writes_each_map(grid, tmp_path):
    _, ds = grid
    written = sweep_figures.write_sweep_figures(ds, tmp_path)
    assert sorted(p.name for p in written) == sorted(f"sweep_{m}.{e}" for m in sweep_figures.SWEEP_MAP_METRICS
                                                     for e in ("png", "svg"))
    assert all(p.stat().st_size > 1000 for p in written)


def test_maps_drawn_in_a_forked_child_are_the_files_drawn_in_turn(grid, tmp_path):
    """The PNGs (deterministic, unlike the SVGs' random ids) byte for byte, whichever process drew them."""
    _, ds = grid
    (tmp_path / "in_turn").mkdir()
    (tmp_path / "forked").mkdir()
    in_turn = sweep_figures.write_sweep_figures(ds, tmp_path / "in_turn", formats=("png",))
    forked = sweep_figures.write_sweep_figures(ds, tmp_path / "forked", formats=("png",), parallel=True)
    assert [p.name for p in forked] == [p.name for p in in_turn]
    assert all(a.read_bytes() == b.read_bytes() for a, b in zip(in_turn, forked, strict=True))


def test_a_child_that_fails_leaves_its_map_to_the_parent(grid, tmp_path, monkeypatch):
    _, ds = grid
    monkeypatch.setattr(sweep_figures, "_child_map", lambda *args: os._exit(1))  # the child inherits the patch
    written = sweep_figures.write_sweep_figures(ds, tmp_path, formats=("png",), parallel=True)
    assert [p.name for p in written] == [f"sweep_{m}.png" for m in sweep_figures.SWEEP_MAP_METRICS]
    assert all(p.stat().st_size > 1000 for p in written)


def _search():
    return xr.Dataset({"least_thermal.sink_to_ambient": (("a", "b"), np.array([[0.5, 0.7], [0.1, np.nan]]),
                                                          {"units": "W/K"}),
                       "status": (("a", "b"), np.array([["ok", "ok"], ["at_bound", "not_met"]], dtype=object))},
                      coords={"a": ("a", [20.0, 30.0], {"units": "degC"}), "b": ("b", [2.0, 4.0])},
                      attrs={"criterion": "cell_temperature_max_degC <= 45", "search_range": "0.1..10 W/K"})


def test_search_points_tell_met_at_the_bound_and_not_met_apart():
    first, second = sweep_figures.search_points(_search())
    np.testing.assert_allclose(first.found, [0.5, 0.1 * np.nan], equal_nan=True)
    np.testing.assert_allclose(first.at_bound, [np.nan, 0.1], equal_nan=True)
    assert not first.not_met.any()
    np.testing.assert_allclose(second.found, [0.7, np.nan], equal_nan=True)
    assert list(second.not_met) == [False, True]


def test_search_chart_draws_lines_and_marks_the_bounds(tmp_path):
    fig = sweep_figures.search_chart(_search())
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "met at the lower bound (the answer lies at or below it)" in labels
    assert "not met in range (drawn at the other bound)" in labels
    assert len(labels) == len(set(labels))  # each legend entry once
    cross = next(line for line in ax.lines if line.get_marker() == "x")
    np.testing.assert_allclose(cross.get_xydata(), [[30.0, 10.0]])  # at the range's upper end
    assert ax.get_ylabel() == "sink to ambient [W/K]"
    assert [p.name for p in sweep_figures.write_search_figure(_search(), tmp_path)] == ["search.png", "search.svg"]
