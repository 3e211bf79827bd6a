"""The ``thermoelec fit`` jobs: logs in, a cell file and a fit report out.

``ocv``: a slow discharge and a slow charge -> ``[cell]`` capacity and
``[cell.ocv]``. ``pulse``: pulse-test logs at one or more temperatures plus a
cell file with the capacity and OCV -> ``[cell.r0]`` and ``[[cell.rc]]`` as
tables over SoC x temperature (or a table over SoC with an activation energy).
``thermal``: a heating-and-cooling trace -> the heat capacity (and
``cell.specific_heat`` when the mass is known) and the conductances.
Each writes ``OUT`` (TOML, includable by a scenario) and ``OUT``'s stem +
``_report.html`` with figures of data against model, residuals and a table of
parameters with 95 % confidence intervals.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from thermoelec.fit import fitting, sanity
from thermoelec.fit.cellfile import CellData, dump_toml, parse_cell_text, read_cell_file
from thermoelec.fit.logs import LogMapping, read_log
from thermoelec.inputs import ScenarioError
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.thermal import biot_number

__all__ = ["FitOutcome", "fit_ocv_logs", "fit_pulse_logs", "fit_thermal_log"]


class FitOutcome:
    """What a fit job produced: the cell-file tables, parameter rows for the report, figures, messages."""

    def __init__(self, kind: str, logs: Sequence[str]):
        self.kind, self.logs = kind, list(logs)
        self.tables: dict[str, Any] = {}
        self.comments: dict[str, list[str]] = {}
        self.parameters: list[tuple[str, str, str]] = []  # name, value, 95 % interval
        self.figures: list[tuple[Figure, str]] = []
        self.notes: list[str] = []
        self.warnings: list[str] = []  # doubtful results (:mod:`thermoelec.fit.sanity`), also among the notes

    def warn(self, warnings: list[str]) -> None:
        """Keep warnings of the sanity checks, for the terminal and (as notes) the report."""
        self.warnings += warnings
        self.notes += [f"warning: {w}" for w in warnings]

    def check(self) -> None:
        """Refuse to write a cell file a scenario could not include.

        Raises
        ------
        ScenarioError
            Naming the logs and the key the scenario loader would reject.
        """
        try:
            text = self.cell_file_text()
        except ValueError as exc:  # a parameter that is not a finite number
            raise ScenarioError(", ".join(self.logs), "", f"the fit gave a value no cell file can hold: {exc}"
                                ) from None
        try:
            parse_cell_text(text, "the fitted cell file")
        except ScenarioError as exc:
            raise ScenarioError(", ".join(self.logs), exc.key, f"the fitted cell file would not load: {exc.message}"
                                ) from None

    def cell_file_text(self) -> str:
        stamp = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
        header = [f"fitted by thermoelec fit {self.kind} on {stamp} from: {', '.join(self.logs)}",
                  "include it from a scenario with include = \"<this file>\"; the scenario's own keys win"]
        return dump_toml(self.tables, header, self.comments)

    def write(self, out: str | Path) -> list[Path]:
        """Write the cell file and the report beside it."""
        from thermoelec.output.report import fit_report

        out = Path(out)
        out.parent.mkdir(parents=True, exist_ok=True)
        out.write_text(self.cell_file_text())
        report = out.with_name(out.stem + "_report.html")
        report.write_text(fit_report(self), encoding="utf-8")
        return [out, report]


def _degc(kelvin: float) -> float:
    return float(kelvin) - ZERO_CELSIUS


def _base_tables(cell: CellData | None) -> dict[str, Any]:
    """The tables of an existing cell file, flattened to dotted names, to extend."""
    if cell is None:
        return {}
    tables: dict[str, Any] = {}

    def walk(prefix: str, table: dict) -> None:
        scalars = {k: v for k, v in table.items() if not isinstance(v, dict) and not
                   (isinstance(v, list) and v and isinstance(v[0], dict))}
        tables[prefix] = scalars
        for key, value in table.items():
            if isinstance(value, dict):
                walk(f"{prefix}.{key}", value)
            elif isinstance(value, list) and value and isinstance(value[0], dict):
                tables[f"{prefix}.{key}"] = value

    for name, table in cell.raw.items():
        if isinstance(table, dict):
            walk(name, table)
    return tables


# ---------------------------------------------------------------------------
# OCV
# ---------------------------------------------------------------------------


def fit_ocv_logs(paths: Sequence[str], mapping: LogMapping, points: int = 21,
                 cell_path: str | None = None) -> FitOutcome:
    """OCV and capacity from a slow discharge log and a slow charge log (in that order)."""
    if len(paths) != 2:
        raise ScenarioError("fit ocv", "LOG", "give two logs: the slow discharge, then the slow charge")
    discharge, charge = (read_log(p, mapping, ("current", "voltage"), ("temperature",), min_rows=50) for p in paths)
    cell = read_cell_file(cell_path) if cell_path else None
    result = fitting.fit_ocv(discharge, charge, points, cell.resistance if cell else None)
    outcome = FitOutcome("ocv", paths)
    outcome.warn(sanity.check_ocv(result, paths[0], paths[1]))
    outcome.tables = _base_tables(cell)
    outcome.tables.setdefault("cell", {})
    outcome.tables["cell"]["capacity"] = f"{result.capacity_C / 3600:.6g} Ah"
    temperature = discharge.temperature
    ocv_table: dict[str, Any] = {"soc": np.round(result.soc, 6), "voltage": np.round(result.voltage, 5)}
    if temperature is not None:
        ocv_table["reference_temperature"] = f"{_degc(np.mean(temperature)):.2f} degC"
    outcome.tables["cell.ocv"] = ocv_table
    outcome.comments["cell.ocv"] = [
        f"average of the C/{result.capacity_C / 3600 / result.discharge_current_A:.0f} discharge and the "
        "charge, weighted by their currents so the resistive drop cancels",
        f"hysteresis half-gap (incl. resistive drop): {1e3 * np.min(result.half_gap_V):.1f}.."
        f"{1e3 * np.max(result.half_gap_V):.1f} mV",
    ]
    outcome.parameters = [
        ("capacity (discharge)", f"{result.capacity_C / 3600:.5g} Ah", "charge counted"),
        ("capacity (charge)", f"{result.charge_capacity_C / 3600:.5g} Ah", "charge counted"),
        ("coulombic ratio", f"{result.capacity_C / result.charge_capacity_C:.5f}", ""),
        ("discharge / charge current", f"{result.discharge_current_A:.4g} / {result.charge_current_A:.4g} A", ""),
        ("half-gap, median", f"{1e3 * np.median(result.half_gap_V):.2f} mV", "includes the resistive drop"),
    ]
    if result.hysteresis_V is not None:
        outcome.parameters.append(("hysteresis, median", f"{1e3 * np.median(result.hysteresis_V):.2f} mV",
                                   "half-gap less I (R0 + sum R_k) from the cell file"))
    fig = Figure(figsize=(9, 6), layout="constrained")
    ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
    c = result.curves
    ax.plot(c["discharge_soc"], c["discharge_voltage"], ",", color="C0", label="discharge")
    ax.plot(c["charge_soc"], c["charge_voltage"], ",", color="C3", label="charge")
    ax.plot(result.soc, result.voltage, "k.-", lw=1, label="fitted OCV")
    ax.set_ylabel("cell voltage [V]")
    ax.legend()
    res.plot(result.soc, 1e3 * result.half_gap_V, "k.-")
    res.set_ylabel("half-gap [mV]")
    res.set_xlabel("SoC [-]")
    outcome.figures.append((fig, "Slow discharge and charge against SoC, and the fitted OCV; below, half the "
                            "gap between the curves."))
    return outcome


# ---------------------------------------------------------------------------
# Pulses
# ---------------------------------------------------------------------------


def fit_pulse_logs(paths: Sequence[str], mapping: LogMapping, cell_path: str, n_rc: int = 1,
                   temperatures: Sequence[float] | None = None, arrhenius: bool = False) -> FitOutcome:
    """R0 and RC pairs over SoC and temperature from pulse-test logs (one per temperature)."""
    cell = read_cell_file(cell_path)
    cell.require("capacity", "ocv_soc", "ocv_voltage")
    if temperatures is not None and len(temperatures) != len(paths):
        raise ScenarioError("--temperature", "", f"give one temperature per log ({len(paths)} logs)")
    per_log = []
    for i, path in enumerate(paths):
        log = read_log(path, mapping, ("current", "voltage"), ("temperature",), min_rows=50)
        given = None if temperatures is None else temperatures[i]
        per_log.append(fitting.fit_pulse_log(log, cell.capacity, cell.ocv_soc, cell.ocv_voltage, n_rc, given))
    outcome = FitOutcome("pulse", paths)
    outcome.warn(sanity.check_pulses(per_log, paths, n_rc))
    tables = fitting.tabulate_pulses(per_log)
    outcome.notes += _voltage_limit_notes(paths, mapping, cell) + _pulse_residual_notes(per_log)
    outcome.tables = _base_tables(cell)
    outcome.tables.pop("cell.rc", None)
    soc = np.round(tables.soc, 4)
    temps = [f"{_degc(t):.2f} degC" for t in tables.temperature]
    if arrhenius and len(tables.temperature) >= 2:
        fit = fitting.fit_arrhenius(tables.temperature, tables.r0, tables.reference_temperature)
        sanity.check_arrhenius(fit.activation_energy, paths, written=True)
        outcome.tables["cell.r0"] = {"soc": soc, "values": [np.round(fit.reference_values, 7)],
                                     "activation_energy": f"{fit.activation_energy:.5g} J/mol",
                                     "reference_temperature": f"{_degc(fit.reference_temperature):.2f} degC"}
    else:
        outcome.tables["cell.r0"] = {"soc": soc, "temperature": temps, "values": np.round(tables.r0, 7)}
    rc_tables = []
    for k in range(len(tables.rc_time_constant)):
        rc_tables.append({"resistance": {"soc": soc, "temperature": temps,
                                         "values": np.round(tables.rc_resistance[k], 7)},
                          "time_constant": f"{tables.rc_time_constant[k]:.5g} s",
                          "reference_temperature": f"{_degc(tables.reference_temperature):.2f} degC"})
    outcome.tables["cell.rc"] = rc_tables
    if len(tables.temperature) >= 2:
        fit = fitting.fit_arrhenius(tables.temperature, tables.r0, tables.reference_temperature)
        if not arrhenius:
            outcome.warn(sanity.check_arrhenius(fit.activation_energy, paths, written=False))
        outcome.parameters.append(("R0 activation energy", f"{fit.activation_energy / 1e3:.4g} kJ/mol",
                                   f"± {fit.activation_energy_ci / 1e3:.2g} kJ/mol"))
        outcome.comments["cell.r0"] = [f"Arrhenius fit over the temperatures: Ea = {fit.activation_energy / 1e3:.4g} "
                                       f"± {fit.activation_energy_ci / 1e3:.2g} kJ/mol (95 %)"]
    for k, tau in enumerate(tables.rc_time_constant):
        outcome.parameters.append((f"RC {k + 1} time constant at {_degc(tables.reference_temperature):.1f} degC",
                                   f"{tau:.4g} s", "median over the pulses"))
    for fits in per_log:
        for f in fits:
            rc = "; ".join(f"R{k + 1} {1e3 * f.rc_resistance[k]:.3f} ± {1e3 * f.rc_resistance_ci[k]:.2g} mΩ, "
                           f"τ{k + 1} {f.rc_time_constant[k]:.3g} ± {f.rc_time_constant_ci[k]:.2g} s"
                           for k in range(len(f.rc_resistance)))
            outcome.parameters.append((f"pulse at SoC {f.soc:.3f}, {_degc(f.temperature):.1f} degC",
                                       f"R0 {1e3 * f.r0:.3f} mΩ (step {1e3 * f.r0_step:.3f}); {rc}",
                                       f"R0 ± {1e3 * f.r0_ci:.2g} mΩ; rms {1e3 * f.rms_V:.2f} mV"))
    outcome.figures += _pulse_figures(per_log, tables)
    return outcome


#: A pulse window's OCV interpolation may err by this much before a note says the OCV grid is too coarse [V]
#: (five times a cycler's 1 mV voltage resolution, a few percent of a 1C pulse's resistive step).
OCV_GRID_TOLERANCE = 5e-3


def _voltage_limit_notes(paths: Sequence[str], mapping: LogMapping, cell: CellData) -> list[str]:
    """A warning for each log that leaves the cell file's voltage limits (when the file gives them)."""
    notes = []
    for path in paths:
        log = read_log(path, mapping, ("current", "voltage"), ("temperature",), min_rows=50)
        high, low = float(np.max(log.voltage)), float(np.min(log.voltage))
        if cell.voltage_max is not None and high > cell.voltage_max:
            notes.append(f"warning: {path} reaches {high:.4g} V, above the cell file's voltage_max "
                         f"({cell.voltage_max:.4g} V): the fit extrapolates the cell outside its limits; check the "
                         "test procedure (or the limits)")
        if cell.voltage_min is not None and low < cell.voltage_min:
            notes.append(f"warning: {path} falls to {low:.4g} V, below the cell file's voltage_min "
                         f"({cell.voltage_min:.4g} V)")
    return notes


