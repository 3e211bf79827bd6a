"""Cycler and thermal test logs: reading, column mapping, sign convention, validation, pulse finding.

Cyclers name their columns differently and some log charge as positive; a
small mapping (command-line options or a TOML file) says which column is what,
in which unit, and which sign means discharge. Inside, every log is SI with
current > 0 discharging, like the rest of thermoelec. Every problem is a
:class:`~thermoelec.inputs.ScenarioError` naming the file and the column.
"""

from __future__ import annotations

import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.inputs import ScenarioError, check_increasing, numeric_column, read_csv_frame, to_si

__all__ = ["LogMapping", "Pulse", "TestLog", "find_pulses", "read_log", "read_mapping"]

#: Quantities a log may carry: default column name, unit of the numbers, SI unit.
QUANTITIES: dict[str, tuple[str, str, str]] = {
    "time": ("time_s", "s", "s"),
    "current": ("current_A", "A", "A"),
    "voltage": ("voltage_V", "V", "V"),
    "temperature": ("temperature_degC", "degC", "K"),
    "ambient": ("ambient_temperature_degC", "degC", "K"),
    "sink_temperature": ("sink_temperature_degC", "degC", "K"),
    "power": ("heater_power_W", "W", "W"),
}
#: A sample spacing this many times the median one is a gap in the log.
GAP_FACTOR = 20.0


@dataclass(frozen=True)
class LogMapping:
    """Which column holds which quantity, its unit, and the sign of discharge current."""

    columns: dict[str, str] = field(default_factory=lambda: {q: c for q, (c, _, _) in QUANTITIES.items()})
    units: dict[str, str] = field(default_factory=lambda: {q: u for q, (_, u, _) in QUANTITIES.items()})
    discharge_positive: bool = True


def read_mapping(path: str | Path | None = None, columns: Mapping[str, str] | None = None,
                 charge_positive: bool = False) -> LogMapping:
    """A mapping from a TOML file (``[columns]``, ``[units]``, ``sign``) and / or options, checked whole.

    ``sign`` is ``"discharge_positive"`` (default) or ``"charge_positive"``. Every unit
    must be one of its quantity's dimension (``units.current = "mA"``), every column
    name a text.

    Raises
    ------
    ScenarioError
        Naming the mapping file (or the option) and the key, with the unit expected.
    """
    cols = {q: c for q, (c, _, _) in QUANTITIES.items()}
    units = {q: u for q, (_, u, _) in QUANTITIES.items()}
    discharge_positive = not charge_positive
    if path is not None:
        source = str(path)
        data = _read_mapping_file(Path(path))
        unknown = set(data) - {"columns", "units", "sign"}
        if unknown:
            raise ScenarioError(source, sorted(unknown)[0], "unknown key (valid: columns, units, sign)")
        for section, target in (("columns", cols), ("units", units)):
            table = data.get(section, {})
            if not isinstance(table, dict):
                raise ScenarioError(source, section, f"expected a table [{section}] of quantity = \"text\"")
            for key, value in table.items():
                if key not in QUANTITIES:
                    raise ScenarioError(source, f"{section}.{key}",
                                        f"unknown quantity (valid: {', '.join(QUANTITIES)})")
                if not isinstance(value, str) or not value.strip():
                    raise ScenarioError(source, f"{section}.{key}", f"expected a text, got {value!r}")
                if section == "units":
                    _check_unit(value, key, source, f"units.{key}")
                target[key] = value
        sign = data.get("sign", "discharge_positive")
        if sign not in ("discharge_positive", "charge_positive"):
            raise ScenarioError(source, "sign", f"{sign!r} is not allowed: 'discharge_positive' or 'charge_positive'")
        discharge_positive = sign == "discharge_positive" and not charge_positive
    for key, value in (columns or {}).items():
        if key not in QUANTITIES:
            raise ScenarioError("--column", key, f"unknown quantity (valid: {', '.join(QUANTITIES)})")
        cols[key] = value
    return LogMapping(cols, units, discharge_positive)


