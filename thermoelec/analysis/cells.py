"""Results of a resolved pack: the series of every cell, where the cells sit, and what the pack's summary adds.

Owns :data:`CELL_SERIES_UNITS` (the per-cell series of ``timeseries.nc``, dimensions
``time x cell``), :data:`PACK_SERIES_UNITS` (the pack-level series a resolved pack
adds: the coldest and mean cell temperature, the SoC range, the highest cell
voltage, the largest current share), :func:`cell_series`, :func:`cell_coordinates`
(each cell's number, group, place in its group and position), :func:`row_extremes`
(the resolved part of the running extremes, over the output rows) and
:func:`pack_summary` (the hottest cell and where it sits, the largest cell-to-cell
temperature difference and when, the SoC spread at the end, the largest current
share, the first cell to reach a limit). Cells are numbered from 1 in every output.

Imports from engine/ and physics/ only; the results module calls it for a
resolved pack. Never from output/, fit/, the API or the command line.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from thermoelec.engine import layout as L
from thermoelec.engine.driver import Trajectory
from thermoelec.engine.events import EVENT_NAMES, STOP_EVENTS
from thermoelec.engine.problem import Problem
from thermoelec.engine.resolved import CELL_VALUES
from thermoelec.physics.constants import ZERO_CELSIUS

__all__ = ["CELL_SERIES_UNITS", "PACK_SERIES_UNITS", "cell_coordinates", "cell_series", "pack_series",
           "pack_summary", "row_extremes", "stop_event"]

#: Per-cell series (dimensions ``time x cell``): unit and meaning.
CELL_SERIES_UNITS: dict[str, tuple[str, str]] = {
    "cells_temperature_degC": ("degC", "temperature of each cell"),
    "cells_soc": ("1", "state of charge of each cell"),
    "cells_current_A": ("A", "current of each cell, positive discharging"),
    "cells_heat_W": ("W", "heat generated in each cell (irreversible + reversible, its tab included)"),
    "cells_voltage_V": ("V", "terminal voltage of each cell (its group's)"),
    "cells_ocv_V": ("V", "open-circuit voltage of each cell"),
    "cells_resistance_ohm": ("ohm", "series resistance of each cell (its tab included)"),
    "cells_coolant_temperature_degC": ("degC", "coolant temperature where it reaches the cell (the inlet off the "
                                               "coolant path)"),
    "cells_heat_to_coolant_W": ("W", "heat from each cell into the coolant"),
}
#: Pack-level series a resolved pack adds to the output contract's: unit and meaning.
PACK_SERIES_UNITS: dict[str, tuple[str, str]] = {
    "cell_temperature_mean_degC": ("degC", "mean temperature of the cells"),
    "cell_temperature_min_degC": ("degC", "temperature of the coldest cell"),
    "soc_min": ("1", "lowest state of charge of a cell"),
    "soc_max": ("1", "highest state of charge of a cell"),
    "cell_voltage_max_V": ("V", "highest cell terminal voltage"),
    "current_share_max": ("1", "largest cell current over its group's mean (NaN below C/5 per cell)"),
}
#: Where each per-cell value comes from in the engine's work block (:data:`thermoelec.engine.resolved.CELL_VALUES`).
_FROM_WORK = {"cells_current_A": L.W_CURRENT, "cells_heat_W": L.W_HEAT, "cells_voltage_V": L.W_VOLTAGE,
              "cells_ocv_V": L.W_OCV, "cells_resistance_ohm": L.W_RESISTANCE,
              "cells_coolant_temperature_degC": L.W_COOLANT, "cells_heat_to_coolant_W": L.W_TO_COOLANT}


def cell_series(problem: Problem, trajectory: Trajectory) -> dict[str, np.ndarray]:
    """Every cell's series at the output rows: shape ``(rows, cells)`` each, units of :data:`CELL_SERIES_UNITS`."""
    soc, temperature = L.cell_state_indices(problem.n_rc, problem.n_cells)
    values = trajectory.cell_values()
    out = {"cells_temperature_degC": trajectory.states[:, temperature] - ZERO_CELSIUS,
           "cells_soc": trajectory.states[:, soc]}
    for name, slot in _FROM_WORK.items():
        out[name] = values[:, :, CELL_VALUES.index(slot)]
    out["cells_coolant_temperature_degC"] = out["cells_coolant_temperature_degC"] - ZERO_CELSIUS
    return {name: out[name] for name in CELL_SERIES_UNITS}


def pack_series(alg: np.ndarray) -> dict[str, np.ndarray]:
    """The pack-level series of :data:`PACK_SERIES_UNITS` from the algebraic outputs of the rows."""
    share = alg[:, L.A_CURRENT_SHARE].copy()
    share[share <= 0.0] = np.nan
    return {
        "cell_temperature_mean_degC": alg[:, L.A_TEMPERATURE_MEAN] - ZERO_CELSIUS,
        "cell_temperature_min_degC": alg[:, L.A_TEMPERATURE_LOW] - ZERO_CELSIUS,
        "soc_min": alg[:, L.A_SOC_LOW],
        "soc_max": alg[:, L.A_SOC_HIGH],
        "cell_voltage_max_V": alg[:, L.A_CELL_VOLTAGE_HIGH],
        "current_share_max": share,
    }


