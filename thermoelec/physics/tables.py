"""Tables: piecewise-linear and bilinear interpolation, held constant beyond the end points.

One implementation for every table of the package: the cell's OCV, entropic and
resistance tables, the air properties, the ambient profile. Each function reads
its grid and values at an offset of an array (``*_at``), so the engine's kernels
read tables in place inside their flat parameter vector (a slice would make a
new array view, with its reference count, at every call); the plain forms take
whole arrays. All are ``register_jitable``: plain Python on numpy arrays, and
compiled into the engine's numba kernels unchanged.

The rules are those of the scenario format: tables are piecewise-linear in SoC
and bilinear in SoC and temperature, held at their edge values outside the grid.
"""

from __future__ import annotations

import numpy as np

from thermoelec.jit import register_jitable

__all__ = ["bilinear_at", "bracket", "bracket_at", "interpolate_1d", "interpolate_1d_at", "interpolate_2d"]

#: Grids up to this many points are scanned, longer ones (an ambient profile) bisected.
SCAN_LIMIT = 32


@register_jitable
def bracket_at(grid: np.ndarray, start: int, n: int, x: float) -> tuple[int, float]:
    """Index and weight of ``x`` in the sorted grid ``grid[start:start + n]``, clamped at the ends.

    Parameters
    ----------
    grid : array of float
        Holds the strictly increasing break points at ``start .. start + n - 1``
        [any unit]; one point means a constant.
    start : int
        Offset of the first break point [-].
    n : int
        Number of break points [-], >= 1.
    x : float
        Query point [unit of the grid].

    Returns
    -------
    index : int
        ``i`` with ``grid[start + i] <= x <= grid[start + i + 1]`` (0 for a one-point grid) [-].
    weight : float
        Linear weight of break point ``i + 1``, in 0..1 [-]; beyond the end points
        the value is held (weight 0 or 1).

    Examples
    --------
    >>> index, weight = bracket_at(np.array([9.0, 0.0, 1.0, 3.0]), 1, 3, 2.0)
    >>> index, float(weight)
    (1, 0.5)
    """
    if n == 1 or x <= grid[start]:
        return 0, 0.0
    if x >= grid[start + n - 1]:
        return n - 2, 1.0
    if n <= SCAN_LIMIT:
        i = 0
        while grid[start + i + 1] <= x:
            i += 1
    else:  # bisection: grid[start + lo] <= x < grid[start + hi]
        lo, hi = 0, n - 1
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if grid[start + mid] <= x:
                lo = mid
            else:
                hi = mid
        i = lo
    return i, (x - grid[start + i]) / (grid[start + i + 1] - grid[start + i])


@register_jitable
def bracket(grid: np.ndarray, x: float) -> tuple[int, float]:
    """Index and weight of ``x`` in a whole sorted grid, clamped at the ends (:func:`bracket_at`).

    Parameters
    ----------
    grid : array of float
        Strictly increasing break points [any unit].
    x : float
        Query point [unit of ``grid``].

    Returns
    -------
    index : int
        ``i`` with ``grid[i] <= x <= grid[i + 1]`` [-].
    weight : float
        Linear weight of break point ``i + 1``, in 0..1 [-].

    Examples
    --------
    >>> index, weight = bracket(np.array([0.0, 1.0, 3.0]), 2.0)
    >>> index, float(weight)
    (1, 0.5)
    """
    return bracket_at(grid, 0, grid.shape[0], x)


@register_jitable
def interpolate_1d_at(grid: np.ndarray, grid_start: int, values: np.ndarray, values_start: int, n: int,
                      x: float) -> float:
    """Piecewise-linear interpolation of a table read in place.

    Parameters
    ----------
    grid : array of float
        Holds ``n`` strictly increasing break points from ``grid_start`` [any unit].
    grid_start : int
        Offset of the first break point [-].
    values : array of float
        Holds the ``n`` values from ``values_start`` [any unit] (may be ``grid`` itself).
    values_start : int
        Offset of the first value [-].
    n : int
        Number of break points [-].
    x : float
        Query point [unit of the grid].

    Returns
    -------
    float
        Interpolated value [unit of the values], held beyond the end points.
    """
    i, w = bracket_at(grid, grid_start, n, x)
    if n == 1:
        return values[values_start]
    return values[values_start + i] * (1.0 - w) + values[values_start + i + 1] * w


