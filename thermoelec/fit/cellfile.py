"""Cell files: the ``[cell]`` section (and comments) of the scenario format as a file of its own.

A scenario includes one with ``include = "cell.toml"``; its values are the
base, the scenario's own keys win. ``thermoelec fit`` writes them, with the
fitted uncertainties as comments. A cell file is read and checked through the
scenario's own schema (:class:`thermoelec.scenario.schema.CellFileSpec`: the
``[cell]`` keys, units and checks, each key optional), both when a fit reads
one (``--cell``) and before a fit writes one.
"""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import ValidationError

from thermoelec.inputs import ScenarioError
from thermoelec.scenario.locate import first_error
from thermoelec.scenario.schema import CellFileSpec, CellSpec

__all__ = ["CellData", "dump_toml", "parse_cell_text", "read_cell_file"]


def _value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        if not math.isfinite(float(value)):
            raise ValueError(f"cannot write {value!r} to a cell file")
        return f"{float(value):.6g}"
    if isinstance(value, str):
        return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(value, np.ndarray):
        return _value(value.tolist())
    if isinstance(value, Sequence):
        items = [_value(v) for v in value]
        if value and isinstance(value[0], (list, tuple, np.ndarray)):
            return "[\n" + "".join(f"  {item},\n" for item in items) + "]"
        return "[" + ", ".join(items) + "]"
    raise TypeError(f"cannot write {type(value).__name__} to a cell file")


def dump_toml(tables: Mapping[str, Mapping[str, Any]], header: Sequence[str] = (),
              comments: Mapping[str, Sequence[str]] | None = None) -> str:
    """TOML text of ``{"cell": {...}, "cell.ocv": {...}, "cell.rc": [{...}, ...]}``.

    Keys are dotted table names; a list of dicts is an array of tables.
    ``comments`` adds ``#`` lines under a table header.
    """
    lines = [f"# {line}" for line in header]
    comments = comments or {}
    for name, table in tables.items():
        entries = table if isinstance(table, list) else [table]
        for entry in entries:
            lines.append("")
            lines.append(f"[[{name}]]" if isinstance(table, list) else f"[{name}]")
            lines += [f"# {c}" for c in comments.get(name, ())]
            for key, value in entry.items():
                if not isinstance(value, Mapping):
                    lines.append(f"{key} = {_value(value)}")
            for key, value in entry.items():  # sub-tables (of the last array element, in TOML)
                if isinstance(value, Mapping):
                    lines.append(f"[{name}.{key}]")
                    lines += [f"{k} = {_value(v)}" for k, v in value.items()]
    return "\n".join(lines).lstrip("\n") + "\n"


class CellData:
    """The SI values a fit needs from a validated cell file: capacity, OCV, mass, resistances.

    Parameters
    ----------
    path : pathlib.Path
        The file.
    raw : dict
        Its tables as read (extended by the fit and written again).
    spec : CellFileSpec
        The same, validated as a scenario's ``[cell]`` with every key optional (SI values).
    """

    def __init__(self, path: Path, raw: dict, spec: CellFileSpec):
        self.path, self.raw = path, raw
        cell = spec.cell
        self.capacity = cell.capacity
        self.mass = cell.mass
        self.voltage_max, self.voltage_min = cell.voltage_max, cell.voltage_min
        self.geometry = CellSpec.geometry(cell)  # the cell's CellGeometry, None without conductivity and sizes
        self.ocv_soc = None if cell.ocv is None else np.asarray(cell.ocv.soc, float)
        self.ocv_voltage = None if cell.ocv is None else np.asarray(cell.ocv.voltage, float)
        self.resistance = None  # R0 + RC at mid SoC, reference temperature (for the OCV hysteresis)
        if cell.r0 is not None:
            self.resistance = cell.r0.value if cell.r0.value is not None else float(np.median(cell.r0.values))
            for pair in cell.rc or []:
                res = pair.resistance
                self.resistance += res if isinstance(res, float) else (
                    res.value if res.value is not None else float(np.median(res.values)))

    def require(self, *keys: str) -> None:
        """Raise a clear error when the cell file lacks what a fit needs."""
        for key in keys:
            if getattr(self, key) is None:
                label = {"capacity": "cell.capacity", "ocv_soc": "cell.ocv.soc", "ocv_voltage": "cell.ocv.voltage",
                         "mass": "cell.mass"}[key]
                raise ScenarioError(str(self.path), label, "required by this fit (fit the OCV first, or add it)")


def parse_cell_text(text: str, name: str) -> tuple[dict, CellFileSpec]:
    """A cell file's text read and validated: the scenario format's ``[cell]``, every key optional.

    Parameters
    ----------
    text : str
        TOML text.
    name : str
        The file, for the messages.

    Returns
    -------
    raw : dict
        The tables as read.
    spec : CellFileSpec
        The same validated (SI values).

    Raises
    ------
    ScenarioError
        Naming the file, the key and the line at fault.
    """
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        line = re.search(r"line (\d+)", str(exc))
        raise ScenarioError(name, "", f"TOML syntax error: {exc}", int(line.group(1)) if line else None) from None
    if "cell" not in raw:
        raise ScenarioError(name, "cell", "a cell file needs a [cell] table")
    try:
        return raw, CellFileSpec.model_validate(raw)
    except ValidationError as exc:
        raise first_error(exc, name, text, model=CellFileSpec) from None


def read_cell_file(path: str | Path) -> CellData:
    """Read and validate a cell file (TOML with a ``[cell]`` table, as a scenario includes it).

    Raises
    ------
    ScenarioError
        For a file that is missing, a folder, not UTF-8, not TOML, or whose ``[cell]``
        a scenario could not include (a wrong unit, a text where a number belongs ...).
    """
    path = Path(path)
    name = str(path)
    if path.is_dir():
        raise ScenarioError(name, "", "the cell file is a folder, not a file")
    try:
        text = path.read_bytes().decode("utf-8")
    except FileNotFoundError:
        raise ScenarioError(name, "", "cell file not found") from None
    except UnicodeDecodeError:
        raise ScenarioError(name, "", "the cell file is not UTF-8 text") from None
    except OSError as exc:
        raise ScenarioError(name, "", f"cannot read the cell file: {exc.strerror}") from None
    raw, spec = parse_cell_text(text, name)
    return CellData(path, raw, spec)
