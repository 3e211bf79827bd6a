"""Where a validation error is: pydantic error locations as dotted keys and lines of the TOML text.

Owns :func:`dotted` (``profile.segment[2].value``, list items counted from 1),
:func:`find_line` (the line of a key, or of its table header), :class:`Origins`
(which input gave the value at a key: the scenario file, an included file or an
override such as a ``--set`` flag), :func:`first_error` (the one
:class:`~thermoelec.inputs.errors.ScenarioError` reported for a failed
validation, at its origin) and :func:`model_at` (the section at a location, to
list its valid keys).

Imports :mod:`thermoelec.scenario.schema` and :mod:`thermoelec.inputs`; never
the loading, series or building modules, nor the layers above.
"""

from __future__ import annotations

import re
import typing
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from pydantic import BaseModel, ValidationError

from thermoelec.inputs.errors import ScenarioError
from thermoelec.scenario.schema import KeyedError, ScenarioSpec

__all__ = ["Origins", "Source", "dotted", "find_line", "first_error", "model_at"]


def _is_key(part: Any) -> bool:
    """Whether a part of a pydantic location is a key or list index of the data (not a validator's name)."""
    return isinstance(part, int) or not (part in ("float", "function-before", "function-after", "list[float]",
                                                  "ResistanceSpec")
                                         or str(part).startswith(("function-", "constrained-")))


def dotted(loc: tuple) -> str:
    """``('profile', 'segment', 2, 'value')`` -> ``profile.segment[3].value`` (items counted from 1)."""
    out = ""
    for part in filter(_is_key, loc):
        out += f"[{part + 1}]" if isinstance(part, int) else ("." if out else "") + str(part)
    return out


@dataclass(frozen=True)
class Source:
    """One input of a scenario: a file's own data and text, or one override's key path."""

    name: str                       # the file, or the override as given ("--set cell.mass=0")
    data: Any = None                # the file's parsed tables (before merging)
    text: str | None = None         # the file's TOML text, for lines
    path: tuple = ()                # an override: its key path (0-based list indices)


def _depth(data: Any, path: Sequence) -> int:
    """How many leading parts of ``path`` exist in ``data``."""
    depth = 0
    for part in path:
        if isinstance(part, int) and isinstance(data, list) and 0 <= part < len(data):
            data = data[part]
        elif isinstance(part, str) and isinstance(data, dict) and part in data:
            data = data[part]
        else:
            break
        depth += 1
    return depth


@dataclass(frozen=True)
class Origins:
    """Where each value of a scenario came from: its file, the files it includes, the overrides on top.

    A value set by an override belongs to the last override of it or of a table
    holding it; else to
    the file that holds the deepest part of its key path, the scenario file first,
    then the included files from the last (whose tables win) to the first.
    """

    scenario: Source
    includes: tuple[Source, ...] = ()
    overrides: tuple[Source, ...] = field(default=())

    def with_overrides(self, overrides: Sequence[Source]) -> Origins:
        """These origins with more overrides on top."""
        return Origins(self.scenario, self.includes, (*self.overrides, *overrides))

    def locate(self, loc: tuple) -> tuple[str, int | None]:
        """The input (file or override) and line that gave the value at a pydantic location.

        Parameters
        ----------
        loc : tuple
            Keys and 0-based list indices, as pydantic reports them.

        Returns
        -------
        name : str
            The file or the override.
        line : int or None
            The line in that file (None for an override, or when not found).
        """
        path = tuple(filter(_is_key, loc))
        for override in reversed(self.overrides):  # an override that set this value or a table holding it
            if path[:len(override.path)] == override.path:
                return override.name, None
        best, depth = self.scenario, _depth(self.scenario.data, path)
        for source in reversed(self.includes):
            d = _depth(source.data, path)
            if d > depth:
                best, depth = source, d
        return best.name, find_line(best.text, loc) if best.text else None


_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_KEY = re.compile(r"^\s*(\"[^\"]+\"|'[^']+'|[A-Za-z0-9_\-]+)\s*=")


