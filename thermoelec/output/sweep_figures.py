"""Figures of a sweep and of a design search: heat maps with the pass / fail boundary, the found values.

Owns the drawing of the datasets made by :mod:`thermoelec.analysis.sweep`
(:func:`sweep_map`, :func:`search_chart`), their data functions (:func:`map_data`,
:func:`boundary_segments`, :func:`facet_indices`, :func:`axis_label`,
:func:`search_points`) and their files (:func:`write_sweep_figures`,
:func:`write_search_figure`). A heat map draws at most :data:`MAX_FACETS`
facets, chosen evenly over the third swept key (every value stays in the
dataset), so its time is bounded whatever the sweep's size. Scenarios that did
not run (failed, invalid, or stopped at t = 0 with nothing to show) are masked
and hatched, not painted as data. Imports from analysis/ and below only; never
from fit/, the API or the command line.
"""

from __future__ import annotations

import math
import os
import re
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.collections import LineCollection, PatchCollection
from matplotlib.colors import Normalize
from matplotlib.figure import Figure
from matplotlib.patches import Rectangle

from thermoelec.analysis.sweep import numpy_backed, passes
from thermoelec.output.figures import save

__all__ = ["MAX_FACETS", "SWEEP_MAP_METRICS", "MapData", "axis_label", "boundary_segments", "facet_indices",
           "map_data", "search_chart", "search_points", "sweep_map", "write_search_figure", "write_sweep_figures"]

#: The metrics drawn as heat maps by :func:`write_sweep_figures`.
SWEEP_MAP_METRICS = ("cell_temperature_max_degC", "energy_discharged_Wh")
#: The most facets a heat map draws (chosen evenly over the third swept key).
MAX_FACETS = 12
#: Facets per row of a heat map.
FACET_COLUMNS = 4
#: Readable names of the metrics drawn (others get their key with spaces).
METRIC_NAMES = {"cell_temperature_max_degC": "peak cell temperature", "energy_discharged_Wh":
                "energy discharged at the terminals", "energy_to_load_Wh": "energy to the load"}


def axis_label(path: str, unit: str = "") -> str:
    """A swept key as an axis label, name and unit: ``thermal.convection.coefficient`` in W/m^2/K gives
    ``convection coefficient [W/m^2/K]``, ``profile.segment[3].value`` gives ``segment 3 value``.

    Parameters
    ----------
    path : str
        The dotted path of the key (or a dimension such as ``case``).
    unit : str
        Its unit ("" or "as in the scenario file" for none).
    """
    parts = [re.sub(r"\[(\d+)\]", r" \1", part) for part in path.split(".")]
    words = parts[1:] if len(parts) > 1 and parts[0] in ("cell", "pack", "thermal", "profile", "limits",
                                                         "solver", "stress") else parts
    name = " ".join(words).replace("_", " ")
    return f"{name} [{unit}]" if unit and unit != "as in the scenario file" else name


def _metric_label(metric: str, unit: str) -> str:
    name = METRIC_NAMES.get(metric, re.sub(r"_(degC|K|V|A|W|Wh|Ah|s)$", "", metric).replace("_", " "))
    return f"{name} [{unit}]" if unit and unit != "1" else name


def facet_indices(n: int, limit: int = MAX_FACETS) -> list[int]:
    """At most ``limit`` of ``n`` facet positions, evenly spread, first and last included.

    Parameters
    ----------
    n : int
        Values of the faceted key.
    limit : int
        The most facets drawn.
    """
    if n <= limit:
        return list(range(n))
    return sorted({round(float(v)) for v in np.linspace(0, n - 1, limit)})


def _edges(centres: np.ndarray) -> np.ndarray:
    """Cell edges of a ``shading="nearest"`` mesh: midpoints, the outer ones mirrored."""
    if len(centres) == 1:
        return np.array([centres[0] - 0.5, centres[0] + 0.5])
    mid = 0.5 * (centres[1:] + centres[:-1])
    return np.concatenate([[2 * centres[0] - mid[0]], mid, [2 * centres[-1] - mid[-1]]])


