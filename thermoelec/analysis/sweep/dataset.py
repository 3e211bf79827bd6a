"""The labelled results of a sweep: the dataset of metrics, the kept series, pass / fail.

Owns :func:`sweep_data` (the variables, coordinates and attributes, :class:`SweepData`)
and :func:`sweep_dataset` (them as one xarray Dataset: a dimension per swept key, or
``case`` for zip, a variable per metric of :data:`thermoelec.analysis.metrics.METRICS`),
:func:`write_sweep` (``sweep.nc`` and ``sweep.csv``, one row per scenario:
:func:`sweep_table`), :func:`write_series` (``series.zarr``) and :func:`passes`.
A scenario that failed to solve or was invalid keeps NaN metrics, its status
and its message. The heat maps are drawn by the output layer
(:mod:`thermoelec.output.sweep_figures`). Imports from scenario/ and analysis/
only; never from output/, fit/, the API or the command line.
"""

from __future__ import annotations

import json
import os
import sys
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.metrics import METRICS, PACK_METRICS, VERDICT_KEYS
from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.analysis.sweep.run import KEPT_SERIES
from thermoelec.analysis.sweep.sampling import SAMPLERS
from thermoelec.analysis.tablefiles import write_csv, write_netcdf
from thermoelec.analysis.verdict import PASS
from thermoelec.scenario import Scenario
from thermoelec.version import __version__

__all__ = ["SweepData", "numpy_backed", "passes", "plan_coordinates", "sweep_data", "sweep_dataset", "sweep_table",
           "write_series", "write_sweep"]


#: The array libraries xarray imports to tell their arrays from numpy's, and the module each array type lives in.
_DUCK_ARRAY_MODULES = {"dask": "dask.array", "pint": "pint"}


@contextmanager
def numpy_backed() -> Iterator[None]:
    """Within: xarray takes every array for numpy's without importing dask.array and pint to look (0.5 s).

    xarray asks, of each array it is given, whether it is a dask array or a pint
    quantity, and imports those libraries to know (dask.array brings
    scipy.fftpack). An array of a module nobody has imported cannot be one of
    its arrays, so while no one has, xarray is told here that the module is
    absent; on the way out it is told nothing, and looks again when next asked
    (a dataset chunked into dask arrays after this works as before). For the
    sweep's own datasets, numpy throughout; a changed xarray without the table
    this fills just looks, as it would have.
    """
    seeded = []
    try:
        from xarray.namedarray import pycompat

        known = pycompat._cached_duck_array_modules
        for name, module in _DUCK_ARRAY_MODULES.items():
            if name not in known and module not in sys.modules:
                absent = object.__new__(pycompat.DuckArrayModule)
                absent.module, absent.version, absent.type, absent.available = None, pycompat.Version("0"), (), False
                known[name] = absent
                seeded.append((name, absent))
    except (ImportError, AttributeError, TypeError):
        pass
    try:
        yield
    finally:
        for name, absent in seeded:
            if known.get(name) is absent:
                del known[name]


def plan_coordinates(plan: SweepPlan) -> dict[str, tuple[str, np.ndarray, dict[str, str]]]:
    """The coordinates of a plan's dimensions: name -> (dimension, values, attributes).

    A grid key: its values in their unit, named by the key; a zipped group: each key along the
    group's dimension; an option group: the option names (the dimension's own coordinate), each
    attribute as ``GROUP.ATTRIBUTE`` in its unit, and each option's overrides as ``GROUP.overrides``
    (JSON); the samples: their number, each sampled key's value in its unit and, for the Saltelli
    design, ``sample_block`` (``A``, ``B``, ``AB_i``).
    """
    coords: dict[str, tuple[str, np.ndarray, dict[str, str]]] = {}
    for dim in plan.dims:
        for axis in dim.keys:
            coords[axis.path] = (dim.name, np.array(axis.coords), {"units": axis.unit or "as in the scenario file"})
        if dim.group is not None:
            group = dim.group
            coords[dim.name] = (dim.name, np.array(group.names, dtype=object),
                                {"description": f"the options of group {group.name!r} ([[option.{group.name}]])"})
            for attr in group.attribute_names:
                coords[f"{group.name}.{attr}"] = (dim.name, np.array([o.attribute(attr) for o in group.options]),
                                                  {"units": group.unit(attr) or "1"})
            coords[f"{group.name}.overrides"] = (dim.name, np.array(
                [json.dumps(dict(o.overrides)) for o in group.options], dtype=object), {})
        if dim.sampling is not None:
            sampling = dim.sampling
            coords["sample"] = ("sample", np.arange(dim.size), {"description": SAMPLERS[sampling.method]})
            values = sampling.values()
            for j, dist in enumerate(sampling.distributions):
                coords[dist.path] = ("sample", values[:, j].astype(float),
                                     {"units": dist.unit or "1", "distribution": dist.describe()})
            if sampling.method == "saltelli":
                coords["sample_block"] = ("sample", sampling.blocks(), {})
    return coords


