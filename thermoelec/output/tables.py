"""Plain-text output for the terminal: value formatting, the run summary, the case comparison.

Owns every table printed on the terminal; the numbers come from analysis/
(the summary, :func:`thermoelec.analysis.compare.comparison_rows`). Imports from
analysis/ and below only; never from fit/, the API or the command line.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any, TextIO

from thermoelec.analysis.compare import CaseOutcome, comparison_rows
from thermoelec.analysis.results import ENERGY_ROWS

__all__ = ["PACK_ROWS", "SUMMARY_ROWS", "check_rows", "format_comparison", "format_value", "print_summary",
           "verdict_line"]


def format_value(value: Any, unit: str = "", digits: int = 4) -> str:
    """A value for the terminal: 4 significant digits (no ``-0``), units, yes/no, n/a."""
    if value is None:
        return "n/a"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value + 0.0:.{digits}g}{(' ' + unit) if unit else ''}"
    return f"{value}{(' ' + unit) if unit else ''}"


SUMMARY_ROWS = (
    ("completed", "completed", ""),
    ("stop reason", "stop_reason", ""),
    ("duration", "duration_s", "s"),
    ("peak cell temperature", "cell_temperature_max_degC", "degC"),
    ("cell temperature rise", "cell_temperature_rise_K", "K"),
    ("peak sink temperature", "sink_temperature_max_degC", "degC"),
    ("minimum pack voltage", "voltage_min_V", "V"),
    ("cell voltage margin", "voltage_margin_min_V", "V"),
    ("peak current", "current_max_A", "A"),
    *ENERGY_ROWS,
    ("heat generated", "heat_generated_Wh", "Wh"),
    ("heat to ambient", "heat_to_ambient_Wh", "Wh"),
    ("heat to coolant", "heat_to_coolant_Wh", "Wh"),
    ("heater energy", "heater_energy_Wh", "Wh"),
    ("charge throughput", "charge_throughput_Ah", "Ah"),
    ("final SoC", "soc_end", ""),
    ("peak C-rate discharge / charge", "c_rate_discharge_max", ""),
    ("", "c_rate_charge_max", ""),
    ("time above hot temperature", "time_above_hot_temperature_s", "s"),
    ("time charging below 0 degC", "time_charging_below_0degC_s", "s"),
    ("Arrhenius-equivalent time", "equivalent_time_at_reference_s", "s"),
)


#: A resolved pack's summary keys: label, key, unit (cells numbered from 1).
PACK_ROWS: tuple[tuple[str, str, str], ...] = (
    ("cells", "cells", ""),
    ("hottest cell", "hottest_cell", ""),
    ("  its group", "hottest_cell_group", ""),
    ("  its place in the group", "hottest_cell_member", ""),
    ("  its position in the layout", "hottest_cell_position", ""),
    ("  its peak temperature", "hottest_cell_temperature_max_degC", "degC"),
    ("  when", "hottest_cell_time_s", "s"),
    ("peak of the mean cell temperature", "cell_temperature_mean_max_degC", "degC"),
    ("largest cell-to-cell temperature difference", "cell_temperature_spread_max_K", "K"),
    ("  when", "cell_temperature_spread_time_s", "s"),
    ("SoC spread at the end", "soc_spread_end", ""),
    ("largest current share (cell over its group's mean)", "current_share_max", ""),
    ("  which cell", "current_share_max_cell", ""),
    ("  when", "current_share_max_time_s", "s"),
    ("first cell at a limit", "first_limit_cell", ""),
    ("  its group", "first_limit_group", ""),
    ("  the limit", "first_limit_event", ""),
)


def verdict_line(summary: Mapping[str, Any]) -> str:
    """The verdict in one line: ``verdict: PASS`` or ``verdict: FAIL (voltage_min, completed)``."""
    failed = [row["check"] for row in summary.get("checks", []) if not row["passed"]]
    text = str(summary.get("verdict", "")).upper()
    return f"verdict: {text}" + (f" ({', '.join(failed)})" if failed else "")


def check_rows(checks: Sequence[Mapping[str, Any]]) -> list[list[str]]:
    """The checks of a verdict as text cells: limit, its value, worst in the mission, margin, pass / FAIL."""
    return [[row["description"], format_value(row["limit"], row["limit_unit"]), format_value(row["worst"], row["unit"]),
             format_value(row["margin"], row["margin_unit"]), "pass" if row["passed"] else "FAIL"] for row in checks]


def print_summary(summary: Mapping[str, Any], stream: TextIO) -> None:
    """A short table of the main metrics (a resolved pack's cells too), the stop explained, notes and warnings;
    the limits and the verdict last."""
    metrics = SUMMARY_ROWS + (PACK_ROWS if "pack_model" in summary else ())  # a resolved pack's cells
    width = max(len(label) for label, _, _ in metrics)
    print(f"scenario: {summary.get('scenario', '')}", file=stream)
    for label, key, unit in metrics:
        print(f"  {label:<{width}}  {format_value(summary.get(key), unit)}", file=stream)
    if summary.get("stop_explanation"):
        print(f"  {summary['stop_explanation']}", file=stream)
    for note in summary.get("notes", []):
        print(f"  note: {note}", file=stream)
    for warning in summary.get("warnings", []):
        print(f"  warning: {warning}", file=stream)
    rows = check_rows(summary.get("checks", []))
    if rows:
        print("  limits:", file=stream)
        widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
        for row in rows:
            print("    " + "  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)).rstrip(), file=stream)
    print(verdict_line(summary), file=stream)


def format_comparison(outcomes: Sequence[CaseOutcome]) -> str:
    """The case comparison as aligned text for the terminal: a row per :data:`COMPARISON_ROWS` entry, a column
    per case (values with their units, as :func:`format_value` writes them)."""
    metrics = [o.metrics() for o in outcomes]
    header = ["", *(o.name for o in outcomes)]
    lines = [header]
    for label, key, unit in comparison_rows(outcomes):
        lines.append([label, *(format_value(m.get(key), unit) for m in metrics)])
    widths = [max(len(row[i]) for row in lines) for i in range(len(header))]
    return "\n".join("  ".join(cell.ljust(w) if i == 0 else cell.rjust(w)
                               for i, (cell, w) in enumerate(zip(row, widths, strict=True))).rstrip()
                     for row in lines)
