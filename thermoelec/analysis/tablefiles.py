"""Writers of tables of float columns: CSV as pandas writes it and NetCDF-4 as xarray writes it, without either.

A run writes its time series twice: ``timeseries.csv`` and ``timeseries.nc``. Through
pandas (``DataFrame.to_csv`` with ``float_format="%.9g"``) and xarray (``Dataset.to_netcdf``)
those two files cost more than a short mission's solve: pandas formats each value
with its own call, and building an xarray Dataset imports dask, distributed and pint
(its duck-array checks), a second and a half of a fresh process. The writers here
give the same files:

- :func:`write_csv`: the bytes ``to_csv(path, index=False, float_format="%.9g")``
  writes for float, integer and text columns (an empty field for NaN); any other
  column type goes to pandas itself.
- :func:`write_netcdf`: the NetCDF-4 file ``xarray.Dataset.to_netcdf`` writes through
  its netCDF4 back end for variables given as ``(dims, values, attrs)``: global attributes
  first, dimensions in the order the variables name them, the data variables then the
  coordinates, each contiguous and uncompressed; a float variable with ``_FillValue``
  NaN, an integer one without, text as variable-length strings; a data variable's ``coordinates`` attribute lists,
  sorted, the coordinates off its dimensions that lie along them (CF conventions, as
  xarray's ``conventions._encode_coordinates``). ``tests/analysis/test_tablefiles.py``
  reads both files with xarray and netCDF4 and finds them the same.

Imports nothing from thermoelec; numpy at import, netCDF4 (or pandas) only when written.
"""

from __future__ import annotations

import csv
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["Variable", "write_csv", "write_netcdf"]

#: A NetCDF variable: its dimension names, its values and its attributes.
Variable = tuple[str | tuple[str, ...], np.ndarray, Mapping[str, Any]]

#: Column names the csv module writes as they are (it quotes one with a separator, a quote or a line break).
_PLAIN_NAME = re.compile(r"^[A-Za-z0-9_.\-+/()\[\] ]+$")
#: Rows formatted per block: bounds the memory of the text while keeping the per-row cost low.
_ROWS_PER_BLOCK = 4096