def boundary_segments(x: np.ndarray, y: np.ndarray, good: np.ndarray) -> list[tuple[tuple[float, float],
                                                                                     tuple[float, float]]]:
    """The pass / fail boundary as cell edges: each edge between two neighbouring cells of different verdicts.

    Parameters
    ----------
    x, y : arrays
        Cell centres along the columns and the rows (the coordinates of the two keys).
    good : bool array, shape (len(y), len(x))
        Pass (True) or not, per cell.

    Returns
    -------
    list of segments
        ``((x0, y0), (x1, y1))`` on the mesh's cell edges (never through a cell's centre).
    """
    xe, ye = _edges(np.asarray(x, float)), _edges(np.asarray(y, float))
    segments = []
    for i in range(good.shape[0]):
        for j in range(good.shape[1]):
            if j + 1 < good.shape[1] and good[i, j] != good[i, j + 1]:
                segments.append(((xe[j + 1], ye[i]), (xe[j + 1], ye[i + 1])))
            if i + 1 < good.shape[0] and good[i, j] != good[i + 1, j]:
                segments.append(((xe[j], ye[i + 1]), (xe[j + 1], ye[i + 1])))
    return segments


@dataclass(frozen=True)
class MapData:
    """What a heat map of a sweep shows.

    Attributes
    ----------
    x, y : arrays
        Cell centres: the second swept key's coordinate (columns), the first's (rows).
    x_label, y_label : str
        Their axis labels (:func:`axis_label`).
    facet_dim : str or None
        The third swept key, faceted over.
    facets : list of int
        The positions along it drawn (:func:`facet_indices`).
    facet_titles : list of str
        A title per facet drawn.
    values : list of masked arrays
        The metric per facet drawn, rows by the first key; masked where the scenario did not run.
    good : list of bool arrays
        The verdict of every cell: a pass.
    not_run : list of bool arrays
        The cells masked: failed, invalid, or stopped at t = 0 with nothing to show.
    stopped : list of bool arrays
        The cells that ran but stopped before the end of their profile.
    limits : tuple of float
        The colour scale, over the values shown (not over masked ones).
    label : str
        The metric's name and unit.
    """

    x: np.ndarray
    y: np.ndarray
    x_label: str
    y_label: str
    facet_dim: str | None
    facets: list[int]
    facet_titles: list[str]
    values: list[np.ma.MaskedArray]
    good: list[np.ndarray]
    not_run: list[np.ndarray]
    stopped: list[np.ndarray]
    limits: tuple[float, float]
    label: str


def _numeric(ds, dim: str) -> np.ndarray:
    values = ds[dim].values
    return values.astype(float) if np.issubdtype(values.dtype, np.number) else np.arange(len(values), dtype=float)


def _units(ds, dim: str) -> str:
    return ds[dim].attrs.get("units", "") if dim in ds.coords else ""


def map_data(ds, metric: str) -> MapData:
    """The data of :func:`sweep_map`: the first two swept keys as rows and columns, facets over a third.

    Further swept keys are held at their first value (every value stays in the dataset).

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep's dataset with two or more swept keys (:func:`thermoelec.analysis.sweep.sweep_dataset`).
    metric : str
        One of its metrics.
    """
    dims = list(ds[metric].dims)
    y_dim, x_dim = dims[0], dims[1]
    facet_dim = dims[2] if len(dims) > 2 else None
    facets = facet_indices(ds.sizes[facet_dim]) if facet_dim else [0]
    ok = passes(ds)
    ran = (ds["status"] == "ok") & (ds["duration_s"] > 0)
    stopped_all = (ds["stop_reason"] != "end_of_profile") & ran
    values, good, not_run, stopped, titles = [], [], [], [], []
    for k in facets:
        sel = {d: 0 for d in dims[2:]}
        if facet_dim:
            sel[facet_dim] = k
            coord = ds[facet_dim].values[k]
            titles.append(f"{axis_label(facet_dim)} = {coord:g} {_units(ds, facet_dim)}".rstrip()
                          if isinstance(coord, (float, int, np.number)) else f"{axis_label(facet_dim)} = {coord}")
        else:
            titles.append("")
        mask = ~ran.isel(sel).values.astype(bool)
        raw = ds[metric].isel(sel).values.astype(float)
        values.append(np.ma.masked_array(raw, mask=mask | ~np.isfinite(raw)))
        good.append(ok.isel(sel).values.astype(bool))
        not_run.append(mask)
        stopped.append(stopped_all.isel(sel).values.astype(bool))
    shown = np.concatenate([v.compressed() for v in values]) if values else np.zeros(0)
    limits = (float(shown.min()), float(shown.max())) if shown.size else (0.0, 1.0)
    if limits[0] == limits[1]:
        limits = (limits[0] - 0.5, limits[1] + 0.5)
    return MapData(_numeric(ds, x_dim), _numeric(ds, y_dim), axis_label(x_dim, _units(ds, x_dim)),
                   axis_label(y_dim, _units(ds, y_dim)), facet_dim, facets, titles, values, good, not_run, stopped,
                   limits, _metric_label(metric, ds[metric].attrs.get("units", "")))