def _read_mapping_file(path: Path) -> dict:
    """A mapping file's tables; every problem of reading it named."""
    source = str(path)
    if path.is_dir():
        raise ScenarioError(source, "", "the mapping file is a folder, not a file")
    try:
        return tomllib.loads(path.read_bytes().decode("utf-8"))
    except FileNotFoundError:
        raise ScenarioError(source, "", "mapping file not found") from None
    except UnicodeDecodeError:
        raise ScenarioError(source, "", "the mapping file is not UTF-8 text") from None
    except OSError as exc:
        raise ScenarioError(source, "", f"cannot read the mapping file: {exc.strerror}") from None
    except tomllib.TOMLDecodeError as exc:
        raise ScenarioError(source, "", f"TOML syntax error: {exc}") from None


def _check_unit(unit: str, quantity: str, source: str, key: str) -> None:
    """Refuse a log unit that is not one of its quantity's dimension, naming the unit expected."""
    default, si = QUANTITIES[quantity][1], QUANTITIES[quantity][2]
    try:
        to_si(f"1 {unit}", default, si)
    except ValueError as exc:
        reason = f"not a unit of {quantity}: expected one like {default!r}" if "wrong dimension" in str(exc) else exc
        raise ScenarioError(source, key, f"{unit!r} is {reason}" if isinstance(reason, str) else str(reason)
                            ) from None


@dataclass(frozen=True)
class TestLog:
    """One log in SI units; current > 0 discharges. Missing quantities are ``None``."""

    path: Path
    time: np.ndarray
    current: np.ndarray | None = None
    voltage: np.ndarray | None = None
    temperature: np.ndarray | None = None
    ambient: np.ndarray | None = None
    sink_temperature: np.ndarray | None = None
    power: np.ndarray | None = None

    @property
    def name(self) -> str:
        return str(self.path)

    def charge(self) -> np.ndarray:
        """Charge discharged since the start [C] (trapezoid-free: zero-order hold of each sample)."""
        assert self.current is not None
        dt = np.diff(self.time)
        return np.concatenate([[0.0], np.cumsum(self.current[:-1] * dt)])


def _scale(unit: str, si: str, name: str, column: str) -> tuple[float, float]:
    """Factor and offset from the log's unit to SI (temperatures have an offset); the unit was checked."""
    try:
        zero = to_si(f"0 {unit}", unit, si)
        one = to_si(f"1 {unit}", unit, si)
    except ValueError as exc:
        raise ScenarioError(name, column, f"unit: {exc}") from None
    return one - zero, zero


def read_log(path: str | Path, mapping: LogMapping, required: tuple[str, ...],
             optional: tuple[str, ...] = (), min_rows: int = 10) -> TestLog:
    """Read a CSV log, map and convert its columns, and validate it.

    Raises
    ------
    ScenarioError
        Missing file or column, a non-numeric or NaN value, time not increasing,
        a gap in the samples, or fewer than ``min_rows`` rows.
    """
    path = Path(path)
    name = str(path)
    frame = read_csv_frame(path, "", "log")
    values: dict[str, np.ndarray] = {}
    for quantity in ("time", *required, *optional):
        column = mapping.columns[quantity]
        if column not in frame.columns:
            if quantity in optional:
                continue
            raise ScenarioError(name, column, f"column {column!r} ({quantity}) is missing; columns: "
                                f"{', '.join(frame.columns)}; map it with --column {quantity}=NAME or a mapping file")
        raw = numeric_column(frame, column, name)
        factor, offset = _scale(mapping.units[quantity], QUANTITIES[quantity][2], name, column)
        values[quantity] = raw * factor + offset
    time = values["time"]
    if len(time) < min_rows:
        raise ScenarioError(name, mapping.columns["time"], f"too few points: {len(time)} rows, at least {min_rows} "
                            "needed")
    check_increasing(time, name, mapping.columns["time"])
    steps = np.diff(time)
    median = float(np.median(steps))
    if steps.max() > GAP_FACTOR * median:
        row = int(np.argmax(steps)) + 1
        raise ScenarioError(name, mapping.columns["time"], f"gap in the log: {steps.max():g} s between rows {row} and "
                            f"{row + 1} (lines {row + 1}-{row + 2}), the usual spacing is {median:g} s")
    if "current" in values and not mapping.discharge_positive:
        values["current"] = -values["current"]
    return TestLog(path, time, **{k: v for k, v in values.items() if k != "time"})


