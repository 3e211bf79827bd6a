"""A pack resolved cell by cell: parallel groups by Kirchhoff's laws, cell-to-cell spread, the pack's thermal network.

Electrical: ``series`` groups of ``parallel`` cells. Inside a group the cells sit
at one terminal voltage ``V_g``; cell ``i`` is a source ``E_i`` (its OCV minus
its RC voltages) behind its series resistance ``R_i``. Kirchhoff's current law
over the group carrying ``I`` and the branch law ``I_i = (E_i - V_g) / R_i`` give
in closed form (circuit theory, common practice)::

    V_g = (sum E_i / R_i - I) / sum 1 / R_i,     I_i = (E_i - V_g) / R_i

so the group is a Thevenin source ``E_g = sum(E_i / R_i) / sum(1 / R_i)`` behind
``R_g = 1 / sum(1 / R_i)`` (Millman's theorem), and the series string a source
``E = sum E_g`` behind ``R = sum R_g + R_ic``: the load modes of
:mod:`thermoelec.physics.loads` keep their closed forms on ``E`` and ``R``.

Spread: relative factors on capacity and resistances, normal with a seed and
truncated (:func:`spread_factors`, ``scipy.stats.truncnorm``), times explicit
per-cell overrides.

Thermal: each cell is a lumped node with its own paths (to the sink node, to
ambient, to its neighbours, to a coolant flowing past it). Neighbours come from a
layout (:func:`grid_neighbours`); a coolant ordered along the cells warms on its
way, each cell a segment at uniform surface temperature with the effectiveness
of :func:`thermoelec.physics.thermal.coolant_effectiveness` (:func:`coolant_segment_heat`).

Cells are numbered from 0 here, group by group: cell ``n`` is member
``n % parallel`` of group ``n // parallel`` (the scenario format counts from 1).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from thermoelec.jit import register_jitable

__all__ = [
    "SHARE_MIN_C_RATE",
    "SPREAD_TRUNCATION",
    "PackLayout",
    "ResolvedPack",
    "branch_current",
    "coolant_segment_heat",
    "grid_neighbours",
    "grid_positions",
    "grid_wall",
    "group_thevenin",
    "group_voltage",
    "parallel_currents",
    "series_thevenin",
    "serpentine_order",
    "spread_factors",
]

#: A cell's current share (its current over its group's mean, ``I_i Np / I``) is counted where the
#: group's mean cell current is at least this C-rate [1/h], C/5: below it the balancing currents
#: between the cells of a group (which flow at rest too, where the share has no meaning) dominate
#: the ratio, not the way the load divides (a choice of ours).
SHARE_MIN_C_RATE = 0.2
#: Default truncation of the spread's normal distribution, in standard deviations
#: (common practice for build tolerances: a cell outside three sigma fails incoming inspection).
SPREAD_TRUNCATION = 3.0


@register_jitable
def group_thevenin(weighted_emf: float, conductance: float) -> tuple[float, float]:
    """Thevenin source and resistance of a parallel group (Millman's theorem).

    ``E_g = sum(E_i / R_i) / sum(1 / R_i)``, ``R_g = 1 / sum(1 / R_i)``.

    Parameters
    ----------
    weighted_emf : float
        ``sum E_i / R_i`` over the group's cells [A].
    conductance : float
        ``sum 1 / R_i`` over the group's cells [S], > 0.

    Returns
    -------
    emf : float
        The group's source voltage ``E_g`` [V].
    resistance : float
        The group's resistance ``R_g`` [Ω].

    References
    ----------
    J. Millman, "A useful network theorem", Proc. IRE 28 (1940) 413; Kirchhoff's laws
    (common practice).

    Examples
    --------
    Two cells of 4.00 V and 3.99 V behind 20 mΩ each:

    >>> e, r = group_thevenin(4.00 / 0.02 + 3.99 / 0.02, 2 / 0.02)
    >>> round(e, 6), round(r, 6)
    (3.995, 0.01)
    """
    return weighted_emf / conductance, 1.0 / conductance


@register_jitable
def group_voltage(weighted_emf: float, conductance: float, current: float) -> float:
    """Terminal voltage of a parallel group carrying ``current``: ``V_g = (sum E_i/R_i - I) / sum 1/R_i``.

    Parameters
    ----------
    weighted_emf : float
        ``sum E_i / R_i`` over the group's cells [A].
    conductance : float
        ``sum 1 / R_i`` over the group's cells [S], > 0.
    current : float
        Current through the group, > 0 discharging [A].

    Returns
    -------
    float
        The group's terminal voltage [V].

    References
    ----------
    Kirchhoff's current law over the group's node (common practice).

    Examples
    --------
    Check values of the project (VALIDATION.md §7): 4.00 V and 3.99 V behind
    20 mΩ each, 10 A:

    >>> round(group_voltage(4.00 / 0.02 + 3.99 / 0.02, 2 / 0.02, 10.0), 6)
    3.895
    """
    return (weighted_emf - current) / conductance


@register_jitable
def branch_current(emf: float, resistance: float, voltage: float) -> float:
    """Current of one cell of a parallel group: ``I_i = (E_i - V_g) / R_i``.

    Parameters
    ----------
    emf : float
        The cell's source voltage (OCV minus its RC voltages) [V].
    resistance : float
        The cell's series resistance [Ω], > 0.
    voltage : float
        The group's terminal voltage [V].

    Returns
    -------
    float
        The cell's current, > 0 discharging [A].

    References
    ----------
    Ohm's law on the cell's branch (common practice).

    Examples
    --------
    >>> round(branch_current(4.00, 0.02, 3.895), 6)
    5.25
    """
    return (emf - voltage) / resistance


def parallel_currents(emf, resistance, current: float) -> tuple[float, np.ndarray]:
    """Terminal voltage and cell currents of one parallel group carrying ``current``.

    Parameters
    ----------
    emf : array of float, shape (n,)
        Source voltage of each cell [V].
    resistance : array of float, shape (n,)
        Series resistance of each cell [Ω], > 0.
    current : float
        Current through the group, > 0 discharging [A].

    Returns
    -------
    voltage : float
        The group's terminal voltage [V].
    currents : float64 array, shape (n,)
        Each cell's current [A]; they sum to ``current``.

    References
    ----------
    Kirchhoff's laws (common practice); :func:`group_voltage`, :func:`branch_current`.

    Examples
    --------
    Equal sources, 10 mΩ and 20 mΩ, 30 A: the current splits 2:1.

    >>> v, i = parallel_currents([3.7, 3.7], [0.010, 0.020], 30.0)
    >>> [round(float(x), 9) for x in i]
    [20.0, 10.0]
    """
    e = np.asarray(emf, dtype=float)
    r = np.asarray(resistance, dtype=float)
    v = group_voltage(float(np.sum(e / r)), float(np.sum(1.0 / r)), current)
    return v, (e - v) / r


def series_thevenin(emfs, resistances, interconnect_resistance: float = 0.0) -> tuple[float, float]:
    """Thevenin source and resistance of groups in series: ``E = sum E_g``, ``R = sum R_g + R_ic``.

    Parameters
    ----------
    emfs : array of float, shape (series,)
        Source voltage of each group [V].
    resistances : array of float, shape (series,)
        Resistance of each group [Ω].
    interconnect_resistance : float
        Resistance of the connections between them [Ω].

    Returns
    -------
    emf : float
        The pack's source voltage [V].
    resistance : float
        The pack's series resistance [Ω].

    References
    ----------
    Kirchhoff's voltage law around the string (common practice).

    Examples
    --------
    >>> series_thevenin([3.995, 3.7], [0.01, 0.005], 0.002)
    (7.695, 0.017)
    """
    return float(np.sum(emfs)), float(np.sum(resistances) + interconnect_resistance)


def spread_factors(n: int, relative_std: float, rng: np.random.Generator,
                   truncation: float = SPREAD_TRUNCATION) -> np.ndarray:
    """Relative factors of a cell property: normal about 1, truncated at ``truncation`` standard deviations.

    ``f ~ N(1, sigma)`` restricted to ``1 +- truncation sigma`` (a truncated normal,
    ``scipy.stats.truncnorm``); ``sigma = 0`` gives ones and draws nothing, so the
    generator's later draws do not depend on which spreads are zero.

    Parameters
    ----------
    n : int
        Number of cells [-].
    relative_std : float
        Standard deviation of the factor before truncation, ``sigma`` [-], >= 0
        and below ``1 / truncation`` (every factor stays positive).
    rng : numpy.random.Generator
        The generator the draws come from (a seeded one makes the build reproducible) [-].
    truncation : float
        Half-width of the allowed range in standard deviations [-], > 0.

    Returns
    -------
    float64 array, shape (n,)
        The factors [-].

    References
    ----------
    N. L. Johnson, S. Kotz, N. Balakrishnan, *Continuous Univariate Distributions*,
    Vol. 1, 2nd ed., Wiley (1994), §10.1 (the truncated normal); the spread of cell
    capacity and resistance within a batch is commonly taken as normal (common practice).

    Examples
    --------
    >>> f = spread_factors(1000, 0.02, np.random.default_rng(1))
    >>> bool(abs(f - 1).max() <= 0.06), round(float(f.std()), 2)
    (True, 0.02)
    """
    if relative_std < 0.0 or truncation <= 0.0:
        raise ValueError("the spread and its truncation must be >= 0 and > 0")
    if relative_std * truncation >= 1.0:
        raise ValueError("the spread times its truncation must stay below 1 (factors must be > 0)")
    if relative_std == 0.0:
        return np.ones(n)
    from scipy.stats import truncnorm

    return truncnorm.rvs(-truncation, truncation, loc=1.0, scale=relative_std, size=n, random_state=rng)


def grid_positions(rows: int, columns: int, fill: str = "rows") -> np.ndarray:
    """Grid positions of the cells, numbered in order along the rows or down the columns.

    Parameters
    ----------
    rows : int
        Rows of the grid [-].
    columns : int
        Columns of the grid [-].
    fill : str
        ``"rows"``: cells 0, 1, ... fill the first row, then the next; ``"columns"``:
        they fill the first column, then the next.

    Returns
    -------
    int64 array, shape (rows * columns, 2)
        Row and column of each cell, from 0 [-].

    Examples
    --------
    >>> grid_positions(2, 3, "columns").tolist()
    [[0, 0], [1, 0], [0, 1], [1, 1], [0, 2], [1, 2]]
    """
    if fill not in ("rows", "columns"):
        raise ValueError(f"fill must be 'rows' or 'columns', got {fill!r}")
    r, c = np.divmod(np.arange(rows * columns), columns) if fill == "rows" else np.divmod(
        np.arange(rows * columns), rows)[::-1]
    return np.column_stack([r, c]).astype(np.int64)


def grid_neighbours(positions: np.ndarray) -> np.ndarray:
    """Pairs of cells that share an edge of the grid (four-neighbourhood).

    Parameters
    ----------
    positions : int array, shape (n, 2)
        Row and column of each cell (:func:`grid_positions`) [-].

    Returns
    -------
    int64 array, shape (m, 2)
        Each neighbouring pair once, the lower cell number first, sorted [-].

    Examples
    --------
    >>> grid_neighbours(grid_positions(2, 2)).tolist()
    [[0, 1], [0, 2], [1, 3], [2, 3]]
    """
    where = {(int(r), int(c)): k for k, (r, c) in enumerate(positions)}
    pairs = set()
    for (r, c), k in where.items():
        for other in ((r + 1, c), (r, c + 1)):
            j = where.get(other)
            if j is not None:
                pairs.add((min(k, j), max(k, j)))
    return np.array(sorted(pairs), dtype=np.int64).reshape(-1, 2)


def grid_wall(positions: np.ndarray) -> np.ndarray:
    """Cells on the outer edge of the grid (next to the housing wall).

    Parameters
    ----------
    positions : int array, shape (n, 2)
        Row and column of each cell [-].

    Returns
    -------
    bool array, shape (n,)
        True for a cell in the first or last row or column [-].

    Examples
    --------
    >>> grid_wall(grid_positions(3, 3)).astype(int).tolist()
    [1, 1, 1, 1, 0, 1, 1, 1, 1]
    """
    r, c = positions[:, 0], positions[:, 1]
    return (r == r.min()) | (r == r.max()) | (c == c.min()) | (c == c.max())


def serpentine_order(positions: np.ndarray, along: str = "rows") -> np.ndarray:
    """The cells in the order a serpentine channel passes them: along each row (or column), turning at its end.

    Parameters
    ----------
    positions : int array, shape (n, 2)
        Row and column of each cell [-].
    along : str
        ``"rows"``: the first row left to right, the second right to left, ...;
        ``"columns"``: the first column top to bottom, the next bottom to top, ...

    Returns
    -------
    int64 array, shape (n,)
        Cell numbers in flow order [-].

    Examples
    --------
    >>> serpentine_order(grid_positions(2, 3), "rows").tolist()
    [0, 1, 2, 5, 4, 3]
    """
    if along not in ("rows", "columns"):
        raise ValueError(f"along must be 'rows' or 'columns', got {along!r}")
    major, minor = (positions[:, 0], positions[:, 1]) if along == "rows" else (positions[:, 1], positions[:, 0])
    rank = np.unique(major, return_inverse=True)[1]
    key = np.where(rank % 2 == 0, minor, -minor)
    return np.lexsort((key, major)).astype(np.int64)


@register_jitable
def coolant_segment_heat(effectiveness: float, capacity_rate: float, surface_temperature: float,
                         coolant_temperature: float) -> float:
    """Heat a coolant picks up along one cell's segment of its path [W].

    The segment is a channel along a surface at uniform temperature:
    ``q = eps m c_p (T_s - T_c)``, and the coolant leaves it at
    ``T_c + q / (m c_p)``; ``eps = 1 - exp(-UA / (m c_p))`` is the segment's
    effectiveness (:func:`thermoelec.physics.thermal.coolant_effectiveness`). Along
    a path of segments the outlet is the inlet plus the heat picked up over
    ``m c_p``, whatever the effectiveness of each.

    Parameters
    ----------
    effectiveness : float
        Effectiveness of the segment ``eps`` [-], 0..1.
    capacity_rate : float
        Coolant heat capacity rate ``m c_p`` [W/K], >= 0.
    surface_temperature : float
        Temperature of the cell over the segment [K].
    coolant_temperature : float
        Coolant temperature entering the segment [K].

    Returns
    -------
    float
        Heat from the cell into the coolant [W].

    References
    ----------
    Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., Eq. 8.42b
    (constant surface temperature), applied segment by segment.

    Examples
    --------
    Check value of the project (VALIDATION.md §7): 200 W picked up by 0.02 kg/s of a
    coolant with 3600 J/(kg K) warms it by 2.7778 K, here over two segments:

    >>> mcp = 0.02 * 3600.0
    >>> inlet = 293.15
    >>> first = coolant_segment_heat(0.5, mcp, inlet + 100 / 36, inlet)  # 100 W, eps 0.5
    >>> middle = inlet + first / mcp
    >>> second = coolant_segment_heat(0.25, mcp, middle + 100 / 18, middle)  # 100 W, eps 0.25
    >>> round(first, 9), round(second, 9), round(middle + second / mcp - inlet, 4)
    (100.0, 100.0, 2.7778)
    """
    return effectiveness * capacity_rate * (surface_temperature - coolant_temperature)


@dataclass(frozen=True)
class PackLayout:
    """Where the cells sit and which touch: positions, neighbouring pairs, cells at the housing wall.

    Attributes
    ----------
    positions : float64 array, shape (n, 2)
        Row and column of each cell on a grid, or given coordinates; for the pack map [-].
    neighbours : int64 array, shape (m, 2)
        Pairs of cells that conduct heat to each other (numbered from 0) [-].
    wall : bool array, shape (n,)
        Cells next to the housing wall [-].
    grid : tuple of int or None
        Rows and columns when the layout is a grid [-].
    """

    positions: np.ndarray
    neighbours: np.ndarray
    wall: np.ndarray
    grid: tuple[int, int] | None = None


@dataclass(frozen=True)
class ResolvedPack:
    """Every cell of a ``series x parallel`` pack with its own factors and thermal paths (SI units).

    Cells are numbered from 0, group by group (cell ``n`` is member ``n % parallel``
    of group ``n // parallel``). Each array has one entry per cell.

    Attributes
    ----------
    series, parallel : int
        Groups in series and cells per group [-].
    capacity_factor : float64 array, shape (n,)
        Capacity relative to the nominal cell [-].
    r0_factor : float64 array, shape (n,)
        Series resistance relative to the nominal cell's law [-].
    rc_factor : float64 array, shape (n, n_rc)
        Each RC pair's resistance relative to the nominal law; its capacitance
        stays the nominal cell's [-].
    tab_resistance : float64 array, shape (n,)
        Resistance added in the cell's branch (a tab, a weld); its heat goes to the cell [Ω].
    initial_soc : float64 array, shape (n,)
        State of charge at the start [-].
    heat_capacity : float64 array, shape (n,)
        Heat capacity of each cell [J/K].
    cell_to_sink : float64 array, shape (n,)
        Conductance from each cell to the sink node [W/K].
    cell_to_ambient : float64 array, shape (n,)
        Conductance from each cell to ambient (a share of the direct path, plus the wall's) [W/K].
    neighbour_conductance : float64 array, shape (m,)
        Conductance of each pair of ``layout.neighbours`` [W/K].
    coolant_order : int64 array, shape (k,)
        Cells in the order the coolant passes them; empty when the coolant cools the sink node [-].
    plate_conductance : float64 array, shape (n,)
        Conductance from each cell to the coolant over its segment, UA (0 off the path) [W/K].
    layout : PackLayout
        Positions, neighbours and wall cells.
    seed : int or None
        Seed the spread was drawn with (None: no spread).
    """

    series: int
    parallel: int
    capacity_factor: np.ndarray
    r0_factor: np.ndarray
    rc_factor: np.ndarray
    tab_resistance: np.ndarray
    initial_soc: np.ndarray
    heat_capacity: np.ndarray
    cell_to_sink: np.ndarray
    cell_to_ambient: np.ndarray
    neighbour_conductance: np.ndarray
    coolant_order: np.ndarray
    plate_conductance: np.ndarray
    layout: PackLayout
    seed: int | None = None

    @property
    def n_cells(self) -> int:
        """Number of cells, ``series * parallel`` [-]."""
        return self.series * self.parallel

    @property
    def group(self) -> np.ndarray:
        """The group of each cell, from 0 [-]."""
        return np.arange(self.n_cells) // self.parallel

    @property
    def member(self) -> np.ndarray:
        """Each cell's place in its group, from 0 [-]."""
        return np.arange(self.n_cells) % self.parallel