def cell_coordinates(problem: Problem) -> dict[str, tuple[str, np.ndarray, dict[str, str]]]:
    """Coordinates of the ``cell`` dimension: number, group, place in the group (from 1), position, wall, coolant."""
    rp = problem.resolved
    grid = rp.layout.grid is not None
    where = rp.layout.positions + (1.0 if grid else 0.0)
    first, second = ("row", "column") if grid else ("x", "y")
    unit = "1" if grid else "as in the scenario file"
    station = np.zeros(rp.n_cells, dtype=np.int64)
    station[rp.coolant_order] = np.arange(1, len(rp.coolant_order) + 1)
    return {
        "cell": ("cell", np.arange(1, rp.n_cells + 1), {"long_name": "cell number, group by group, from 1"}),
        "group": ("cell", rp.group + 1, {"long_name": "parallel group of the cell, from 1"}),
        "member": ("cell", rp.member + 1, {"long_name": "place of the cell in its group, from 1"}),
        first: ("cell", where[:, 0], {"units": unit, "long_name": f"{first} of the cell in the pack's layout"}),
        second: ("cell", where[:, 1], {"units": unit, "long_name": f"{second} of the cell in the pack's layout"}),
        "wall": ("cell", rp.layout.wall.astype(np.int8), {"long_name": "1 for a cell next to the housing wall"}),
        "coolant_station": ("cell", station, {"long_name": "place of the cell along the coolant's path, from 1 "
                                                            "at the inlet (0: off the path)"}),
    }


def row_extremes(series: dict[str, np.ndarray], cells: dict[str, np.ndarray]) -> dict[str, float]:
    """The resolved pack's running extremes over the output rows (fields of ``metrics.Extremes``)."""
    times = series["time_s"]
    hot = cells["cells_temperature_degC"]
    spread = hot.max(axis=1) - hot.min(axis=1)
    peak_row, peak_cell = np.unravel_index(np.argmax(hot), hot.shape)
    share = series["current_share_max"]
    return {
        "cell_temperature_spread_max": float(spread.max()),
        "cell_temperature_spread_time": float(times[np.argmax(spread)]),
        "current_share_max": float(np.nanmax(share)) if np.isfinite(share).any() else 0.0,
        "hottest_cell": float(peak_cell),
        "hottest_time": float(times[peak_row]),
    }


#: Names of the events that stop a mission (a limit).
_STOPS = frozenset(EVENT_NAMES[k] for k in STOP_EVENTS)


def stop_event(trajectory: Trajectory) -> dict[str, Any] | None:
    """The event of a cell limit that stopped the mission (it names the cell, from 0), None when none did."""
    return next((e for e in trajectory.events if e["event"] in _STOPS and "cell" in e), None)


def _where(problem: Problem, cell: int) -> dict[str, Any]:
    """Group, place in the group and position (from 1 on a grid) of cell ``cell`` (from 0)."""
    rp = problem.resolved
    position = rp.layout.positions[cell] + (1.0 if rp.layout.grid is not None else 0.0)
    return {"group": int(rp.group[cell]) + 1, "member": int(rp.member[cell]) + 1,
            "position": [float(x) for x in position]}


def pack_summary(problem: Problem, trajectory: Trajectory, shared: dict[str, Any], series: dict[str, np.ndarray],
                 cells: dict[str, np.ndarray]) -> dict[str, Any]:
    """What a resolved pack adds to the summary: the hottest cell and where, the spreads, the first cell at a limit.

    ``shared`` holds the metrics of :func:`thermoelec.analysis.metrics.mission_metrics`
    (its :data:`~thermoelec.analysis.metrics.PACK_METRICS` among them).
    """
    times = series["time_s"]
    hottest = shared["hottest_cell"] - 1
    share = series["current_share_max"]
    share_row = int(np.nanargmax(share)) if np.isfinite(share).any() else None
    cell_currents = cells["cells_current_A"]
    share_cell = None
    if share_row is not None:
        mean = series["current_A"][share_row] / problem.resolved.parallel
        share_cell = int(np.argmax(cell_currents[share_row] / mean)) + 1
    stop = stop_event(trajectory)
    soc_end = cells["cells_soc"][-1]
    return {
        "pack_model": "resolved",
        "cells": problem.n_cells,
        "hottest_cell": shared["hottest_cell"],
        **{f"hottest_cell_{k}": v for k, v in _where(problem, hottest).items()},
        "hottest_cell_temperature_max_degC": shared["cell_temperature_max_degC"],
        "hottest_cell_time_s": shared["hottest_cell_time_s"],
        "cell_temperature_mean_max_degC": float(series["cell_temperature_mean_degC"].max()),
        "cell_temperature_spread_max_K": shared["cell_temperature_spread_max_K"],
        "cell_temperature_spread_time_s": shared["cell_temperature_spread_time_s"],
        "soc_spread_end": shared["soc_spread_end"],
        "soc_min_end": float(soc_end.min()),
        "soc_max_end": float(soc_end.max()),
        "current_share_max": shared["current_share_max"],
        "current_share_max_cell": share_cell,
        "current_share_max_time_s": None if share_row is None else float(times[share_row]),
        "first_limit_cell": shared["first_limit_cell"],
        "first_limit_event": None if stop is None else stop["event"],
        "first_limit_group": None if stop is None else int(problem.resolved.group[stop["cell"]]) + 1,
        "first_limit_time_s": None if stop is None else float(stop["time_s"]),
    }
