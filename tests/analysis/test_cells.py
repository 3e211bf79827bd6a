"""A resolved pack's results: its per-cell series and coordinates, its summary keys, sweeps over its builds.

Sources: each summary key against the per-cell series it condenses, recomputed
here with numpy (the hottest cell as the argmax of the cells' peaks, the spread as
the largest row-wise max - min, the SoC spread of the last row); the pack's SoC as
the capacity-weighted mean of its cells (charge conservation); a sweep over the
spread's seed, batched, against the same scenarios solved solo (the engine's
CVODE path at the sweep's tolerance, as ``tests/analysis/test_sweep.py`` does).
"""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import thermoelec
from thermoelec.analysis.cells import CELL_SERIES_UNITS, PACK_SERIES_UNITS
from thermoelec.analysis.metrics import METRICS, PACK_METRICS
from thermoelec.analysis.sweep import plan_sweep, run_sweep, sweep_dataset

from ..helpers import cell_section, scenario, simulate

CELL = cell_section(capacity="2.5 Ah", initial_soc=0.8, voltage_min="3.0 V",
                    ocv={"soc": [0.0, 0.5, 1.0], "voltage": [3.1, 3.65, 4.15]}, r0={"value": "25 mohm"},
                    rc=[{"resistance": "10 mohm", "time_constant": "30 s"}])
THERMAL = {"ambient_temperature": "25 degC", "sink_heat_capacity": "150 J/K", "cell_to_sink": "0.6 W/K",
           "sink_to_ambient": "0.5 W/K",
           "coolant": {"inlet_temperature": "24 degC", "flow_rate": "0.002 kg/s", "plate_conductance": "1.2 W/K"}}
PACK = {"series": 3, "parallel": 2, "model": "resolved", "layout": {"rows": 2, "columns": 3, "fill": "columns"},
        "spread": {"capacity": 0.03, "r0": 0.08, "rc": 0.05, "seed": 2},
        "thermal": {"neighbour_conductance": "0.1 W/K", "coolant_order": "rows", "wall_to_ambient": "0.01 W/K"}}


def _pack(**changes) -> dict:
    segments = [{"mode": "power", "value": "90 W", "duration": "15 min"}, {"mode": "rest", "duration": "5 min"}]
    return scenario(cell=CELL, thermal=THERMAL, segments=segments, pack={**PACK, **changes},
                    solver={"rtol": 1e-8, "output_interval": "10 s"})


@pytest.fixture(scope="module")
def result():
    return simulate(_pack())


def test_the_summary_keys_condense_the_per_cell_series(result):
    s, cells = result.summary, result.cells
    peaks = cells["cells_temperature_degC"].max(axis=0)
    assert s["hottest_cell"] == int(np.argmax(peaks)) + 1
    assert s["cell_temperature_max_degC"] == pytest.approx(peaks.max(), abs=1e-12)
    assert s["hottest_cell_group"] == (s["hottest_cell"] - 1) // 2 + 1
    spread = np.ptp(cells["cells_temperature_degC"], axis=1)
    assert s["cell_temperature_spread_max_K"] == pytest.approx(spread.max(), abs=1e-12)
    assert s["cell_temperature_spread_time_s"] == result.series["time_s"][np.argmax(spread)]
    assert s["soc_spread_end"] == pytest.approx(np.ptp(cells["cells_soc"][-1]), abs=1e-12)
    assert s["cell_temperature_mean_max_degC"] < s["cell_temperature_max_degC"]
    assert s["current_share_max"] > 1.0 and s["first_limit_cell"] is None
    assert result.series["cell_temperature_degC"] == pytest.approx(cells["cells_temperature_degC"].max(axis=1))


def test_the_pack_soc_is_the_capacity_weighted_mean_of_its_cells(result):
    factors = thermoelec.scenario_from_dict(_pack()).problem().resolved.capacity_factor
    weighted = (result.cells["cells_soc"] * factors).sum(axis=1) / factors.sum()
    np.testing.assert_allclose(result.series["soc"], weighted, rtol=1e-13)
    # the charge the pack delivered is what its cells lost (2.5 Ah each, times their factors)
    lost_ah = 2.5 * float(np.sum(factors * (result.cells["cells_soc"][0] - result.cells["cells_soc"][-1])))
    delivered_ah = float(np.trapezoid(result.series["current_A"], result.series["time_s"])) / 3600.0
    assert lost_ah / 3 == pytest.approx(delivered_ah, rel=1e-3)  # three groups in series carry the pack current