def write_csv(path: Path, columns: Mapping[str, np.ndarray]) -> None:
    """Write columns as ``pandas.DataFrame(columns).to_csv(path, index=False, float_format="%.9g")`` does.

    Parameters
    ----------
    path : pathlib.Path
        The file to write.
    columns : mapping of str to 1-D array
        The columns in order, all of one length: float, integer or text.

    Notes
    -----
    pandas writes a float with ``"%.9g" % value`` and NaN as an empty field, an integer
    as ``str``, text as it is, through :func:`csv.writer` (``QUOTE_MINIMAL``, rows ended
    by ``"\n"``), the names first; so does this. Float columns with plain names (a time
    series) go row by row through one format string; a column of any other type goes to
    pandas itself.
    """
    names = [str(name) for name in columns]
    arrays = [np.asarray(values) for values in columns.values()]
    if not names or any(a.ndim != 1 for a in arrays) or len({a.size for a in arrays}) != 1 or \
            not all(a.dtype.kind in "fiu" or _is_text(a) for a in arrays):
        import pandas as pd

        pd.DataFrame(dict(columns)).to_csv(path, index=False, float_format="%.9g")
        return
    with open(path, "w", encoding="utf-8", newline="") as stream:
        if all(a.dtype.kind == "f" for a in arrays) and all(_PLAIN_NAME.match(name) for name in names):
            _write_float_rows(stream, names, arrays)
            return
        writer = csv.writer(stream, lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
        writer.writerow(names)
        cells = [_cells(a) for a in arrays]
        writer.writerows(zip(*cells, strict=True))


def _cells(values: np.ndarray) -> list[str]:
    """A column's fields as pandas writes them."""
    if values.dtype.kind == "f":
        return ["" if v != v else "%.9g" % v for v in values.tolist()]  # noqa: UP031 (pandas' float_format)
    return [str(v) for v in values.tolist()]  # an integer as str, text as it is


def _write_float_rows(stream, names: list[str], arrays: list[np.ndarray]) -> None:
    """Float columns under plain names, a block of rows at a time through one format string."""
    table = np.column_stack(arrays).astype(float, copy=False)
    row_format = ",".join(["%.9g"] * len(names)) + "\n"
    stream.write(",".join(names) + "\n")
    for start in range(0, table.shape[0], _ROWS_PER_BLOCK):
        block = table[start:start + _ROWS_PER_BLOCK]
        if np.isnan(block).any():
            stream.write("".join(_row_with_gaps(row) for row in block.tolist()))
        else:
            stream.write("".join(row_format % tuple(row) for row in block.tolist()))


def _row_with_gaps(row: Sequence[float]) -> str:
    """One CSV row, NaN as an empty field (pandas' ``na_rep``)."""
    # printf-style on purpose: it is how pandas applies float_format, so the text is the same by construction
    return ",".join("" if value != value else "%.9g" % value for value in row) + "\n"  # noqa: UP031


def write_netcdf(path: Path, data_vars: Mapping[str, Variable], coords: Mapping[str, Variable],
                 attrs: Mapping[str, Any]) -> None:
    """Write a NetCDF-4 file as ``xarray.Dataset(data_vars, coords=coords, attrs=attrs).to_netcdf(path)`` does.

    Parameters
    ----------
    path : pathlib.Path
        The file to write (replaced if it exists).
    data_vars, coords : mapping of str to (dims, values, attrs)
        The data variables and the coordinates, in order; a coordinate named after its
        one dimension is that dimension's coordinate.
    attrs : mapping of str to str, int, float
        The global attributes, in order.

    Raises
    ------
    ValueError
        For a variable whose values do not match its dimensions, two lengths of one
        dimension, or a value type NetCDF cannot hold.
    """
    import netCDF4

    variables = {name: (_dims(dims), np.asarray(values), dict(meta)) for name, (dims, values, meta)
                 in [*data_vars.items(), *coords.items()]}
    sizes: dict[str, int] = {}
    for name, (dims, values, _) in variables.items():
        if values.ndim != len(dims):
            raise ValueError(f"variable {name!r} has {values.ndim} dimensions, not {len(dims)} ({dims})")
        if values.dtype.kind not in "fiu" and not _is_text(values):
            raise ValueError(f"variable {name!r} has values of type {values.dtype}, not numbers or text")
        for dim, size in zip(dims, values.shape, strict=True):
            if sizes.setdefault(dim, size) != size:
                raise ValueError(f"dimension {dim!r} has lengths {sizes[dim]} and {size}")
    off_dimension = [name for name, (dims, _, _) in variables.items()
                     if name in coords and dims != (name,)]
    with netCDF4.Dataset(path, mode="w", clobber=True, format="NETCDF4") as ds:
        for key, value in attrs.items():
            ds.setncattr(key, value)
        for dim, size in sizes.items():
            ds.createDimension(dim, size)
        for name, (dims, values, meta) in variables.items():
            text = _is_text(values)
            fill = np.nan if values.dtype.kind == "f" else None
            var = ds.createVariable(name, str if text else values.dtype, dims, fill_value=fill)
            var.set_auto_maskandscale(False)
            if name not in coords:
                along = sorted(c for c in off_dimension if name not in dims and
                               set(variables[c][0]) <= set(dims))
                if along and "coordinates" not in meta:
                    meta["coordinates"] = " ".join(along)
            for key, value in meta.items():
                var.setncattr(key, value)
            var[...] = values.astype(object) if text else values


def _is_text(values: np.ndarray) -> bool:
    """Values written as variable-length text (as xarray writes an object array of str, or a str array)."""
    return values.dtype.kind == "U" or (values.dtype.kind == "O" and all(isinstance(v, str) for v in values.flat))


def _dims(dims: str | tuple[str, ...]) -> tuple[str, ...]:
    return (dims,) if isinstance(dims, str) else tuple(dims)
