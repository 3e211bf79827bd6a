"""The plain writers of thermoelec.analysis.tablefiles against the libraries whose files they stand in for.

Sources: pandas' ``DataFrame.to_csv(index=False, float_format="%.9g")``, byte for
byte, on values across the whole float range (NaN, infinities, signed zero,
subnormals); xarray's ``Dataset.to_netcdf`` (netCDF4 back end) on the datasets of a
lumped run and of a resolved pack (dimensions ``time x cell``, integer and float
coordinates, the CF ``coordinates`` attribute) and on text variables: each file read
back with ``xarray.open_dataset`` is identical to the other, and netCDF4 finds the
same dimensions, variables in the same order, types, attributes in the same order,
storage and filters.
"""

from __future__ import annotations

import netCDF4
import numpy as np
import pandas as pd
import pytest
import xarray as xr

from thermoelec.analysis.tablefiles import write_csv, write_netcdf

from ..helpers import cell_section, scenario, simulate


def test_the_csv_is_the_one_pandas_writes(tmp_path):
    rng = np.random.default_rng(7)
    n = 5000
    special = [np.nan, np.inf, -np.inf, -0.0, 0.0, 5e-324, 1.7976931348623157e308, 123456789.0, 1234567891.0, 0.1]
    columns = {
        "time_s": np.arange(n, dtype=float) * 0.1,
        "wide": rng.normal(size=n) * 10.0 ** rng.integers(-300, 300, n),
        "special": np.r_[special, rng.normal(size=n - len(special))],
        "gaps": np.where(rng.random(n) < 0.1, np.nan, rng.normal(size=n)),
    }
    pd.DataFrame(columns).to_csv(tmp_path / "pandas.csv", index=False, float_format="%.9g")
    write_csv(tmp_path / "plain.csv", columns)
    assert (tmp_path / "plain.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()


def test_a_column_that_is_not_float_goes_to_pandas(tmp_path):
    columns = {"n": np.arange(4), "name, quoted": np.array([0.5, 1.5, np.nan, 2.0])}
    pd.DataFrame(columns).to_csv(tmp_path / "pandas.csv", index=False, float_format="%.9g")
    write_csv(tmp_path / "plain.csv", columns)
    assert (tmp_path / "plain.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()


def _structure(path) -> dict:
    """What netCDF4 sees of a file: dimensions, variables in order with type, storage and attributes."""
    with netCDF4.Dataset(path) as ds:
        def attrs(obj) -> list:
            return [(k, repr(obj.getncattr(k))) for k in obj.ncattrs()]

        return {"format": ds.data_model, "attrs": attrs(ds),
                "dims": [(k, len(d), d.isunlimited()) for k, d in ds.dimensions.items()],
                "variables": [(name, str(v.dtype), v.dimensions, v.chunking(), v.filters(), v.endian(), attrs(v))
                              for name, v in ds.variables.items()]}


def _same_files(ours, theirs) -> None:
    with xr.open_dataset(ours) as a, xr.open_dataset(theirs) as b:
        xr.testing.assert_identical(a, b)
        for name in a.variables:
            assert a[name].encoding.get("dtype") == b[name].encoding.get("dtype"), name
    assert _structure(ours) == _structure(theirs)


def test_a_runs_netcdf_is_the_one_xarray_writes(tmp_path):
    result = simulate(scenario(segments=[{"mode": "power", "value": "40 W", "duration": "30 s"},
                                         {"mode": "rest", "duration": "10 s"}]))
    result.write(tmp_path)
    result.to_dataset().to_netcdf(tmp_path / "xarray.nc")
    _same_files(tmp_path / "timeseries.nc", tmp_path / "xarray.nc")
    frame = pd.read_csv(tmp_path / "timeseries.csv")
    assert list(frame.columns) == list(result.to_dataframe().columns)
    assert (tmp_path / "timeseries.csv").read_bytes() == result.to_dataframe().to_csv(
        index=False, float_format="%.9g").encode()


def test_a_resolved_packs_netcdf_is_the_one_xarray_writes(tmp_path):
    cell = cell_section(capacity="2.5 Ah", initial_soc=0.8, voltage_min="3.0 V", r0={"value": "25 mohm"})
    pack = {"series": 2, "parallel": 2, "model": "resolved", "layout": {"rows": 2, "columns": 2},
            "spread": {"capacity": 0.03, "seed": 1}, "thermal": {"neighbour_conductance": "0.1 W/K"}}
    result = simulate(scenario(cell=cell, pack=pack, segments=[{"mode": "power", "value": "30 W",
                                                                 "duration": "60 s"}]))
    assert result.cells is not None
    result.write(tmp_path)
    result.to_dataset().to_netcdf(tmp_path / "xarray.nc")
    _same_files(tmp_path / "timeseries.nc", tmp_path / "xarray.nc")
    with netCDF4.Dataset(tmp_path / "timeseries.nc") as ds:  # the CF link of per-cell series to the cell coordinates
        assert "group" in ds.variables["cells_temperature_degC"].getncattr("coordinates").split()


def test_text_variables_and_attributes_are_written_as_xarray_writes_them(tmp_path):
    dims = ("case",)
    data = {"metric": (dims, np.array([1.0, np.nan, 3.0]), {"units": "K"}),
            "status": (dims, np.array(["ok", "failed", ""], dtype=object), {}),
            "verdict": (dims, np.array(["pass", "", "fail"], dtype=object), {"description": "pass or fail"})}
    coords = {"case": (dims, np.array([10.0, 20.0, 30.0]), {"units": "degC"}),
              "label": (dims, np.array(["a", "b", "c"], dtype=object), {})}
    attrs = {"scenarios": 3, "failed": 1, "name": "héat", "rtol": 1e-6}
    write_netcdf(tmp_path / "ours.nc", data, coords, attrs)
    xr.Dataset(data, coords=coords, attrs=attrs).to_netcdf(tmp_path / "xarray.nc")
    _same_files(tmp_path / "ours.nc", tmp_path / "xarray.nc")


def test_a_variable_that_does_not_fit_its_dimensions_is_refused(tmp_path):
    with pytest.raises(ValueError, match="dimension 'time'"):
        write_netcdf(tmp_path / "bad.nc", {"a": ("time", np.zeros(3), {}), "b": ("time", np.zeros(4), {})}, {}, {})


def _sweep_rows(plan) -> list[dict]:
    """Hand-made rows: metrics varying by scenario, one failure (NaN metrics) with a message CSV must quote."""
    from thermoelec.analysis.metrics import METRICS

    rows = []
    for i in range(plan.size):
        failed = i == 1
        rows.append({**{key: 0.5 + i + k / 7 for k, key in enumerate(METRICS)}, "status": "failed" if failed else "ok",
                     "message": 'CVODE: "too much work", at t = 3 s\nstopped' if failed else "",
                     "verdict": "" if failed else ("pass" if i % 2 else "fail"), "failed_checks": "" if i % 2 else
                     "temperature_max,completed", "stop_reason": "end_of_profile", "engine": "batch"})
    return rows


def _mixed_plan(tmp_path):
    """Options (text coordinates, attributes, overrides), a grid key and a zipped pair."""
    import thermoelec
    from thermoelec.analysis import sweep

    from .test_options_and_review import GROUP, write

    table = {"thermal.ambient_temperature": ["15 degC", "25 degC"],
             "zip": {"duty": {"profile.segment[1].value": ["3 A", "5 A"],
                              "profile.segment[1].duration": ["25 min", "10 min"]}}}
    loaded = thermoelec.load_scenario(write(tmp_path, table, options=GROUP[:2]))
    return loaded, sweep.plan_sweep(loaded)


def _saltelli_plan(tmp_path):
    """A sampled plan: integer ``sample`` numbers, sampled keys and the text ``sample_block``."""
    import thermoelec
    from thermoelec.analysis import sweep

    from .test_uncertainty import rise_scenario

    loaded = thermoelec.scenario_from_dict(rise_scenario(
        {"cell.r0.value": {"distribution": "normal", "mean": "20 mohm", "std": "2 mohm"},
         "cell.specific_heat": {"distribution": "uniform", "low": "850 J/kg/K", "high": "950 J/kg/K"},
         "samples": 8, "sampling": "saltelli"}))
    return loaded, sweep.plan_sweep(loaded)


@pytest.mark.parametrize("make_plan", [_mixed_plan, _saltelli_plan])
def test_a_sweeps_files_are_the_ones_xarray_and_pandas_write(tmp_path, make_plan):
    from thermoelec.analysis import sweep

    loaded, plan = make_plan(tmp_path)
    results = sweep.sweep_data(loaded, plan, _sweep_rows(plan))
    ds = results.dataset()
    (tmp_path / "ours").mkdir()
    sweep.write_sweep(results, tmp_path / "ours")
    ds.to_netcdf(tmp_path / "xarray.nc")
    sweep.sweep_table(ds).to_csv(tmp_path / "pandas.csv", index=False, float_format="%.9g")
    _same_files(tmp_path / "ours" / "sweep.nc", tmp_path / "xarray.nc")
    assert (tmp_path / "ours" / "sweep.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()
    assert results.passed() == int(sweep.passes(ds).sum())