@dataclass(frozen=True)
class Pulse:
    """A group of current pulses between rests: sample indices of the window and of each pulse."""

    start: int          # the last rest sample before the first pulse
    end: int            # the last sample of the relaxation after the last pulse
    pulses: tuple[tuple[int, int], ...]  # (first, last) sample with current, per pulse


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """``(first, last)`` index of each run of True."""
    if not mask.any():
        return []
    padded = np.concatenate([[False], mask, [False]])
    edges = np.flatnonzero(np.diff(padded.astype(int)))
    return [(int(a), int(b) - 1) for a, b in zip(edges[::2], edges[1::2], strict=True)]


def find_pulses(log: TestLog, max_pulse: float = 60.0, min_rest: float = 20.0,
                relaxation: float = 600.0) -> list[Pulse]:
    """Pulse windows of a pulse (HPPC) test, found from the current trace.

    A current run no longer than ``max_pulse`` seconds is a pulse; longer runs
    (SoC steps) separate the windows. Pulses less than ``relaxation`` s apart
    share a window. A window starts at the last rest sample before its first
    pulse (after at least ``min_rest`` s of rest) and ends after up to
    ``relaxation`` s of rest after its last pulse. Raises :class:`ScenarioError`
    when no pulse is found or the current sign looks inverted (discharge pulses
    that raise the voltage).
    """
    assert log.current is not None and log.voltage is not None
    current, time = log.current, log.time
    threshold = 0.02 * float(np.max(np.abs(current)))
    runs = _runs(np.abs(current) > threshold)

    def duration(run: tuple[int, int]) -> float:
        after = min(run[1] + 1, len(time) - 1)
        return float(time[after] - time[run[0]])

    windows: list[Pulse] = []
    i = 0
    while i < len(runs):
        if duration(runs[i]) > max_pulse:
            i += 1
            continue
        group = [runs[i]]
        j = i + 1
        while j < len(runs) and duration(runs[j]) <= max_pulse and \
                time[runs[j][0]] - time[group[-1][1]] <= relaxation:
            group.append(runs[j])
            j += 1
        rest_begin = runs[i - 1][1] + 1 if i > 0 else 0
        start = group[0][0] - 1
        if start >= 0 and time[group[0][0]] - time[rest_begin] >= min_rest:
            next_start = runs[j][0] if j < len(runs) else len(time)
            last = group[-1][1]
            end = min(last + 1, len(time) - 1)
            while end + 1 < next_start and time[end + 1] - time[last + 1] <= relaxation:
                end += 1
            windows.append(Pulse(start, end, tuple(group)))
        i = j
    if not windows:
        raise ScenarioError(log.name, "current", f"no pulses found: a pulse is a current step of at most "
                            f"{max_pulse:g} s after at least {min_rest:g} s of rest")
    # a discharge pulse lowers the voltage; if the pulses raise it, the sign is inverted
    signs = [np.sign(log.voltage[w.pulses[0][0]] - log.voltage[w.start]) * np.sign(current[w.pulses[0][0]])
             for w in windows]
    if np.mean(signs) > 0:
        raise ScenarioError(log.name, "current", "the voltage rises on discharge pulses: the log's sign convention "
                            "looks inverted (charge-positive); give --charge-positive or sign in the mapping file")
    return windows


def summarize(log: TestLog) -> dict[str, Any]:
    """A few facts of a log for reports."""
    return {"file": log.name, "rows": len(log.time), "duration_s": float(log.time[-1] - log.time[0])}
