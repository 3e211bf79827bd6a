"""The cache a scenario family shares: CSV files read once per version, segment tuples built once.

A sweep builds thousands of variants of one scenario (``with_overrides`` then
``problem()``); they mostly share their CSV files and their profile. A loaded
:class:`~thermoelec.scenario.loading.Scenario` owns one :class:`ScenarioCache`
and hands it to every variant, so the files are read once and the variants
with the same profile get the same segment tuple, the very object: the batched
solver recognises a shared profile by identity (``problem.segments is
other.segments``, :func:`thermoelec.engine.batch.solve_batch`).

Owns the cache and the version of a file (path, mtime, size). Knows nothing of
what it stores; imports nothing from thermoelec.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable
from pathlib import Path
from typing import Any, TypeVar

__all__ = ["FileVersion", "ScenarioCache", "file_version"]

T = TypeVar("T")
#: A file's version: its path, modification time [ns] and size [bytes].
FileVersion = tuple[str, int, int]


def file_version(path: Path) -> FileVersion | None:
    """The version of a file: path, modification time [ns] and size [bytes]; None when it cannot be read.

    Parameters
    ----------
    path : pathlib.Path
        The file.

    Returns
    -------
    tuple of (str, int, int) or None
        A rewritten file has a new version (a new mtime, in practice also a new size).
    """
    try:
        stat = path.stat()
    except OSError:
        return None
    return str(path), stat.st_mtime_ns, stat.st_size


class ScenarioCache:
    """File reads keyed by the file's version, and built values keyed by what they are made of.

    Each table holds at most ``max_entries`` values; the oldest goes first. A
    cache is not sent to other processes: a pickled scenario arrives with an
    empty one (each worker reads its files once).

    Parameters
    ----------
    max_entries : int
        Size of each table [-].
    """

    def __init__(self, max_entries: int = 64):
        self.max_entries = max_entries
        self._reads: dict[tuple, Any] = {}
        self._built: dict[Hashable, Any] = {}
        self._objects: dict[tuple[int, str], tuple[Any, Any]] = {}
        #: Files actually read (not found in the cache), for tests and diagnostics [-].
        self.files_read = 0

    def read(self, reader: Callable[[Path, str], T], path: Path, key: str) -> T:
        """``reader(path, key)``, once per version of the file.

        Parameters
        ----------
        reader : callable
            Reads the file; raises :class:`~thermoelec.inputs.errors.ScenarioError` naming ``key``.
        path : pathlib.Path
            The file.
        key : str
            The scenario key that names the file, for the reader's messages.

        Returns
        -------
        Any
            What the reader returned, the same object while the file is unchanged
            (a failed read is not kept: it fails again, with its message).
        """
        version = file_version(path)
        if version is None:
            return reader(path, key)  # missing or unreadable: the reader says so, naming the key
        entry = (reader.__module__, reader.__qualname__, *version)
        if entry not in self._reads:
            value = reader(path, key)
            self.files_read += 1
            self._put(self._reads, entry, value)
        return self._reads[entry]

    def built(self, key: Hashable, make: Callable[[], T]) -> T:
        """``make()``, once per ``key``: the same object for every caller with an equal key.

        Parameters
        ----------
        key : Hashable
            Everything the value is made of (section text, file versions, temperatures).
        make : callable
            Builds the value.

        Returns
        -------
        Any
            The value built for the first caller with this key.
        """
        if key not in self._built:
            self._put(self._built, key, make())
        return self._built[key]

    def of_object(self, value: Any, make: Callable[[Any], T], kind: str = "") -> T:
        """``make(value)``, once per object and ``kind`` while the cache holds it (``repr``: a key for :meth:`built`).

        The variants of a sweep share the tables no override touched, the very
        objects: what is made of one is made once, not once per variant.

        Parameters
        ----------
        value : Any
            The object.
        make : callable
            Makes what is wanted of it.
        kind : str
            What is made, where one object is asked for more than one thing [-].
        """
        key = (id(value), kind)
        entry = self._objects.get(key)
        if entry is None or entry[0] is not value:
            entry = (value, make(value))  # the object is held, so its id is not reused while it is here
            self._put(self._objects, key, entry)
        return entry[1]

    def _put(self, table: dict, key: Hashable, value: Any) -> None:
        if len(table) >= self.max_entries:
            del table[next(iter(table))]  # dicts keep insertion order: the oldest
        table[key] = value

    def __getstate__(self) -> dict[str, Any]:
        return {"max_entries": self.max_entries}

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.__init__(**state)