@dataclass(frozen=True)
class SweepData:
    """A sweep's labelled results before any xarray: what ``sweep.nc`` and ``sweep.csv`` hold.

    Attributes
    ----------
    data : dict of str to (dims, values, attrs)
        A variable per metric, the status, message, stop reason, engine and verdict keys.
    coords : dict of str to (dim, values, attrs)
        The plan's coordinates (:func:`plan_coordinates`).
    attrs : dict of str to str, int or float
        The global attributes (version, scenario file and hash, plan, failures, options, sampling).
    """

    data: dict[str, Any]
    coords: dict[str, Any]
    attrs: dict[str, Any]

    @classmethod
    def of(cls, ds) -> SweepData:
        """The parts of an xarray Dataset of :func:`sweep_dataset`."""
        def parts(variables) -> dict[str, Any]:
            return {name: (var.dims, var.values, dict(var.attrs)) for name, var in variables.items()}

        return cls(parts(ds.data_vars), parts(ds.coords), dict(ds.attrs))

    def dataset(self):
        """The xarray Dataset (figures, reviews and the uncertainty analysis work on it)."""
        import xarray as xr

        with numpy_backed():
            ds = xr.Dataset(self.data, coords=self.coords)
        ds.attrs.update(self.attrs)
        return ds

    def passed(self) -> int:
        """How many scenarios pass (:func:`passes`)."""
        return int(np.count_nonzero(np.asarray(self.data["verdict"][1]) == PASS))


def sweep_data(scenario: Scenario, plan: SweepPlan, rows: Sequence[Mapping[str, Any]]) -> SweepData:
    """The parts of :func:`sweep_dataset`: a dimension per plan dimension, a variable per metric, no xarray."""
    shape = plan.shape
    dims = list(plan.dim_names)
    data: dict[str, Any] = {}
    ran = [r.get("status") == "ok" for r in rows]  # a failed or invalid scenario has no metrics: NaN, not numbers
    # a resolved pack's metrics where a row has them (a lumped sweep keeps the variables it had)
    pack = tuple(key for key in PACK_METRICS if any(key in r for r in rows))
    for key in METRICS + pack:
        values = np.array([np.nan if not ok or r.get(key) is None else float(r[key])
                           for r, ok in zip(rows, ran, strict=True)]).reshape(shape)
        data[key] = (dims, values, {"units": _unit_of(key)})
    for key in ("status", "message", "stop_reason", "engine", *VERDICT_KEYS):
        data[key] = (dims, np.array([str(r.get(key) or "") if ok or key in ("status", "message") else ""
                                     for r, ok in zip(rows, ran, strict=True)], dtype=object).reshape(shape), {})
    data["verdict"][2]["description"] = ("pass / fail of every limit check (analysis.verdict); empty for a scenario "
                                         "that failed to solve or was invalid")
    attrs: dict[str, Any] = dict(
        thermoelec_version=__version__, scenario_file=scenario.source, scenario_sha256=scenario.digest,
        sweep_mode=plan.mode, scenarios=plan.size, sweep_dimensions=json.dumps(dims),
        sweep_fingerprint=plan.signature(scenario.digest), failed=int(sum(r.get("status") != "ok" for r in rows)))
    for dim in plan.option_dims:
        attrs[f"option_group.{dim.name}"] = json.dumps(
            {o.name: {"description": o.description, "overrides": dict(o.overrides),
                      "attributes": {a.name: [a.value, a.unit] for a in o.attributes}} for o in dim.group.options})
    sampling = plan.sampling
    if sampling is not None:
        attrs.update(sampling=sampling.method, sampling_description=SAMPLERS[sampling.method],
                     samples=sampling.samples, seed=sampling.seed,
                     distributions=json.dumps({d.path: d.describe() for d in sampling.distributions}))
    return SweepData(data, plan_coordinates(plan), attrs)


def sweep_dataset(scenario: Scenario, plan: SweepPlan, rows: Sequence[Mapping[str, Any]]):
    """One xarray Dataset: a dimension per plan dimension (:func:`plan_coordinates`), a variable per metric.

    The metrics are :data:`~thermoelec.analysis.metrics.METRICS`, and those of
    :data:`~thermoelec.analysis.metrics.PACK_METRICS` a resolved pack's rows have
    (cells numbered from 1; NaN where a row has none, as a lumped row or no cell at a limit).
    """
    return sweep_data(scenario, plan, rows).dataset()


