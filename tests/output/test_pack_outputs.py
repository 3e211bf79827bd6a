"""A resolved pack's figures, report and tables, checked on their data.

Sources: the pack map's colours are the cells' peak temperatures of the result
(recomputed with numpy), its hottest cell the summary's, its coolant path the
serpentine of the layout (row 1 left to right, row 2 back); the dashboard's band
spans the coldest to the hottest cell series; the report and the tables show the
summary's values.
"""

from __future__ import annotations

import numpy as np
import pytest

import thermoelec
from thermoelec.analysis import compare
from thermoelec.output import figures, pack_figures, report, tables

from ..analysis.test_cells import _pack
from ..helpers import cell_section, scenario, simulate


@pytest.fixture(scope="module")
def result():
    return simulate(_pack())


def test_the_pack_map_shows_each_cells_peak_where_it_sits(result):
    data = pack_figures.pack_map_data(result)
    np.testing.assert_allclose(data.peak, result.cells["cells_temperature_degC"].max(axis=0))
    assert data.hottest == result.summary["hottest_cell"]
    assert data.x.tolist() == [1, 1, 2, 2, 3, 3] and data.y.tolist() == [-1, -2, -1, -2, -1, -2]
    assert data.path.tolist() == [1, 3, 5, 6, 4, 2]
    fig = pack_figures.pack_map(result)
    dots = fig.axes[0].collections[0]
    np.testing.assert_allclose(dots.get_array(), data.peak)
    ring = fig.axes[0].collections[1].get_offsets()[0]
    assert tuple(ring) == (data.x[data.hottest - 1], data.y[data.hottest - 1])


def test_the_dashboard_draws_the_cells_as_a_band(result):
    fig = figures.dashboard(result)
    temperature = fig.axes[4]
    labels = [t.get_text() for t in temperature.get_legend().get_texts()]
    assert {"cells: min..max", "cells: mean", "hottest cell"} <= set(labels)
    band = next(c for c in temperature.collections if c.get_label() == "cells: min..max")
    vertices = band.get_paths()[0].vertices[:, 1]
    s = result.series
    assert vertices.min() == pytest.approx(s["cell_temperature_min_degC"].min())
    assert vertices.max() == pytest.approx(s["cell_temperature_degC"].max())


def test_a_resolved_run_writes_its_map_and_reports_its_cells(result, tmp_path):
    written = {p.name for p in figures.write_figures(result, tmp_path, formats=("png",))}
    assert f"{figures.PACK_MAP}.png" in written
    html = report.run_report(result)
    assert "Cells of the pack" in html and f"<td class='num'>{result.summary['hottest_cell']}</td>" in html
    lumped = simulate(scenario(cell=cell_section(), pack={"series": 2, "parallel": 2}))
    assert "Cells of the pack" not in report.run_report(lumped)
    assert f"{figures.PACK_MAP}.png" not in {p.name for p in figures.write_figures(lumped, tmp_path / "l",
                                                                                 formats=("png",))}


def test_the_terminal_summary_and_the_comparison_carry_the_pack_rows(result):
    import io

    out = io.StringIO()
    tables.print_summary(result.summary, out)
    text = out.getvalue()
    assert "hottest cell" in text and "SoC spread at the end" in text
    base = thermoelec.scenario_from_dict(_pack())
    outcomes = compare.run_cases(base, [("built", {}), ("lumped", {"pack": {"series": 3, "parallel": 2}})])
    rows = compare.comparison_rows(outcomes)
    assert rows[-len(compare.PACK_COMPARISON_ROWS):] == compare.PACK_COMPARISON_ROWS
    table = compare.comparison_table(outcomes).set_index("key")
    assert table.loc["hottest_cell", "built"] == outcomes[0].result.summary["hottest_cell"]
    assert table.loc["hottest_cell", "lumped"] is None
    assert len(tables.format_comparison(outcomes).splitlines()) == 1 + len(rows)
    assert "hottest cell" in report.comparison_report(outcomes)