def _hatch(ax, x: np.ndarray, y: np.ndarray, mask: np.ndarray) -> None:
    xe, ye = _edges(x), _edges(y)
    cells = [Rectangle((xe[j], ye[i]), xe[j + 1] - xe[j], ye[i + 1] - ye[i]) for i, j in zip(*np.nonzero(mask),
                                                                                             strict=True)]
    if cells:
        ax.add_collection(PatchCollection(cells, facecolor="0.85", edgecolor="0.45", hatch="///", lw=0.0))


def sweep_map(ds, metric: str) -> Figure:
    """Heat map of a metric over the first two swept keys with the pass / fail boundary, faceted over a third.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep's dataset (:func:`thermoelec.analysis.sweep.sweep_dataset`).
    metric : str
        One of its metrics (a key of :data:`thermoelec.analysis.metrics.METRICS`), drawn in its unit.

    Returns
    -------
    Figure
        Rows: the first swept key, columns: the second, one colour scale over every facet; hatched: a
        scenario that did not run; cyan: the pass / fail boundary along cell edges; a cross: a scenario
        stopped before the end of its profile. With one swept key, the metric against it as a line.
    """
    if len(ds[metric].dims) < 2:
        return _line_plot(ds, metric)
    data = map_data(ds, metric)
    n = len(data.facets)
    cols, rows = min(n, FACET_COLUMNS), math.ceil(n / FACET_COLUMNS)
    width, height = 4.2 * cols + 1.6, 3.4 * rows + 1.2
    # a fixed grid, not the constrained layout: laying out a dozen facets' ticks twice per file format
    # cost more than drawing them; the facets share their axes, so only the outer ones are labelled
    fig = Figure(figsize=(width, height))
    axes = np.atleast_1d(fig.subplots(rows, cols, squeeze=False, sharex=True, sharey=True, gridspec_kw={
        "left": 0.9 / width, "right": 1 - 1.5 / width, "bottom": 0.65 / height, "top": 1 - 0.95 / height,
        "wspace": 0.12, "hspace": 0.35}).ravel())
    norm = Normalize(*data.limits)
    mesh = None
    for k in range(n):
        ax = axes[k]
        mesh = ax.pcolormesh(data.x, data.y, data.values[k], shading="nearest", cmap="inferno", norm=norm)
        _hatch(ax, data.x, data.y, data.not_run[k])
        segments = boundary_segments(data.x, data.y, data.good[k])
        if segments:
            ax.add_collection(LineCollection(segments, colors="cyan", linewidths=1.8))
        if data.stopped[k].any():
            xx, yy = np.meshgrid(data.x, data.y)
            ax.scatter(xx[data.stopped[k]], yy[data.stopped[k]], marker="x", color="white", s=28, linewidths=1.2)
        # ticks on the outer facets only (the bottom one of each column, the first of each row): the
        # facets share their axes, and laying out every facet's ticks was half the drawing time
        if k >= n - cols:
            ax.set_xlabel(data.x_label)
            ax.tick_params(axis="x", labelbottom=True)
        else:
            ax.xaxis.set_visible(False)
        if k % cols == 0:
            ax.set_ylabel(data.y_label)
        else:
            ax.yaxis.set_visible(False)
        if data.facet_titles[k]:
            ax.set_title(data.facet_titles[k], fontsize=9)
        for dim, setter in ((ds[metric].dims[1], ax.set_xticks), (ds[metric].dims[0], ax.set_yticks)):
            values = ds[dim].values
            if not np.issubdtype(values.dtype, np.number):  # an option group: its names
                setter(np.arange(ds.sizes[dim]), [str(v) for v in values], fontsize=8)
            elif np.issubdtype(values.dtype, np.integer) and values.size <= MAX_FACETS:
                setter(values)  # a zipped group's index: a tick at each case, none between
    for ax in axes[n:]:
        ax.set_axis_off()
    bar = fig.add_axes((1 - 1.2 / width, 0.65 / height, 0.18 / width, 1 - 1.6 / height))
    fig.colorbar(mesh, cax=bar, label=data.label)
    shown = f"; {n} of {ds.sizes[data.facet_dim]} values of {axis_label(data.facet_dim)} shown" \
        if data.facet_dim and n < ds.sizes[data.facet_dim] else ""
    fig.suptitle(f"{data.label}\ncyan: pass / fail boundary; x: stopped before the end of the profile; "
                 f"hatched: did not run (failed, invalid or stopped at t = 0){shown}", fontsize=10)
    return fig


