"""Figures of a sweep and of a design search: heat maps with the pass / fail boundary, the found values.

Owns the drawing of the datasets made by :mod:`thermoelec.analysis.sweep`
(:func:`sweep_map`, :func:`search_chart`) and their files
(:func:`write_sweep_figures`, :func:`write_search_figure`). Imports from
analysis/ and below only; never from fit/, the API or the command line.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from thermoelec.analysis.sweep import passes
from thermoelec.output.figures import save

__all__ = ["SWEEP_MAP_METRICS", "search_chart", "sweep_map", "write_search_figure", "write_sweep_figures"]

#: The metrics drawn as heat maps by :func:`write_sweep_figures`.
SWEEP_MAP_METRICS = ("cell_temperature_max_degC", "energy_discharged_Wh")


def sweep_map(ds, metric: str) -> Figure:
    """Heat map of a metric over the first two swept axes with the pass / fail boundary, faceted over a third.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep's dataset (:func:`thermoelec.analysis.sweep.sweep_dataset`).
    metric : str
        One of its metrics (a key of :data:`thermoelec.analysis.metrics.METRICS`), drawn in its unit.

    Returns
    -------
    Figure
        Rows: the first swept key, columns: the second; a cross marks a scenario stopped before
        the end of its profile. With one swept key, the metric against it as a line.
    """
    dims = [d for d in ds[metric].dims]
    if len(dims) < 2:
        return _line_plot(ds, metric)
    x_dim, y_dim = dims[1], dims[0]
    facets = dims[2] if len(dims) > 2 else None
    n = ds.sizes[facets] if facets else 1
    fig = Figure(figsize=(5.2 * min(n, 4), 4.4 * math.ceil(n / 4)), layout="constrained")
    axes = np.atleast_1d(fig.subplots(math.ceil(n / 4), min(n, 4), squeeze=False).ravel())
    ok = passes(ds)
    for i in range(n):
        sel = {facets: i} if facets else {}
        extra = [d for d in dims if d not in (x_dim, y_dim, facets)]
        sel.update({d: 0 for d in extra})
        values = ds[metric].isel(sel)
        good = ok.isel(sel).astype(float)
        ax = axes[i]
        x, y = _numeric(ds, x_dim), _numeric(ds, y_dim)
        mesh = ax.pcolormesh(x, y, values.values, shading="nearest", cmap="inferno")
        if 0.0 < float(good.mean()) < 1.0 and len(x) > 1 and len(y) > 1:
            ax.contour(x, y, good.values, levels=[0.5], colors="cyan", linewidths=1.5)
        # a scenario that stopped early shows its metric up to the stop: mark it, so that a cell
        # stopped at once (a cold take-off on the voltage limit) does not read as a cool pass
        stopped = (ds["stop_reason"].isel(sel).values != "end_of_profile")
        if stopped.any():
            xx, yy = np.meshgrid(x, y)
            ax.scatter(xx[stopped], yy[stopped], marker="x", color="white", s=28, linewidths=1.2)
        fig.colorbar(mesh, ax=ax, label=f"{metric}")
        ax.set_xlabel(f"{x_dim} [{ds[x_dim].attrs.get('units', '')}]")
        ax.set_ylabel(f"{y_dim} [{ds[y_dim].attrs.get('units', '')}]")
        if facets:
            ax.set_title(f"{facets} = {ds[facets].values[i]}", fontsize=9)
    fig.suptitle(f"{metric}\ncyan: pass / fail boundary; x: stopped before the end of the profile", fontsize=10)
    return fig


def _numeric(ds, dim: str) -> np.ndarray:
    values = ds[dim].values
    return values.astype(float) if np.issubdtype(values.dtype, np.number) else np.arange(len(values))


def _line_plot(ds, metric: str) -> Figure:
    dim = ds[metric].dims[0]
    fig = Figure(figsize=(7, 4.5), layout="constrained")
    ax = fig.subplots()
    ax.plot(_numeric(ds, dim), ds[metric].values, "o-")
    ax.set_xlabel(dim)
    ax.set_ylabel(metric)
    return fig


def search_chart(ds) -> Figure:
    """The found value against the first other key, one line per value of the second.

    Parameters
    ----------
    ds : xarray.Dataset
        A design search's dataset (:func:`thermoelec.analysis.sweep.design_search`).

    Returns
    -------
    Figure
        The found value in the searched key's unit; a missing point was not met in the range.
    """
    name = next(v for v in ds.data_vars if v.startswith(("least_", "greatest_")))
    fig = Figure(figsize=(7.5, 5), layout="constrained")
    ax = fig.subplots()
    dims = list(ds[name].dims)
    if dims == ["case"]:
        ax.bar([0], ds[name].values)
    else:
        x = _numeric(ds, dims[0])
        if len(dims) == 1:
            ax.plot(x, ds[name].values, "o-")
        else:
            for j in range(ds.sizes[dims[1]]):
                ax.plot(x, ds[name].isel({dims[1]: j}).values.T, "o-", label=f"{dims[1]} = {ds[dims[1]].values[j]}")
            ax.legend(fontsize=8)
        ax.set_xlabel(f"{dims[0]} [{ds[dims[0]].attrs.get('units', '')}]")
    ax.set_ylabel(f"{name} [{ds[name].attrs.get('units', '')}]")
    ax.set_title(f"{name.split('_')[0]} value meeting {ds.attrs['criterion']} (missing: not met in range)", fontsize=9)
    return fig


def write_sweep_figures(ds, out: Path, formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """Write the heat map of each :data:`SWEEP_MAP_METRICS` entry as ``out/sweep_<metric>.<format>``.

    Parameters
    ----------
    ds : xarray.Dataset
        A sweep's dataset (:func:`thermoelec.analysis.sweep.sweep_dataset`).
    out : Path
        The sweep's folder.
    formats : sequence of str
        File formats matplotlib writes.
    """
    written: list[Path] = []
    for metric in SWEEP_MAP_METRICS:
        written += save(sweep_map(ds, metric), out, f"sweep_{metric}", formats)
    return written


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