def _pulse_residual_notes(per_log) -> list[str]:
    """Notes on the pulse windows: structured residuals (model mismatch), an OCV grid too coarse for a window."""
    fits = [f for fits in per_log for f in fits]
    notes = []
    structured = [f for f in fits if f.residuals is not None and f.residuals.mismatch]
    if structured:
        lag1 = np.median([f.residuals.lag1 for f in structured])
        notes.append(f"model mismatch in {len(structured)} of {len(fits)} pulse windows: their residuals are "
                     f"autocorrelated (median lag-1 {lag1:.2f}); the intervals are Newey-West (HAC) intervals, "
                     "widened for it; consider --rc 2")
    coarse: dict[float, list] = {}
    for f in fits:
        if f.ocv_error_V > OCV_GRID_TOLERANCE:
            coarse.setdefault(round(f.soc, 2), []).append(f)
    for soc, group in sorted(coarse.items()):
        temps = ", ".join(f"{_degc(f.temperature):.0f}" for f in group)
        notes.append(f"warning: the OCV grid is too coarse for the pulses at SoC {soc:.2f} ({temps} degC): linear "
                     f"interpolation between its points may err by up to "
                     f"{1e3 * max(f.ocv_error_V for f in group):.1f} mV over the window (the OCV's curvature there), "
                     "which the fitted R0 and RC absorb; fit the OCV on a finer grid (fit ocv --points)")
    return notes