def find_line(text: str, loc: tuple) -> int | None:
    """Best-effort line number of a key in TOML text (the table header when the key is missing).

    Parameters
    ----------
    text : str
        The TOML text.
    loc : tuple
        A pydantic location: keys and 0-based list indices (``[[table]]`` items counted in order).

    Returns
    -------
    int or None
        The line (from 1) of the deepest key or header on the location's path, None when none is.
    """
    keys = [p for p in loc if isinstance(p, str)]
    indices = [p for p in loc if isinstance(p, int)]
    counters: dict[str, int] = {}
    table: list = []
    best, best_len = None, 0
    for number, line in enumerate(text.splitlines(), start=1):
        header = _HEADER.match(line)
        if header:
            name = [k.strip().strip('"') for k in header.group(2).split(".")]
            if header.group(1) == "[[":
                joined = ".".join(name)
                counters[joined] = counters.get(joined, -1) + 1
                table = [*name, counters[joined]]
            else:
                table = name
            path = table
        else:
            key = _KEY.match(line)
            if not key:
                continue
            path = [*table, key.group(1).strip("\"'")]
        flat_keys = [p for p in path if isinstance(p, str)]
        flat_idx = [p for p in path if isinstance(p, int)]
        if flat_keys == keys[:len(flat_keys)] and flat_idx == indices[:len(flat_idx)] and len(path) > best_len:
            best, best_len = number, len(path)
    return best


def _clean(msg: str) -> str:
    for prefix in ("Value error, ", "Assertion failed, "):
        if msg.startswith(prefix):
            msg = msg[len(prefix):]
    if msg == "Field required":
        return "required key is missing"
    return msg


def first_error(exc: ValidationError, file: str, text: str | None, origins: Origins | None = None,
                model: type[BaseModel] = ScenarioSpec) -> ScenarioError:
    """The one error reported for a failed validation: its key, a clean message, its origin and line.

    Parameters
    ----------
    exc : pydantic.ValidationError
        The failure of :class:`~thermoelec.scenario.schema.ScenarioSpec` validation.
    file : str
        The scenario file, for the message.
    text : str or None
        Its TOML text, to find the line (None for data given as a dict).
    origins : Origins, optional
        Where each value came from: the error then names the included file or the
        override that gave the value at fault (``file`` and ``text`` serve otherwise).
    model : type of BaseModel
        The model validated, to list the valid keys of a section.

    Returns
    -------
    ScenarioError
        The first problem, with a count of the others; a key named by a section's
        check (:class:`~thermoelec.scenario.schema.KeyedError`) is appended to the
        location, and such a check's error is marked as a range error (``form`` False).
    """
    errors = exc.errors()
    err = errors[0]
    loc = tuple(err["loc"])
    msg = _clean(err["msg"])
    cause = (err.get("ctx") or {}).get("error")
    if isinstance(cause, KeyedError) and cause.key:
        loc = (*loc, *(cause.key if isinstance(cause.key, tuple) else (cause.key,)))
        msg = str(cause)
    if err["type"] == "extra_forbidden":
        msg = f"unknown key {loc[-1]!r}"
        parent = model_at(model, loc[:-1])
        if parent is not None:
            msg += f" (valid keys: {', '.join(parent.model_fields)})"
    elif err["type"] == "literal_error":
        msg = f"{err['input']!r} is not allowed: {msg[len('Input should be '):] if msg.startswith('Input') else msg}"
    more = len(errors) - 1
    if more:
        msg += f" (and {more} more problem{'s' if more > 1 else ''})"
    form = not isinstance(cause, KeyedError) or cause.form
    if origins is not None:
        file, line = origins.locate(loc)
    else:
        line = find_line(text, loc) if text else None
    return ScenarioError(file, dotted(loc), msg, line, form=form)


def model_at(model: type[BaseModel], loc: tuple) -> type[BaseModel] | None:
    """The pydantic model class found at a location, for listing its valid keys."""
    current: Any = model
    for part in loc:
        if isinstance(part, int):
            continue
        if not (isinstance(current, type) and issubclass(current, BaseModel)) or part not in current.model_fields:
            return None
        annotation = current.model_fields[part].annotation
        candidates = [annotation, *typing.get_args(annotation)]
        nxt = None
        for c in candidates:
            for cc in [c, *typing.get_args(c)]:
                if isinstance(cc, type) and issubclass(cc, BaseModel):
                    nxt = cc
        current = nxt
    return current if isinstance(current, type) and issubclass(current, BaseModel) else None