@register_jitable
def interpolate_1d(grid: np.ndarray, values: np.ndarray, x: float) -> float:
    """Piecewise-linear interpolation held constant beyond the end points.

    Parameters
    ----------
    grid : array of float
        Strictly increasing break points [any unit].
    values : array of float
        Values at the break points [any unit].
    x : float
        Query point [unit of ``grid``].

    Returns
    -------
    float
        Interpolated value [unit of ``values``].

    Examples
    --------
    >>> float(interpolate_1d(np.array([0.0, 1.0]), np.array([3.0, 4.0]), 0.25))
    3.25
    >>> float(interpolate_1d(np.array([0.0, 1.0]), np.array([3.0, 4.0]), 7.0))
    4.0
    """
    return interpolate_1d_at(grid, 0, values, 0, grid.shape[0], x)


@register_jitable
def bilinear_at(soc_grid: np.ndarray, soc_start: int, temperature_grid: np.ndarray, temperature_start: int,
                values: np.ndarray, values_start: int, nz: int, nt: int, soc: float, temperature: float) -> float:
    """Bilinear interpolation over SoC and temperature of a table read in place, clamped at the edges.

    Parameters
    ----------
    soc_grid : array of float
        Holds the ``nz`` strictly increasing SoC break points [-] from ``soc_start``.
    soc_start : int
        Offset of the first SoC break point [-].
    temperature_grid : array of float
        Holds the ``nt`` strictly increasing temperatures [K] from ``temperature_start``.
    temperature_start : int
        Offset of the first temperature [-].
    values : array of float
        Row-major table from ``values_start``, one row of ``nz`` values per temperature [any unit]
        (the three arrays may be one).
    values_start : int
        Offset of the table [-].
    nz, nt : int
        Grid sizes [-]; ``nt = 1`` for a table over SoC only.
    soc : float
        State of charge [-].
    temperature : float
        Temperature [K].

    Returns
    -------
    float
        Interpolated value [unit of the values].
    """
    i, wz = bracket_at(soc_grid, soc_start, nz, soc)
    j, wt = bracket_at(temperature_grid, temperature_start, nt, temperature)
    i1 = i + 1 if nz > 1 else i
    j1 = j + 1 if nt > 1 else j
    low = values[values_start + j * nz + i] * (1.0 - wz) + values[values_start + j * nz + i1] * wz
    high = values[values_start + j1 * nz + i] * (1.0 - wz) + values[values_start + j1 * nz + i1] * wz
    return low * (1.0 - wt) + high * wt


@register_jitable
def interpolate_2d(
    soc_grid: np.ndarray,
    temperature_grid: np.ndarray,
    values: np.ndarray,
    soc: float,
    temperature: float,
) -> float:
    """Bilinear interpolation over SoC and temperature, clamped at the edges.

    Parameters
    ----------
    soc_grid : array of float, shape (nz,)
        Strictly increasing SoC break points [-].
    temperature_grid : array of float, shape (nt,)
        Strictly increasing temperatures [K]; one point for a table over SoC only.
    values : array of float, shape (nt * nz,)
        Row-major table, one row of ``nz`` values per temperature [any unit].
    soc : float
        State of charge [-].
    temperature : float
        Temperature [K].

    Returns
    -------
    float
        Interpolated value [unit of ``values``].

    Examples
    --------
    >>> float(interpolate_2d(np.array([0.0, 1.0]), np.array([273.15, 298.15]),
    ...                      np.array([4.0, 2.0, 2.0, 1.0]), 0.5, 285.65))
    2.25
    """
    return bilinear_at(soc_grid, 0, temperature_grid, 0, values, 0, soc_grid.shape[0], temperature_grid.shape[0],
                       soc, temperature)
