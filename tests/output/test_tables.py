"""Terminal tables: values with units, and the case comparison aligned in columns."""

from __future__ import annotations

from dataclasses import dataclass

from thermoelec.analysis.compare import COMPARISON_ROWS
from thermoelec.output.tables import format_comparison, format_value


@dataclass
class _Case:
    """Stands in for a CaseOutcome: a name and its metrics."""

    name: str
    values: dict

    def metrics(self) -> dict:
        return self.values


def test_format_value_digits_units_and_flags():
    assert format_value(12.34567, "Wh") == "12.35 Wh"
    assert format_value(True) == "yes" and format_value(None, "V") == "n/a"


def test_format_comparison_has_a_row_per_comparison_row_and_a_column_per_case():
    cases = [_Case("warm", {"verdict": "pass", "completed": True, "energy_discharged_Wh": 41.234}),
             _Case("very cold", {"verdict": "fail", "completed": False, "energy_discharged_Wh": 7.5})]
    lines = format_comparison(cases).splitlines()
    assert len(lines) == 1 + len(COMPARISON_ROWS)
    assert lines[0].split() == ["warm", "very", "cold"]
    energy = next(line for line in lines if line.startswith("energy discharged at the terminals"))
    assert energy.split()[-4:] == ["41.23", "Wh", "7.5", "Wh"]
    # the case columns are right-aligned, so every row ends where the header does
    assert {len(line) for line in lines} == {len(lines[0])}
    assert lines[1].split() == ["verdict", "pass", "fail"]  # the verdict leads
    assert next(line for line in lines if line.startswith("completed")).split()[-2:] == ["yes", "no"]


def test_format_value_writes_no_negative_zero():
    assert format_value(-0.0, "Wh") == "0 Wh"
