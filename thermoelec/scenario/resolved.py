"""A resolved pack from the scenario: its layout, the spread drawn with its seed, the overrides, each cell's paths.

Owns :func:`resolved_pack`, which turns ``[pack]`` with ``model = "resolved"``
(``[pack.layout]``, ``[pack.spread]``, ``[pack.thermal]``, ``[[pack.cell]]``)
into the engine's :class:`thermoelec.physics.pack.ResolvedPack`. Cells are
numbered from 1 in the file and from 0 here, group by group.

The spread's draws come in a fixed order from one generator seeded with
``pack.spread.seed`` (capacity for every cell, then R0, then each RC pair of
every cell, cell by cell), so a scenario with its seed is one reproducible build
and a sweep over the seed a Monte Carlo of builds. A zero spread draws nothing.

Imports the schema of :mod:`thermoelec.scenario`, :mod:`thermoelec.inputs` and
:mod:`thermoelec.physics`; never the building or loading modules (they call this
one) nor the layers above.
"""

from __future__ import annotations

import numpy as np

from thermoelec.inputs.errors import ScenarioError
from thermoelec.physics.pack import (
    PackLayout,
    ResolvedPack,
    grid_neighbours,
    grid_positions,
    grid_wall,
    serpentine_order,
    spread_factors,
)
from thermoelec.scenario.schema import LayoutSpec, PackThermalSpec, ScenarioSpec, SpreadSpec

__all__ = ["resolved_pack"]


def resolved_pack(spec: ScenarioSpec, source: str) -> ResolvedPack | None:
    """The cells of a resolved pack, or None for the lumped pack (``pack.model = "lumped"``).

    Parameters
    ----------
    spec : ScenarioSpec
        The validated scenario (SI values).
    source : str
        The scenario file, for the messages.

    Returns
    -------
    ResolvedPack or None
        Per cell its factors, initial SoC and thermal paths [SI].

    Raises
    ------
    ScenarioError
        For a cell's coolant segment given to a cell off the coolant path.
    """
    pk = spec.pack
    if pk.model != "resolved":
        return None
    n, n_rc = pk.series * pk.parallel, len(spec.cell.rc)
    layout = _layout(pk.layout, pk.series, pk.parallel)
    spread = pk.spread or SpreadSpec()
    rng = np.random.default_rng(spread.seed)
    capacity = spread_factors(n, spread.capacity, rng, spread.truncation)
    r0 = spread_factors(n, spread.r0, rng, spread.truncation)
    rc = spread_factors(n * n_rc, spread.rc, rng, spread.truncation).reshape(n, n_rc)
    paths = pk.thermal or PackThermalSpec()
    order = _coolant_order(paths.coolant_order, layout)
    sink, ambient, plate = _paths(spec, paths, layout, order)
    tab = np.zeros(n)
    soc = np.full(n, spec.cell.initial_soc)
    for k, override in enumerate(pk.cell):
        i = override.cell - 1
        capacity[i] *= override.capacity_factor
        r0[i] *= override.r0_factor
        rc[i] *= override.rc_factor
        tab[i] = override.tab_resistance
        for given, values in ((override.initial_soc, soc), (override.cell_to_sink, sink),
                              (override.cell_to_ambient, ambient)):
            if given is not None:
                values[i] = given
        if override.plate_conductance is not None:
            if i not in set(order.tolist()):
                raise ScenarioError(source, f"pack.cell[{k + 1}].plate_conductance",
                                    f"cell {override.cell} is not on the coolant path (pack.thermal.coolant_order)")
            plate[i] = override.plate_conductance
    return ResolvedPack(
        series=pk.series, parallel=pk.parallel, capacity_factor=capacity, r0_factor=r0, rc_factor=rc,
        tab_resistance=tab, initial_soc=soc, heat_capacity=np.full(n, spec.cell.mass * spec.cell.specific_heat),
        cell_to_sink=sink, cell_to_ambient=ambient,
        neighbour_conductance=np.full(len(layout.neighbours), paths.neighbour_conductance),
        coolant_order=order, plate_conductance=plate, layout=layout,
        seed=spread.seed if pk.spread is not None else None,
    )


def _layout(spec: LayoutSpec | None, series: int, parallel: int) -> PackLayout:
    """The layout: a grid (default ``series`` rows of ``parallel`` cells, one group a row) or a list."""
    if spec is None or spec.rows is not None:
        rows, columns, fill = (series, parallel, "rows") if spec is None else (spec.rows, spec.columns, spec.fill)
        positions = grid_positions(rows, columns, fill)
        return PackLayout(positions.astype(float), grid_neighbours(positions), grid_wall(positions), (rows, columns))
    n = series * parallel
    pairs = np.array(sorted({(min(a, b) - 1, max(a, b) - 1) for a, b in spec.neighbours}), dtype=np.int64)
    wall = np.zeros(n, dtype=bool)
    wall[[c - 1 for c in spec.wall]] = True
    positions = np.array(spec.positions, float) if spec.positions is not None else np.column_stack(
        [np.zeros(n), np.arange(n, dtype=float)])
    return PackLayout(positions, pairs.reshape(-1, 2), wall, None)


def _coolant_order(order, layout: PackLayout) -> np.ndarray:
    """The cells along the coolant path (from 0): a serpentine along the grid's rows or columns, or as given."""
    if order is None:
        return np.zeros(0, dtype=np.int64)
    if isinstance(order, str):
        return serpentine_order(layout.positions.astype(np.int64), order)
    return np.array(order, dtype=np.int64) - 1


def _paths(spec: ScenarioSpec, paths: PackThermalSpec, layout: PackLayout, order: np.ndarray
           ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each cell's conductance to the sink, to ambient (its wall's added) and to the coolant [W/K].

    By default an equal share of the pack's ``cell_to_sink`` and ``cell_to_ambient``, and of the
    plate's conductance among the cells on the coolant path.
    """
    n = len(layout.wall)
    thermal = spec.thermal
    sink = np.full(n, thermal.cell_to_sink / n if paths.cell_to_sink is None else paths.cell_to_sink)
    ambient = np.full(n, thermal.cell_to_ambient / n if paths.cell_to_ambient is None else paths.cell_to_ambient)
    ambient = ambient + paths.wall_to_ambient * layout.wall
    plate = np.zeros(n)
    if len(order):
        plate_total = thermal.coolant.plate_conductance or 0.0
        plate[order] = plate_total / len(order) if paths.plate_conductance is None else paths.plate_conductance
    return sink, ambient, plate