def _line_plot(ds, metric: str) -> Figure:
    dim = ds[metric].dims[0]
    fig = Figure(figsize=(7, 4.5), layout="constrained")
    ax = fig.subplots()
    ran = ((ds["status"] == "ok") & (ds["duration_s"] > 0)).values
    values = np.where(ran, ds[metric].values.astype(float), np.nan)
    ax.plot(_numeric(ds, dim), values, "o-")
    ax.set_xlabel(axis_label(dim, _units(ds, dim)))
    ax.set_ylabel(_metric_label(metric, ds[metric].attrs.get("units", "")))
    return fig


@dataclass(frozen=True)
class SearchLine:
    """One line of a search chart: the found values over the first other key.

    Attributes
    ----------
    label : str
        The value of the second other key it is drawn for ("" for none).
    x : array
        The first other key's coordinate.
    found : array
        The value found where the search converged, NaN elsewhere.
    at_bound : array
        The bound of the range where the criterion already holds there (the answer lies at or beyond
        it), NaN elsewhere.
    not_met : bool array
        Where the criterion holds nowhere in the range.
    """

    label: str
    x: np.ndarray
    found: np.ndarray
    at_bound: np.ndarray
    not_met: np.ndarray


def search_points(ds) -> list[SearchLine]:
    """The data of :func:`search_chart`: per value of the second other key, the points by status.

    Parameters
    ----------
    ds : xarray.Dataset
        A design search's dataset (:func:`thermoelec.analysis.sweep.design_search`).
    """
    name = next(v for v in ds.data_vars if v.startswith(("least_", "greatest_")))
    value = ds[name]
    status = ds["status"] if "status" in ds else None
    dims = list(value.dims)
    groups = [({}, "")] if len(dims) < 2 else [({dims[1]: j}, f"{axis_label(dims[1])} = {ds[dims[1]].values[j]}")
                                                for j in range(ds.sizes[dims[1]])]
    x = _numeric(ds, dims[0]) if dims != ["case"] else np.zeros(1)
    lines = []
    for sel, label in groups:
        v = value.isel(sel).values.astype(float).ravel()
        st = status.isel(sel).values.ravel() if status is not None else np.array(["ok"] * len(v), dtype=object)
        lines.append(SearchLine(label, x, np.where(st == "ok", v, np.nan), np.where(st == "at_bound", v, np.nan),
                                st == "not_met"))
    return lines


def search_chart(ds) -> Figure:
    """The found value against the first other key, one line per value of the second.

    Parameters
    ----------
    ds : xarray.Dataset
        A design search's dataset (:func:`thermoelec.analysis.sweep.design_search`).

    Returns
    -------
    Figure
        The found value in the searched key's unit (circles); a triangle where the criterion holds at the
        range's bound already (met at the bound: the answer lies at or below it, above for the greatest); a
        cross at the other bound where it is not met in the range.
    """
    name = next(v for v in ds.data_vars if v.startswith(("least_", "greatest_")))
    greatest = name.startswith("greatest_")
    low, high = _range(ds)
    fig = Figure(figsize=(7.5, 5), layout="constrained")
    ax = fig.subplots()
    dims = list(ds[name].dims)
    bound_word = "upper" if greatest else "lower"
    seen: set[str] = set()

    def once(label: str) -> str | None:
        if label in seen:
            return None
        seen.add(label)
        return label

    for k, line in enumerate(search_points(ds)):
        colour = f"C{k}"
        ax.plot(line.x, line.found, "o-", color=colour, label=line.label or None)
        if np.isfinite(line.at_bound).any():
            side = "above" if greatest else "below"
            ax.plot(line.x, line.at_bound, "v" if not greatest else "^", color=colour, ms=8, ls="none",
                    label=once(f"met at the {bound_word} bound (the answer lies at or {side} it)"))
        if line.not_met.any() and high is not None:
            other = low if greatest else high
            ax.plot(line.x[line.not_met], np.full(int(line.not_met.sum()), other), "x", color=colour, ms=9,
                    ls="none", label=once("not met in range (drawn at the other bound)"))
    if ax.get_legend_handles_labels()[0]:
        ax.legend(fontsize=8)
    if dims != ["case"]:
        ax.set_xlabel(axis_label(dims[0], _units(ds, dims[0])))
    ax.set_ylabel(axis_label(name.split("_", 1)[1], ds[name].attrs.get("units", "")))
    ax.set_title(f"{'greatest' if greatest else 'least'} {axis_label(name.split('_', 1)[1])} meeting "
                 f"{ds.attrs['criterion']}", fontsize=9)
    return fig


