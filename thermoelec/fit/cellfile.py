"""Cell files: the ``[cell]`` section (and comments) of the scenario format as a file of its own.

A scenario includes one with ``include = "cell.toml"``; its values are the
base, the scenario's own keys win. ``thermoelec fit`` writes them, with the
fitted uncertainties as comments.
"""

from __future__ import annotations

import math
import tomllib
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.inputs import ScenarioError, to_si

__all__ = ["CellData", "dump_toml", "read_cell_file"]


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
    """The SI values a fit needs from a cell file: capacity, OCV, mass, resistances, geometry."""

    def __init__(self, path: Path, raw: dict):
        self.path, self.raw = path, raw
        cell = raw.get("cell", {})
        name = str(path)

        def si(key: str, unit: str, si_unit: str | None = None, table: Mapping | None = None):
            source = cell if table is None else table
            if key not in source:
                return None
            try:
                return to_si(source[key], unit, si_unit or unit)
            except ValueError as exc:
                raise ScenarioError(name, f"cell.{key}", str(exc)) from None

        self.capacity = si("capacity", "Ah", "C")
        self.mass = si("mass", "kg")
        self.voltage_max = si("voltage_max", "V")
        self.voltage_min = si("voltage_min", "V")
        ocv = cell.get("ocv", {})
        self.ocv_soc = np.asarray(ocv["soc"], float) if "soc" in ocv else None
        self.ocv_voltage = np.array([to_si(v, "V", "V") for v in ocv["voltage"]]) if "voltage" in ocv else None
        self.resistance = None  # R0 + RC at mid SoC, reference temperature (for the OCV hysteresis)
        r0 = cell.get("r0", {})
        if "value" in r0:
            self.resistance = to_si(r0["value"], "ohm", "ohm")
        elif "values" in r0:
            values = np.asarray(r0["values"], float)
            self.resistance = float(np.median(values))
        if self.resistance is not None:
            for pair in cell.get("rc", []):
                res = pair.get("resistance")
                if isinstance(res, (int, float, str)):
                    self.resistance += to_si(res, "ohm", "ohm")
                elif isinstance(res, dict) and "values" in res:
                    self.resistance += float(np.median(np.asarray(res["values"], float)))

    def require(self, *keys: str) -> None:
        """Raise a clear error when the cell file lacks what a fit needs."""
        for key in keys:
            if getattr(self, key) is None:
                label = {"capacity": "cell.capacity", "ocv_soc": "cell.ocv.soc", "ocv_voltage": "cell.ocv.voltage",
                         "mass": "cell.mass"}[key]
                raise ScenarioError(str(self.path), label, "required by this fit (fit the OCV first, or add it)")


def read_cell_file(path: str | Path) -> CellData:
    """Read a cell file (TOML with a ``[cell]`` table)."""
    path = Path(path)
    try:
        raw = tomllib.loads(path.read_text())
    except FileNotFoundError:
        raise ScenarioError(str(path), "", "cell file not found") from None
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(str(path), "", f"TOML syntax error: {exc}") from None
    if "cell" not in raw:
        raise ScenarioError(str(path), "cell", "a cell file needs a [cell] table")
    return CellData(path, raw)
