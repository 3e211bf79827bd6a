"""Reading CSV input files: a frame with clean column names, finite numeric columns, increasing times.

Every problem is a :class:`~thermoelec.inputs.errors.ScenarioError` naming the
file, the column and the first bad row (rows counted from 1, the line is the
row + 1 for the header). Imports only :mod:`thermoelec.inputs.errors` from thermoelec.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from thermoelec.inputs.budgets import check_file_rows
from thermoelec.inputs.errors import ScenarioError

__all__ = ["check_increasing", "numeric_column", "read_csv_frame"]


def read_csv_frame(path: Path, key: str, what: str):
    """A CSV file as a pandas DataFrame with stripped column names; ``#`` starts a comment.

    Parameters
    ----------
    path : pathlib.Path
        The file.
    key : str
        The key that named the file, for the message when it is missing or unreadable.
    what : str
        What the file is (``"profile"``, ``"log"``), for the message.

    Returns
    -------
    pandas.DataFrame
        The table as read, values not yet converted.

    Raises
    ------
    ScenarioError
        When the file does not exist, is a folder, is not readable CSV text (UTF-8),
        has more rows than the budget (:func:`thermoelec.inputs.budgets.check_file_rows`)
        or names a column twice.
    """
    import pandas as pd

    name = str(path)
    if path.is_dir():
        raise ScenarioError(name, key, f"the {what} file is a folder, not a file")
    if not path.is_file():
        raise ScenarioError(name, key, f"{what} file not found")
    try:
        check_file_rows(path, key, what)
        header = _header(path)
        # a BOM is no part of a name; "nan" and empty fields stay as written, for the message
        frame = pd.read_csv(path, comment="#", skipinitialspace=True, encoding="utf-8-sig", keep_default_na=False)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError, csv.Error) as exc:
        reason = "not UTF-8 text" if isinstance(exc, UnicodeDecodeError) else str(exc).strip()
        raise ScenarioError(name, key, f"not a readable CSV file: {reason}") from None
    except OSError as exc:
        raise ScenarioError(name, key, f"cannot read the {what} file: {exc.strerror or exc}") from None
    twice = sorted({c for c in header if header.count(c) > 1})
    if twice:
        raise ScenarioError(name, twice[0], "the header names this column more than once (spaces around "
                            "names do not count)")
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def _header(path: Path) -> list[str]:
    """The column names of a CSV file as written (stripped), from its first line that is not a comment."""
    with path.open(encoding="utf-8-sig", newline="") as handle:
        for line in handle:
            text = line.split("#", 1)[0]  # a comment runs to the end of its line, as pandas reads it
            if text.strip():
                return [c.strip() for c in next(csv.reader([text]))]
    return []


def numeric_column(frame, column: str, name: str) -> np.ndarray:
    """A column as finite floats; the first bad row is named.

    Parameters
    ----------
    frame : pandas.DataFrame
        The table (from :func:`read_csv_frame`).
    column : str
        The column, present in ``frame``.
    name : str
        The file, for the message.

    Returns
    -------
    numpy.ndarray
        The values [the column's unit], float.

    Raises
    ------
    ScenarioError
        At the first value that is not a finite number.
    """
    import pandas as pd

    values = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        row = int(bad[0])
        raw = frame[column].iloc[row]
        shown = "an empty field" if isinstance(raw, str) and not raw.strip() else \
            repr(raw if isinstance(raw, str) else float(raw))
        raise ScenarioError(name, column, f"row {row + 1} (line {row + 2}): {shown} is not a finite number")
    return values


def check_increasing(time: np.ndarray, name: str, column: str) -> None:
    """Raise unless ``time`` is strictly increasing, naming the first row that is not.

    Parameters
    ----------
    time : numpy.ndarray
        Times [s].
    name : str
        The file, for the message.
    column : str
        The time column, for the message.

    Raises
    ------
    ScenarioError
        At the first time not after the one before.
    """
    steps = np.diff(time)
    if (steps <= 0).any():
        row = int(np.flatnonzero(steps <= 0)[0]) + 1
        raise ScenarioError(name, column, f"time must be strictly increasing: row {row + 1} (line {row + 2}) "
                            f"has {time[row]:g} s after {time[row - 1]:g} s")