def _range(ds) -> tuple[float | None, float | None]:
    """The searched range's ends, from the dataset's ``search_range`` attribute (``"5..200 W/m^2/K"``)."""
    match = re.match(r"^\s*([-+0-9.eE]+)\.\.([-+0-9.eE]+)", str(ds.attrs.get("search_range", "")))
    return (float(match.group(1)), float(match.group(2))) if match else (None, None)


def write_sweep_figures(ds, out: Path, formats: Sequence[str] = ("png", "svg"), parallel: bool = False) -> list[Path]:
    """Write the heat map of each :data:`SWEEP_MAP_METRICS` entry as ``out/sweep_<metric>.<format>``.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep's dataset (:func:`thermoelec.analysis.sweep.sweep_dataset`).
    out : Path
        The sweep's folder.
    formats : sequence of str
        File formats matplotlib writes.
    parallel : bool
        Draw the last map in a forked child process meanwhile (where the system forks; on a
        machine with a second core the maps take about half the time). A child that fails leaves
        its map to this process, so the files are the same either way.

    Returns
    -------
    list of Path
        The files written, map by map in :data:`SWEEP_MAP_METRICS` order [-].
    """
    if "sample" in ds.dims:  # a sampled sweep is drawn by its statistics (thermoelec.output.uncertainty)
        return []
    with numpy_backed():  # the sweep's dataset holds numpy arrays: xarray need not import dask and pint to see it
        return _write_maps(ds, out, formats, parallel)


def _write_maps(ds, out: Path, formats: Sequence[str], parallel: bool) -> list[Path]:
    # option groups last: their options become the facets (or the columns), the grid keys the axes
    options = [d for d in ds["verdict"].dims if ds[d].dtype == object]
    if options and len(ds["verdict"].dims) > len(options):
        ds = ds.transpose(*[d for d in ds.dims if d not in options], *options)
    metrics = list(SWEEP_MAP_METRICS)
    child = _draw_in_child(ds, out, metrics[-1], formats) if parallel and len(metrics) > 1 else None
    written: dict[str, list[Path]] = {}
    try:
        for metric in metrics[:-1] if child is not None else metrics:
            written[metric] = _write_map(ds, out, metric, formats)
    finally:
        if child is not None:
            if sys.exc_info()[0] is not None:  # interrupted or failed here: the child's map is not wanted
                child.terminate()
            child.join()
    if child is not None:
        metric = metrics[-1]
        written[metric] = [out / f"sweep_{metric}.{fmt}" for fmt in formats] if child.exitcode == 0 else \
            _write_map(ds, out, metric, formats)
    return [path for metric in metrics for path in written[metric]]


def _write_map(ds, out: Path, metric: str, formats: Sequence[str]) -> list[Path]:
    """The heat map of ``metric`` as ``out/sweep_<metric>.<format>``; returns the files."""
    return save(sweep_map(ds, metric), out, f"sweep_{metric}", formats)


def _draw_in_child(ds, out: Path, metric: str, formats: Sequence[str]):
    """Start a forked process that writes the heat map of ``metric``; None where the system does not fork."""
    import multiprocessing

    if "fork" not in multiprocessing.get_all_start_methods():
        return None
    child = multiprocessing.get_context("fork").Process(target=_child_map, args=(ds, out, metric, tuple(formats)),
                                                         daemon=True)
    child.start()
    return child


def _child_map(ds, out: Path, metric: str, formats: tuple[str, ...]) -> None:
    """In the forked child: write the map and leave at once (no exit handlers of the parent run here);
    exit status 1 on any failure, and the parent draws the map itself."""
    try:
        _write_map(ds, out, metric, formats)
    except BaseException:  # the parent redraws it, and reports what goes wrong there
        os._exit(1)
    os._exit(0)


def write_search_figure(ds, out: Path, formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """Write the chart of a design search (:func:`search_chart`) as ``out/search.<format>``.

    Parameters
    ----------
    ds : xarray.Dataset
        A design search's dataset (:func:`thermoelec.analysis.sweep.design_search`).
    out : Path
        The search's folder.
    formats : sequence of str
        File formats matplotlib writes.
    """
    return save(search_chart(ds), out, "search", formats)