def _unit_of(key: str) -> str:
    for suffix, unit in (("_degC", "degC"), ("_K", "K"), ("_V", "V"), ("_A", "A"), ("_Wh", "Wh"), ("_Ah", "Ah"),
                         ("_s", "s")):
        if key.endswith(suffix):
            return unit
    return "1"


def write_series(plan: SweepPlan, rows: Sequence[Mapping[str, Any]], out: Path, chunk: int = 64) -> Path:
    """The kept series of every scenario into ``DIR/series.zarr``: dimensions ``scenario`` x ``time``,
    chunked by scenario; a scenario that stopped early (or failed) is NaN after its end."""
    import xarray as xr

    length = max((len(r["series"]["time_s"]) for r in rows if "series" in r), default=0)
    longest = next((r["series"]["time_s"] for r in rows if "series" in r and len(r["series"]["time_s"]) == length),
                   [])
    data = {}
    for key in KEPT_SERIES:
        block = np.full((len(rows), length), np.nan)
        for i, row in enumerate(rows):
            if "series" in row:
                values = row["series"][key]
                block[i, :len(values)] = values
        data[key] = (("scenario", "time"), block, {"units": _unit_of(key) if key != "soc" else "1"})
    index = {}
    positions = np.array([plan.index(i) for i in range(plan.size)]).reshape(plan.size, len(plan.dims))
    for name, (dim, values, attrs) in plan_coordinates(plan).items():  # each scenario's value of each coordinate
        index[name] = ("scenario", np.asarray(values)[positions[:, plan.dim_names.index(dim)]], attrs)
    ds = xr.Dataset(data, coords={"time": ("time", np.asarray(longest, float), {"units": "s"}),
                                  "scenario": np.arange(len(rows)), **index})
    path = out / "series.zarr"
    ds.chunk({"scenario": chunk, "time": -1}).to_zarr(path, mode="w", zarr_format=2, consolidated=True)
    return path


def passes(ds) -> Any:
    """Pass / fail of every scenario: its verdict (:mod:`thermoelec.analysis.verdict`) is a pass."""
    return ds["verdict"] == PASS


def sweep_table(ds):
    """One row per scenario: the swept keys' values, status, message, stop reason, verdict, failed checks,
    engine and the metrics, a resolved pack's too (a pandas DataFrame, as ``sweep.csv`` holds it)."""
    import pandas as pd

    return pd.DataFrame(_table_columns(SweepData.of(ds)))


def _table_columns(parts: SweepData) -> dict[str, np.ndarray]:
    """The columns of :func:`sweep_table`, in order."""
    flat = {name: np.asarray(values).ravel() for name, (_, values, _) in parts.data.items()}
    dims = list(parts.data[METRICS[0]][0])
    shape = np.shape(parts.data[METRICS[0]][1])
    index = np.indices(shape).reshape(len(dims), -1)
    columns: dict[str, Any] = {}
    for coord, (dim, values, attrs) in parts.coords.items():  # each swept key (a zip sweep: every key along ``case``)
        axis = dims.index(dim if isinstance(dim, str) else dim[0])
        unit = attrs.get("units", "")
        columns[f"{coord} [{unit}]" if unit and unit != "as in the scenario file" else coord] = \
            np.asarray(values)[index[axis]]
    pack = [key for key in PACK_METRICS if key in flat]  # a resolved pack's metrics, where the sweep has them
    for key in ("status", "message", "stop_reason", *VERDICT_KEYS, "engine", *METRICS, *pack):
        columns[key] = flat[key]
    return columns


def write_sweep(sweep, out: Path) -> list[Path]:
    """Write a sweep (:class:`SweepData`, or its xarray Dataset) as ``out/sweep.nc`` (strings as
    variable-length text) and its table as ``out/sweep.csv`` (:func:`sweep_table`), each atomically.

    The files are those ``Dataset.to_netcdf`` and ``sweep_table(ds).to_csv(index=False,
    float_format="%.9g")`` write, by the plain writers of :mod:`thermoelec.analysis.tablefiles`:
    a sweep's results need neither xarray (with the dask and pint it imports) nor pandas.
    The heat maps are :func:`thermoelec.output.sweep_figures.write_sweep_figures`.
    """
    parts = sweep if isinstance(sweep, SweepData) else SweepData.of(sweep)
    path, table = out / "sweep.nc", out / "sweep.csv"
    tmp, tmp_table = out / ".sweep.nc.tmp", out / ".sweep.csv.tmp"
    write_netcdf(tmp, parts.data, parts.coords, parts.attrs)
    write_csv(tmp_table, _table_columns(parts))
    os.replace(tmp, path)
    os.replace(tmp_table, table)
    return [path, table]
