"""CSV series of a scenario: demand profiles (zero-order hold) and ambient profiles (linear), read in SI.

Owns the column names of the two file kinds (``time_s``, one demand column
per load mode of :data:`thermoelec.physics.loads.LOAD_MODES`, such as ``power_W``,
and ``ambient_temperature_degC``), :class:`SeriesProfile` and the readers. The
readers read the file every time: caching them is the job of
:class:`thermoelec.scenario.cache.ScenarioCache`.

Imports from :mod:`thermoelec.inputs` and :mod:`thermoelec.physics`; never from
the rest of :mod:`thermoelec.scenario` nor from the layers above.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from thermoelec.inputs.csvfiles import check_increasing, read_numeric_csv
from thermoelec.inputs.errors import ScenarioError
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.loads import LOAD_MODES

__all__ = ["AMBIENT_COLUMN", "DEMAND_COLUMNS", "TIME_COLUMN", "SeriesProfile", "read_ambient_csv",
           "read_profile_csv"]

TIME_COLUMN = "time_s"
#: Column of an ambient temperature [degC] (in a profile file or an ambient profile).
AMBIENT_COLUMN = "ambient_temperature_degC"
#: Demand column -> load mode, one per mode of the registry (``current_A``, ``power_W`` ...).
DEMAND_COLUMNS: dict[str, str] = {mode.csv_column: name for name, mode in LOAD_MODES.items()}


@dataclass(frozen=True)
class SeriesProfile:
    """A CSV profile read from disk, in SI units.

    Attributes
    ----------
    path : pathlib.Path
        The file.
    mode : str
        The load mode of its demand column (a :data:`~thermoelec.physics.loads.LOAD_MODES` name).
    time : numpy.ndarray
        Row times [s], strictly increasing; each row's demand holds until the next.
    demand : numpy.ndarray
        The demand per row [the mode's unit: A, W, Ω or V].
    ambient : numpy.ndarray or None
        Ambient temperature per row [K], when the file has the column.
    """

    path: Path
    mode: str
    time: np.ndarray
    demand: np.ndarray
    ambient: np.ndarray | None


def read_profile_csv(path: Path, key: str) -> SeriesProfile:
    """Read a zero-order-hold profile: ``time_s`` plus one demand column, optional ambient.

    Parameters
    ----------
    path : pathlib.Path
        The CSV file.
    key : str
        The scenario key that names it (``profile.segment[2].file``), for the messages.

    Returns
    -------
    SeriesProfile
        The profile [s; A, W, Ω or V; K].

    Raises
    ------
    ScenarioError
        Naming the file and the column (and row) at fault.
    """
    name = str(path)
    table = read_numeric_csv(path, key, "profile")
    if TIME_COLUMN not in table.columns:
        raise ScenarioError(name, TIME_COLUMN, f"column {TIME_COLUMN} is missing "
                            f"(columns: {', '.join(table.columns)})")
    demand_columns = [c for c in table.columns if c in DEMAND_COLUMNS]
    if len(demand_columns) != 1:
        raise ScenarioError(name, key, "give exactly one demand column of " + ", ".join(DEMAND_COLUMNS)
                            + f" (found {', '.join(demand_columns) or 'none'})")
    unknown = [c for c in table.columns if c not in (TIME_COLUMN, AMBIENT_COLUMN, *DEMAND_COLUMNS)]
    if unknown:
        raise ScenarioError(name, unknown[0], f"unknown column (valid: {TIME_COLUMN}, "
                            + ", ".join(DEMAND_COLUMNS) + f", {AMBIENT_COLUMN})")
    column = demand_columns[0]
    columns = [TIME_COLUMN, column] + ([AMBIENT_COLUMN] if AMBIENT_COLUMN in table.columns else [])
    arrays = {c: table.numeric(c) for c in columns}
    time = arrays[TIME_COLUMN]
    if len(time) < 2:
        raise ScenarioError(name, TIME_COLUMN, "a profile file needs at least two rows")
    check_increasing(time, name, TIME_COLUMN)
    mode = DEMAND_COLUMNS[column]
    demand = arrays[column]
    if LOAD_MODES[mode].positive and (demand <= 0).any():
        row = int(np.flatnonzero(demand <= 0)[0])
        raise ScenarioError(name, column, f"row {row + 1} (line {row + 2}): must be > 0")
    ambient = arrays.get(AMBIENT_COLUMN)
    if ambient is not None:
        ambient = _kelvin(ambient, name)
    return SeriesProfile(path, mode, time, demand, ambient)


def read_ambient_csv(path: Path, key: str) -> tuple[np.ndarray, np.ndarray]:
    """An ambient profile: columns ``time_s`` and ``ambient_temperature_degC``, linear between rows.

    Parameters
    ----------
    path : pathlib.Path
        The CSV file.
    key : str
        The scenario key that names it (``thermal.ambient_profile``), for the messages.

    Returns
    -------
    time : numpy.ndarray
        Row times [s], strictly increasing.
    ambient : numpy.ndarray
        Ambient temperature per row [K].

    Raises
    ------
    ScenarioError
        Naming the file and the column (and row) at fault.
    """
    name = str(path)
    table = read_numeric_csv(path, key, "ambient profile")
    for column in (TIME_COLUMN, AMBIENT_COLUMN):
        if column not in table.columns:
            raise ScenarioError(name, column, f"column {column} is missing (columns: {', '.join(table.columns)})")
    extra = [c for c in table.columns if c not in (TIME_COLUMN, AMBIENT_COLUMN)]
    if extra:
        raise ScenarioError(name, extra[0], f"unknown column (valid: {TIME_COLUMN}, {AMBIENT_COLUMN})")
    time, ambient = (table.numeric(column) for column in (TIME_COLUMN, AMBIENT_COLUMN))
    if len(time) < 2:
        raise ScenarioError(name, TIME_COLUMN, "an ambient profile needs at least two rows")
    check_increasing(time, name, TIME_COLUMN)
    return time, _kelvin(ambient, name)


def _kelvin(celsius: np.ndarray, name: str) -> np.ndarray:
    """Temperatures of a CSV column [degC] in kelvin, none below absolute zero [K]."""
    kelvin = celsius + ZERO_CELSIUS
    if (kelvin <= 0).any():
        raise ScenarioError(name, AMBIENT_COLUMN, "temperature below absolute zero")
    return kelvin
