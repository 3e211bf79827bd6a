"""Reading CSV input files: a frame with clean column names, finite numeric columns, increasing times.

Every problem is a :class:`~thermoelec.inputs.errors.ScenarioError` naming the
file, the column and the first bad row (rows counted from 1, the line is the
row + 1 for the header). Imports only :mod:`thermoelec.inputs.errors` from thermoelec.

:func:`read_numeric_csv` reads a plain numeric file (a profile written by a
program: one header, numbers only) without pandas, whose import is half a second
of a command's start-up, and gives the very floats pandas would: each number has
at most 15 digits and a decimal exponent of at most 22, where pandas' parser
(``precise_xstrtod``: the digits as an exact integer, then one multiplication or
division by an exact power of ten) and Python's ``float`` both round correctly.
Any other file goes to pandas (:func:`read_csv_frame`).
"""

from __future__ import annotations

import csv
import re
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from thermoelec.inputs.budgets import check_file_rows
from thermoelec.inputs.errors import ScenarioError

__all__ = ["CsvColumns", "check_increasing", "numeric_column", "read_csv_frame", "read_numeric_csv"]

#: A plain decimal number: sign, digits with an optional point, an optional exponent.
_PLAIN_NUMBER = re.compile(r"[+-]?(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d{1,3}))?")
#: Digits and decimal exponent within which pandas' parser and ``float`` agree (both exact then rounded once).
MAX_EXACT_DIGITS, MAX_EXACT_EXPONENT = 15, 22


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


@dataclass(frozen=True)
class CsvColumns:
    """A CSV file's column names (stripped) and a reader of one column as finite floats.

    Attributes
    ----------
    columns : list of str
        The names, in the file's order.
    numeric : callable
        ``numeric(column)``: the column as finite floats (:func:`numeric_column`'s values
        and messages) [the column's unit].
    """

    columns: list[str]
    numeric: Callable[[str], np.ndarray]


def read_numeric_csv(path: Path, key: str, what: str) -> CsvColumns:
    """A CSV file's columns: read without pandas when it is plain numbers, else by :func:`read_csv_frame`.

    Parameters
    ----------
    path : pathlib.Path
        The file.
    key : str
        The key that named it, for the messages.
    what : str
        What the file is (``"profile"``), for the messages.

    Returns
    -------
    CsvColumns
        The names and the numeric reader; the values are those pandas reads, to the last bit.

    Raises
    ------
    ScenarioError
        As :func:`read_csv_frame` and :func:`numeric_column` raise.
    """
    plain = _plain_numbers(path, key, what)
    if plain is not None:
        return CsvColumns(list(plain), plain.__getitem__)
    frame = read_csv_frame(path, key, what)
    return CsvColumns([str(c) for c in frame.columns], lambda column: numeric_column(frame, column, str(path)))


def _plain_numbers(path: Path, key: str, what: str) -> dict[str, np.ndarray] | None:
    """The columns of a file of one header line and rows of plain numbers, all as pandas reads them; None
    for anything else (a comment, quotes, blanks, a BOM, CRLF, text, many digits, a short row, no rows)."""
    if not path.is_file():
        return None
    check_file_rows(path, key, what)
    try:
        raw = path.read_bytes()
        text = raw.decode("ascii")
    except (OSError, UnicodeDecodeError):
        return None
    if not text.endswith("\n") or any(c in text for c in '#"\r\t '):
        return None
    lines = text[:-1].split("\n")
    header = lines[0].split(",")
    if len(lines) < 2 or len(set(header)) != len(header) or not all(header):
        return None
    rows = [line.split(",") for line in lines[1:]]
    if any(len(row) != len(header) for row in rows):
        return None
    columns = {}
    for j, column in enumerate(header):
        values = _plain_column([row[j] for row in rows])
        if values is None:
            return None
        columns[column] = values
    return columns


def _plain_column(fields: list[str]) -> np.ndarray | None:
    """Fields as floats, as pandas reads them (integers through int64, as pandas types such a column), or None."""
    integers = True
    for field in fields:
        match = _PLAIN_NUMBER.fullmatch(field)
        if match is None:
            return None
        whole, fraction, exponent = match.groups()
        digits = len(whole) + len(fraction or "")
        if digits == 0 or digits > MAX_EXACT_DIGITS or \
                abs(int(exponent or 0) - len(fraction or "")) > MAX_EXACT_EXPONENT:
            return None
        integers = integers and fraction is None and exponent is None
    if integers:  # an int64 column, then floats: "-0" is 0.0, not -0.0
        return np.array([float(int(field)) for field in fields])
    return np.array([float(field) for field in fields])


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