def test_the_dataset_has_a_cell_dimension_with_its_coordinates(result, tmp_path):
    result.write(tmp_path)
    ds = xr.open_dataset(tmp_path / "timeseries.nc")
    assert ds.sizes["cell"] == 6
    for name in CELL_SERIES_UNITS:
        assert ds[name].dims == ("time", "cell") and ds[name].attrs["units"] == CELL_SERIES_UNITS[name][0]
    assert ds["group"].values.tolist() == [1, 1, 2, 2, 3, 3]
    assert ds["member"].values.tolist() == [1, 2, 1, 2, 1, 2]
    assert ds["row"].values.tolist() == [1, 2, 1, 2, 1, 2] and ds["column"].values.tolist() == [1, 1, 2, 2, 3, 3]
    assert ds["coolant_station"].values.tolist() == [1, 6, 2, 5, 3, 4]  # along row 1, back along row 2
    for name in PACK_SERIES_UNITS:
        assert ds[name].dims == ("time",)
    np.testing.assert_allclose(ds["cells_temperature_degC"].values, result.cells["cells_temperature_degC"])
    csv_header = (tmp_path / "timeseries.csv").read_text().splitlines()[0]
    assert "cells_temperature_degC" not in csv_header and "cell_temperature_min_degC" in csv_header


def test_a_lumped_summary_has_no_pack_keys():
    lumped = simulate(scenario(cell=CELL, pack={"series": 3, "parallel": 2}))
    assert lumped.cells is None and "pack_model" not in lumped.summary
    assert not set(PACK_METRICS) & set(lumped.summary) - {"current_share_max"}


def test_a_sweep_over_the_seed_is_a_monte_carlo_of_builds(tmp_path):
    base = thermoelec.scenario_from_dict(_pack())
    plan = plan_sweep(base, ["pack.spread.seed=1,2,3,4"])
    rows = run_sweep(base, plan, tmp_path / "batch", workers=1, progress=False)
    solo = run_sweep(base, plan, tmp_path / "solo", workers=1, progress=False, engine="solo")
    assert {r["engine"] for r in rows} == {"batch"}
    ds = sweep_dataset(base, plan, rows)
    for key in METRICS + PACK_METRICS:
        assert key in ds
    hottest = ds["cell_temperature_max_degC"].values
    assert np.ptp(hottest) > 1e-3  # the builds differ
    for batch_row, solo_row in zip(rows, solo, strict=True):
        assert batch_row["cell_temperature_max_degC"] == pytest.approx(solo_row["cell_temperature_max_degC"],
                                                                       abs=1e-3)
        assert batch_row["soc_spread_end"] == pytest.approx(solo_row["soc_spread_end"], abs=1e-5)
        assert batch_row["hottest_cell"] == solo_row["hottest_cell"]
    lumped = thermoelec.scenario_from_dict(scenario(cell=CELL, pack={"series": 3, "parallel": 2}))
    lumped_plan = plan_sweep(lumped, ["thermal.cell_to_sink=0.5 W/K,1 W/K"])
    plain = sweep_dataset(lumped, lumped_plan, run_sweep(lumped, lumped_plan, tmp_path / "lumped", workers=1,
                                                         progress=False))
    assert not set(PACK_METRICS) & set(plain.data_vars)


def test_the_biot_check_takes_the_best_cooled_cells_paths():
    # a cylinder of 21 x 70 mm (V/A = 4.56522 mm, VALIDATION.md §1), k = 0.5 W/m/K; cell 1 of the 3 x 2 grid
    # has the strongest paths: its sink share (0.6/6 W/K), a heavy plate (2 W/K), the wall's 0.01 W/K and its
    # two neighbours' 0.1 W/K each
    data = _pack(cell=[{"cell": 1, "plate_conductance": "2 W/K"}])
    data["cell"] = data["cell"] | {"diameter": "21 mm", "length": "70 mm", "thermal_conductivity": "0.5 W/m/K"}
    summary = simulate(data).summary
    area = np.pi * 0.021 * 0.070 + np.pi * 0.021**2 / 2  # Incropera §5.1: ends included
    h = (0.6 / 6 + 2.0 + 0.01 + 2 * 0.1) / area
    assert summary["biot_number"] == pytest.approx(h * 4.56522e-3 / 0.5, rel=1e-5)
