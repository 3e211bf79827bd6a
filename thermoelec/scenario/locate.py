"""Where a validation error is: pydantic error locations as dotted keys and lines of the TOML text.

Owns :func:`dotted` (``profile.segment[2].value``, list items counted from 1),
:func:`find_line` (the line of a key, or of its table header), :func:`first_error`
(the one :class:`~thermoelec.inputs.errors.ScenarioError` reported for a failed
validation) and :func:`model_at` (the section at a location, to list its valid keys).

Imports :mod:`thermoelec.scenario.schema` and :mod:`thermoelec.inputs`; never
the loading, series or building modules, nor the layers above.
"""

from __future__ import annotations

import re
import typing
from typing import Any

from pydantic import BaseModel, ValidationError

from thermoelec.inputs.errors import ScenarioError
from thermoelec.scenario.schema import KeyedError, ScenarioSpec

__all__ = ["dotted", "find_line", "first_error", "model_at"]


def dotted(loc: tuple) -> str:
    """``('profile', 'segment', 2, 'value')`` -> ``profile.segment[3].value`` (items counted from 1)."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part + 1}]"
        elif part in ("float", "function-before", "function-after", "list[float]", "ResistanceSpec") or \
                str(part).startswith(("function-", "constrained-")):
            continue
        else:
            out += ("." if out else "") + str(part)
    return out


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


def first_error(exc: ValidationError, file: str, text: str | None) -> ScenarioError:
    """The one error reported for a failed validation: its key, a clean message, its line.

    Parameters
    ----------
    exc : pydantic.ValidationError
        The failure of :class:`~thermoelec.scenario.schema.ScenarioSpec` validation.
    file : str
        The scenario file, for the message.
    text : str or None
        Its TOML text, to find the line (None for data given as a dict).

    Returns
    -------
    ScenarioError
        The first problem, with a count of the others; a key named by a section's
        check (:class:`~thermoelec.scenario.schema.KeyedError`) is appended to the location.
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
        parent = model_at(ScenarioSpec, loc[:-1])
        if parent is not None:
            msg += f" (valid keys: {', '.join(parent.model_fields)})"
    elif err["type"] == "literal_error":
        msg = f"{err['input']!r} is not allowed: {msg[len('Input should be '):] if msg.startswith('Input') else msg}"
    more = len(errors) - 1
    if more:
        msg += f" (and {more} more problem{'s' if more > 1 else ''})"
    line = find_line(text, loc) if text else None
    return ScenarioError(file, dotted(loc), msg, line)


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
