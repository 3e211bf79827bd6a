"""Overrides by dotted path: ``profile.segment[2].value = "5 A"`` set in raw scenario data.

Owns the key-path syntax (:func:`split_path`, list items counted from 1), the
command-line value syntax (:func:`parse_value`) and :func:`apply_override`. Works
on the raw (parsed TOML) data, before validation.

Imports only :func:`thermoelec.scenario.locate.dotted` (to name a path in a
message) from thermoelec; never the loading, series or building modules, nor the layers above.
"""

from __future__ import annotations

import re
import tomllib
from functools import lru_cache
from typing import Any

from thermoelec.scenario.locate import dotted

__all__ = ["apply_override", "copy_along", "parse_value", "split_path"]

_PART = re.compile(r"([^.\[\]]+)|\[(\d+)\]")


def split_path(path: str) -> list[str | int]:
    """``profile.segment[2].value`` -> ``['profile', 'segment', 1, 'value']`` (0-based inside)."""
    return list(_split(path))


@lru_cache(maxsize=4096)
def _split(path: str) -> tuple[str | int, ...]:
    """:func:`split_path`, once per path (a sweep's thousands of variants name the same few)."""
    parts: list[str | int] = []
    pos = 0
    for match in _PART.finditer(path):
        between = path[pos:match.start()]
        if between not in ("", "."):
            raise ValueError(f"cannot read the key path {path!r}")
        pos = match.end()
        if match.group(2) is not None:
            index = int(match.group(2))
            if index < 1:
                raise ValueError(f"list items are counted from 1 in {path!r}")
            parts.append(index - 1)
        else:
            parts.append(match.group(1).strip().strip('"'))
    if not parts or path[pos:] not in ("",):
        raise ValueError(f"cannot read the key path {path!r}")
    return tuple(parts)


def parse_value(text: str) -> Any:
    """A command-line value: TOML syntax when it parses (``1.5``, ``[1, 2]``, ``"x"``), else the bare string."""
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def copy_along(data: dict, paths: list[list[str | int]]) -> dict:
    """``data`` with every table and list on the key ``paths`` copied, the rest shared (for :func:`apply_override`).

    A variant changes only what lies on its overrides' paths: copying the whole
    scenario for each of a sweep's thousands of variants costs more than
    validating what they change.

    Parameters
    ----------
    data : dict
        Raw scenario data (parsed TOML); not changed.
    paths : list of list
        Key paths (:func:`split_path`).

    Returns
    -------
    dict
        A copy in which :func:`apply_override` along ``paths`` changes nothing ``data`` holds.
    """
    top = dict(data)
    for parts in paths:
        node: Any = top
        for part in parts[:-1]:
            if isinstance(node, dict) and part in node and isinstance(node[part], (dict, list)):
                child = node[part]
            elif isinstance(node, list) and isinstance(part, int) and part < len(node) \
                    and isinstance(node[part], (dict, list)):
                child = node[part]
            else:
                break  # apply_override creates what is missing or names what is wrong
            node[part] = child = dict(child) if isinstance(child, dict) else list(child)
            node = child
    return top


def apply_override(data: dict, path: str, value: Any) -> None:
    """Set ``value`` at a dotted ``path`` in raw scenario data (in place); a missing table is created.

    Parameters
    ----------
    data : dict
        Raw scenario data (parsed TOML), changed in place.
    path : str
        Dotted key path, list items counted from 1 (``profile.segment[2].value``).
    value : Any
        The new value, as it would be written in the file (``"5 A"``, ``3.0``, a table).

    Raises
    ------
    ValueError
        When the path cannot be read, names a list item that does not exist or
        goes through a value that is not a table.
    """
    parts = split_path(path)
    node: Any = data
    for i, part in enumerate(parts[:-1]):
        nxt = parts[i + 1]
        if isinstance(part, int):
            if not isinstance(node, list) or part >= len(node):
                raise ValueError(f"{dotted(tuple(parts[:i + 1]))} does not exist")
            node = node[part]
        else:
            if not isinstance(node, dict):
                raise ValueError(f"{dotted(tuple(parts[:i]))} is not a table")
            if part not in node:
                node[part] = [] if isinstance(nxt, int) else {}
            node = node[part]
    last = parts[-1]
    if isinstance(last, int):
        if not isinstance(node, list) or last >= len(node):
            raise ValueError(f"{dotted(tuple(parts))} does not exist")
        node[last] = value
    else:
        if not isinstance(node, dict):
            raise ValueError(f"{dotted(tuple(parts[:-1]))} is not a table")
        node[last] = value

