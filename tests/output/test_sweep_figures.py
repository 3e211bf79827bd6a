"""Figures of a sweep and of a design search, checked on what they draw.

The datasets are built from hand-made rows by the analysis layer's own
constructors (:func:`thermoelec.analysis.sweep.sweep_dataset`), so the figures
are checked against known values, not against another run of the engine.
"""

from __future__ import annotations

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


@pytest.fixture(scope="module")
def grid():
    """A 3 x 2 sweep whose peak temperature is 20 + 10 * (row + 2 column) degC; the scenario at
    (0.1 W/K, 4 A) stopped on its temperature limit."""
    loaded = thermoelec.scenario_from_dict(scenario(sweep={"thermal.sink_to_ambient": SINK,
                                                           "profile.segment[1].value": CURRENT}))
    plan = sweep.plan_sweep(loaded)
    rows = []
    for i in range(plan.size):
        row_index, column = np.unravel_index(i, plan.shape)
        stopped = (row_index, column) == (0, 1)
        rows.append({**{key: 1.0 for key in sweep.METRICS}, "completed": not stopped,
                     "cell_temperature_max_degC": 20.0 + 10.0 * (row_index + 2 * column),
                     "temperature_margin_K": -1.0 if stopped else 5.0, "status": "ok", "message": "",
                     "stop_reason": "temperature_max" if stopped else "end_of_profile", "engine": "batch"})
    return plan, sweep.sweep_dataset(loaded, plan, rows)


def test_heat_map_marks_the_stopped_scenarios_and_draws_the_boundary(grid):
    _, ds = grid
    fig = sweep_figures.sweep_map(ds, "cell_temperature_max_degC")
    ax = fig.axes[0]
    marks = [c for c in ax.collections if isinstance(c, PathCollection)]
    assert len(marks) == 1 and len(marks[0].get_offsets()) == 1
    np.testing.assert_allclose(marks[0].get_offsets()[0], [4.0, 0.1])  # x: the current [A], y: the sink [W/K]
    # the mesh holds the metric as the dataset has it (rows: first swept key)
    mesh = ax.collections[0]
    expected = 20.0 + 10.0 * (np.arange(3)[:, None] + 2 * np.arange(2)[None, :])
    np.testing.assert_allclose(np.asarray(mesh.get_array()).reshape(3, 2), expected)
    dims = ds["cell_temperature_max_degC"].dims
    assert ax.get_xlabel().startswith(dims[1]) and ax.get_ylabel().startswith(dims[0])
    assert len(ax.collections) == 3  # mesh, pass / fail contour, stop marks


def test_write_sweep_figures_writes_each_map(grid, tmp_path):
    _, ds = grid
    written = sweep_figures.write_sweep_figures(ds, tmp_path)
    assert sorted(p.name for p in written) == sorted(f"sweep_{m}.{e}" for m in sweep_figures.SWEEP_MAP_METRICS
                                                     for e in ("png", "svg"))
    assert all(p.stat().st_size > 1000 for p in written)


def test_search_chart_draws_one_line_per_value_of_the_second_key(tmp_path):
    found = xr.Dataset({"least_thermal.sink_to_ambient": (("a", "b"), np.array([[0.5, 0.7], [1.5, 2.0]]),
                                                          {"units": "W/K"})},
                       coords={"a": ("a", [20.0, 30.0], {"units": "degC"}), "b": ("b", [2.0, 4.0])},
                       attrs={"criterion": "cell_temperature_max_degC <= 45"})
    fig = sweep_figures.search_chart(found)
    assert isinstance(fig, Figure)
    lines = fig.axes[0].lines
    assert len(lines) == 2
    np.testing.assert_allclose(lines[0].get_xdata(), [20.0, 30.0])
    np.testing.assert_allclose(lines[1].get_ydata(), [0.7, 2.0])
    assert fig.axes[0].get_ylabel() == "least_thermal.sink_to_ambient [W/K]"
    assert [p.name for p in sweep_figures.write_search_figure(found, tmp_path)] == ["search.png", "search.svg"]
