"""Figures of a resolved pack: the pack map, the peak temperature of every cell where it sits.

Owns :func:`pack_map_data` (what the map shows, from a result's per-cell series and
coordinates) and :func:`pack_map` (the figure: a disc per cell in the pack's layout
coloured by its peak temperature, the hottest cell ringed, each parallel group
outlined, the coolant's path drawn from inlet to outlet). Imports from analysis/
and below only; the figures module and the report call it for a result with cells.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from matplotlib.figure import Figure

from thermoelec.analysis.results import SimulationResult

__all__ = ["PackMap", "pack_map", "pack_map_data"]

@dataclass(frozen=True)
class PackMap:
    """What the pack map shows.

    Attributes
    ----------
    x, y : float64 array, shape (n,)
        Where each cell is drawn: its column and row on a grid (row 1 at the top), or
        the layout's coordinates [-, or as in the scenario file].
    peak : float64 array, shape (n,)
        Peak temperature of each cell over the mission [degC].
    group : int array, shape (n,)
        Parallel group of each cell, from 1 [-].
    hottest : int
        The hottest cell, from 1 [-].
    path : int array, shape (k,)
        Cells along the coolant's path, inlet first, from 1 (empty without one) [-].
    grid : bool
        The layout is a grid.
    """

    x: np.ndarray
    y: np.ndarray
    peak: np.ndarray
    group: np.ndarray
    hottest: int
    path: np.ndarray
    grid: bool


def pack_map_data(result: SimulationResult) -> PackMap:
    """The pack map of a resolved pack's result (its per-cell series and cell coordinates)."""
    coords = result.cell_coords
    grid = "row" in coords
    x = np.asarray(coords["column" if grid else "x"][1], float)
    y = -np.asarray(coords["row"][1], float) if grid else np.asarray(coords["y"][1], float)
    peak = np.asarray(result.cells["cells_temperature_degC"]).max(axis=0)
    station = np.asarray(coords["coolant_station"][1])
    on_path = np.flatnonzero(station > 0)
    path = on_path[np.argsort(station[on_path])] + 1
    return PackMap(x, y, peak, np.asarray(coords["group"][1]), int(np.argmax(peak)) + 1, path, grid)


def pack_map(result: SimulationResult) -> Figure:
    """Peak temperature of every cell drawn where it sits; the hottest ringed, groups outlined, the coolant's path.

    Parameters
    ----------
    result : SimulationResult
        A resolved pack's result (its ``cells`` and ``cell_coords``).

    Returns
    -------
    matplotlib.figure.Figure
        The map, with a colour bar in degC.
    """
    data = pack_map_data(result)
    span_x = float(np.ptp(data.x)) + 1.0
    span_y = float(np.ptp(data.y)) + 1.0
    fig = Figure(figsize=(min(14.0, 2.0 + 0.55 * span_x), min(8.0, 1.8 + 0.6 * span_y)), constrained_layout=True)
    ax = fig.add_subplot()
    size = 900.0 / max(span_x, span_y, 4.0) ** 0.5 if data.grid else 120.0
    dots = ax.scatter(data.x, data.y, c=data.peak, s=size * 2, cmap="inferno", edgecolors="0.3", linewidths=0.5,
                      zorder=3)
    fig.colorbar(dots, ax=ax, label="peak cell temperature [degC]", shrink=0.7)
    for k in range(len(data.x)):
        ax.annotate(str(k + 1), (data.x[k], data.y[k]), ha="center", va="center", fontsize=6, zorder=4,
                    color="white" if data.peak[k] < np.median(data.peak) else "black")
    h = data.hottest - 1
    ax.scatter([data.x[h]], [data.y[h]], s=size * 3.2, facecolors="none", edgecolors="C0", linewidths=2.0, zorder=5,
               label=f"hottest: cell {data.hottest}, {data.peak[h]:.2f} degC")
    for g in np.unique(data.group):
        members = data.group == g
        pad = 0.42
        ax.add_patch(_box(data.x[members], data.y[members], pad))
    if len(data.path):
        p = data.path - 1
        ax.plot(data.x[p], data.y[p], color="C9", lw=1.0, alpha=0.8, zorder=2, label="coolant path")
        ax.annotate("in", (data.x[p[0]], data.y[p[0]]), xytext=(-14, 8), textcoords="offset points", color="C9",
                    fontsize=8)
        ax.annotate("out", (data.x[p[-1]], data.y[p[-1]]), xytext=(-16, -12), textcoords="offset points",
                    color="C9", fontsize=8)
    ax.set_aspect("equal")
    ax.set_title(f"peak temperature of each cell over the mission (the peaks span {np.ptp(data.peak):.2f} K); "
                 "boxes: parallel groups", fontsize=9)
    ax.set_xticks([])
    ax.set_yticks([])
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.02), ncol=2, fontsize=7, frameon=False, markerscale=0.35)
    ax.margins(0.06)
    return fig


def _box(x: np.ndarray, y: np.ndarray, pad: float):
    """A dashed rectangle around a group's cells."""
    from matplotlib.patches import Rectangle

    return Rectangle((x.min() - pad, y.min() - pad), np.ptp(x) + 2 * pad, np.ptp(y) + 2 * pad, fill=False,
                     edgecolor="0.55", linestyle="--", linewidth=0.6, zorder=1)
