"""Budgets: how much work and memory one command may take, checked before the work starts.

Owns :class:`Budgets` with the documented defaults, the budgets of this process
(:func:`current`, :func:`using`; the command line sets them from ``--max-rows``,
``--max-memory`` and ``--max-scenarios``, a sweep hands them to its worker
processes) and :func:`check_file_rows`, the guard of every CSV reader: a file
with more rows than the budget is refused before it is parsed (a 1e7-row profile
takes about 4 GB to read into segments). The estimates of a run or a sweep are
:mod:`thermoelec.analysis.estimates`. Imports only :mod:`thermoelec.inputs.errors`.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from thermoelec.inputs.errors import ScenarioError

__all__ = ["DEFAULT_BUDGETS", "Budgets", "check_file_rows", "count_rows", "current", "install", "round_up", "using"]


@dataclass(frozen=True)
class Budgets:
    """Limits a command checks before it computes, each with the option that raises it.

    Attributes
    ----------
    rows : int
        Output rows of one run (every scenario of a sweep too), and rows of one CSV
        input file [-] (``--max-rows``). Default 2 million: 23 days at 1 s.
    memory : float
        Estimated peak memory of the command [B] (``--max-memory``). Default 4 GB.
    scenarios : int
        Scenarios of one sweep, or combinations of one design search [-]
        (``--max-scenarios``). Default 1 million.
    """

    rows: int = 2_000_000
    memory: float = 4e9
    scenarios: int = 1_000_000


#: The budgets of a command that raises none.
DEFAULT_BUDGETS = Budgets()
_current = [DEFAULT_BUDGETS]


def current() -> Budgets:
    """The budgets of this process (:data:`DEFAULT_BUDGETS` unless :func:`using` set others).

    Returns
    -------
    Budgets
        The limits in force.
    """
    return _current[-1]


def install(budgets: Budgets) -> None:
    """Make ``budgets`` this process's for good (a worker process, under its command's budgets).

    Parameters
    ----------
    budgets : Budgets
        The limits to apply.
    """
    _current[:] = [budgets]


@contextmanager
def using(budgets: Budgets | None) -> Iterator[Budgets]:
    """Make ``budgets`` this process's for the duration of a ``with`` block (None: keep the current).

    Parameters
    ----------
    budgets : Budgets or None
        The limits to apply.

    Yields
    ------
    Budgets
        The limits in force inside the block.
    """
    _current.append(budgets if budgets is not None else current())
    try:
        yield current()
    finally:
        _current.pop()


def count_rows(path: Path) -> int:
    """Lines of a text file (a CSV's rows and its header), counted in blocks without parsing.

    Parameters
    ----------
    path : pathlib.Path
        The file, readable.

    Returns
    -------
    int
        Line breaks, plus one for a last line without one [-].
    """
    lines, last = 0, b"\n"
    with path.open("rb") as handle:
        while block := handle.read(1 << 22):
            lines += block.count(b"\n")
            last = block[-1:]
    return lines + (last != b"\n")


def check_file_rows(path: Path, key: str, what: str) -> None:
    """Refuse a CSV file with more rows than the budget allows, before reading it.

    Parameters
    ----------
    path : pathlib.Path
        The file, existing.
    key : str
        The key or option that named it, for the message.
    what : str
        What the file is (``"profile"``, ``"log"``), for the message.

    Raises
    ------
    ScenarioError
        Naming the file, its rows and the option that raises the budget.
    """
    limit = current().rows
    if path.stat().st_size <= limit:  # a row takes at least one byte
        return
    rows = count_rows(path) - 1
    if rows > limit:
        raise ScenarioError(str(path), key, f"the {what} file has {rows:.3g} rows, over the budget of {limit:.3g} "
                            f"rows: raise it with --max-rows {round_up(rows)}, or resample the file")


def round_up(value: float) -> str:
    """A budget a little above ``value``, written short for a message (``4.1e7``).

    Parameters
    ----------
    value : float
        The estimate the budget must reach [-, B].

    Returns
    -------
    str
        Two significant figures, rounded up.
    """
    import math

    exponent = math.floor(math.log10(max(value, 1.0)))
    mantissa = math.ceil(value / 10**exponent * 10) / 10
    return f"{mantissa:g}e{exponent}" if exponent >= 3 else str(math.ceil(value))