def _thermal_residual_notes(result) -> list[str]:
    """The residual structure of a thermal fit, and a model-mismatch note when it is systematic."""
    r = result.residuals
    if r is None:
        return []
    text = (f"residuals: lag-1 autocorrelation {r.lag1:.2f}, Durbin-Watson {r.durbin_watson:.2f}, largest "
            f"{1e3 * r.largest:.0f} mK; intervals by the Newey-West (HAC) covariance over {r.bandwidth} lags, "
            f"{r.inflation:.1f} times the independent-noise ones")
    if r.mismatch:
        text = ("model mismatch: the residuals are systematic, not noise (a lumped node, a heat input held between "
                "samples or a heater that switched between them may explain it); " + text)
    return [text]


def _pulse_figures(per_log, tables) -> list[tuple[Figure, str]]:
    figures = []
    fig = Figure(figsize=(10, 6), layout="constrained")
    ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
    fits = per_log[len(per_log) // 2]
    for f in fits[:: max(len(fits) // 3, 1)]:
        t = f.time - f.time[0]
        ax.plot(t, f.voltage, ".", ms=2, label=f"data, SoC {f.soc:.2f}")
        ax.plot(t, f.model, "k-", lw=0.8)
        res.plot(t, 1e3 * (f.voltage - f.model), ".", ms=2)
    ax.set_ylabel("cell voltage [V]")
    ax.legend(fontsize=8)
    res.set_ylabel("residual [mV]")
    res.set_xlabel("time in the pulse window [s]")
    figures.append((fig, f"Pulse windows at {_degc(fits[0].temperature):.1f} degC: data (dots) and the fitted model "
                         "(lines), residuals below."))
    fig = Figure(figsize=(10, 4.5), layout="constrained")
    axes = fig.subplots(1, 1 + len(tables.rc_time_constant))
    for i, temp in enumerate(tables.temperature):
        axes[0].plot(tables.soc, 1e3 * tables.r0[i], "o-", label=f"{_degc(temp):.1f} degC")
        for k in range(len(tables.rc_time_constant)):
            axes[1 + k].plot(tables.soc, 1e3 * tables.rc_resistance[k, i], "o-")
    axes[0].set_ylabel("R0 [mΩ]")
    axes[0].legend(fontsize=8)
    for k in range(len(tables.rc_time_constant)):
        axes[1 + k].set_ylabel(f"R{k + 1} [mΩ]")
    for ax in axes:
        ax.set_xlabel("SoC [-]")
    figures.append((fig, "Fitted resistances over SoC, one line per temperature."))
    return figures


# ---------------------------------------------------------------------------
# Thermal
# ---------------------------------------------------------------------------


def fit_thermal_log(path: str, mapping: LogMapping, cell_path: str | None = None,
                    ambient: float | None = None, mass: float | None = None) -> FitOutcome:
    """Heat capacity and conductance(s) from one heating-and-cooling log; ``mass`` [kg] (or the cell
    file's) turns the heat capacity into ``cell.specific_heat``."""
    log = read_log(path, mapping, ("temperature", "power"), ("ambient", "sink_temperature"), min_rows=20)
    cell = read_cell_file(cell_path) if cell_path else None
    result = fitting.fit_thermal(log, ambient=ambient)
    outcome = FitOutcome("thermal", [path])
    outcome.tables = _base_tables(cell)
    two_node = result.sink_heat_capacity is not None
    label = "cell-to-sink" if two_node else "cell-to-ambient"
    outcome.parameters = [
        ("heat capacity of the cell", f"{result.heat_capacity:.5g} J/K", f"± {result.heat_capacity_ci:.2g} J/K"),
        (f"{label} conductance", f"{result.conductance:.5g} W/K", f"± {result.conductance_ci:.2g} W/K"),
        ("time constant C / G", f"{result.time_constant:.5g} s", ""),
        ("rms residual", f"{1e3 * result.rms_K:.1f} mK", ""),
    ]
    outcome.notes += _thermal_residual_notes(result)
    if two_node:
        outcome.parameters += [
            ("sink heat capacity", f"{result.sink_heat_capacity:.5g} J/K", f"± {result.sink_heat_capacity_ci:.2g} J/K"),
            ("sink-to-ambient conductance", f"{result.sink_conductance:.5g} W/K",
             f"± {result.sink_conductance_ci:.2g} W/K"),
        ]
    comments = [f"rig: heat capacity {result.heat_capacity:.5g} J/K, {label} conductance {result.conductance:.5g} W/K"
                + (f", sink {result.sink_heat_capacity:.5g} J/K, sink-to-ambient {result.sink_conductance:.5g} W/K"
                   if two_node else "")
                + " (conductances belong to the rig: put your pack's in its [thermal] section)"]
    mass = mass if mass is not None else (cell.mass if cell is not None else None)
    outcome.warn(sanity.check_thermal(result, path, mass))
    if mass is not None:
        outcome.tables.setdefault("cell", {})["mass"] = f"{mass:.6g} kg"
        outcome.tables["cell"]["specific_heat"] = f"{result.heat_capacity / mass:.5g} J/kg/K"
        outcome.parameters.append(("specific heat", f"{result.heat_capacity / mass:.5g} J/(kg K)",
                                   f"± {result.heat_capacity_ci / mass:.2g}"))
    else:
        outcome.notes.append("no cell mass (give --mass, or --cell with cell.mass): the specific heat is not written")
    geometry = _geometry(cell)
    if geometry is not None and not two_node:
        volume, area, k = geometry
        bi = biot_number(result.conductance / area, volume, area, k)
        outcome.parameters.append(("Biot number of the rig", f"{bi:.3g}", "lumped node valid below 0.1"))
        if bi >= 0.1:
            outcome.notes.append(f"Biot number {bi:.3g} >= 0.1: the lumped fit averages a core-to-surface gradient")
    outcome.comments["cell"] = comments
    outcome.tables.setdefault("cell", {})
    fig = Figure(figsize=(9, 6), layout="constrained")
    ax, res = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
    ax.plot(result.time, result.temperature - ZERO_CELSIUS, ".", ms=2, label="cell, data")
    ax.plot(result.time, result.model - ZERO_CELSIUS, "k-", lw=1, label="cell, model")
    res.plot(result.time, 1e3 * (result.temperature - result.model), ".", ms=2)
    if two_node:
        ax.plot(result.time, result.sink_temperature - ZERO_CELSIUS, ".", ms=2, label="sink, data")
        ax.plot(result.time, result.sink_model - ZERO_CELSIUS, "k--", lw=1, label="sink, model")
    ax.set_ylabel("temperature [degC]")
    ax.legend()
    res.set_ylabel("residual [mK]")
    res.set_xlabel("time [s]")
    outcome.figures.append((fig, "Heating and cooling trace against the fitted lumped model, residuals below."))
    return outcome


def _geometry(cell: CellData | None) -> tuple[float, float, float] | None:
    """Volume [m³], surface [m²] and conductivity [W/(m K)] from the cell file's geometry keys."""
    if cell is None or cell.geometry is None:
        return None
    geometry = cell.geometry
    return geometry.volume(), geometry.surface_area(), geometry.thermal_conductivity
