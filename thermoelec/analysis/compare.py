"""Case comparison: the same scenario under named variants (cold start, hot soak, ...).

Each case is the scenario with dotted-path overrides (its ``[[case]]`` table or a
``--case NAME KEY=VALUE ...`` on the command line). Besides the mission itself,
each case gets a second run that answers "how much energy is there to the
voltage cutoff in these conditions": a constant-power discharge from the same
start, at the mission's mean discharge power, until a limit stops it.

Owns the cases (:func:`case_list`, :func:`run_cases`), the comparison's rows
(:data:`COMPARISON_ROWS`, with :data:`PACK_COMPARISON_ROWS` for resolved packs:
:func:`comparison_rows`; :func:`comparison_table`, :func:`comparison_json`) and
the writing of its data files (:func:`write_comparison`). Imports from
scenario/, engine/ and analysis/ only: the overlay figure and the report are
drawn by output/ (:func:`thermoelec.output.figures.write_comparison_figure`), the
terminal table is :func:`thermoelec.output.tables.format_comparison`.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.results import DERATING_ROWS, ENERGY_ROWS, SimulationResult
from thermoelec.analysis.simulate import simulate
from thermoelec.physics.constants import JOULES_PER_WH
from thermoelec.scenario import Scenario, ScenarioError
from thermoelec.scenario.options import option_groups

__all__ = ["COMPARISON_ROWS", "PACK_COMPARISON_ROWS", "CaseOutcome", "case_folders", "case_list", "case_scenarios",
           "comparison_json", "comparison_rows", "comparison_table", "energy_to_cutoff", "run_cases",
           "write_comparison"]

#: Long enough that a limit, not the clock, ends the energy-to-cutoff discharge.
CUTOFF_RUN_DURATION = "1000 h"

#: Rows of the comparison table: label, key, unit (the verdict first; the energies as every table names them).
COMPARISON_ROWS: tuple[tuple[str, str, str], ...] = (
    ("verdict", "verdict", ""),
    ("failed checks", "failed_checks", ""),
    ("completed", "completed", ""),
    ("stop reason", "stop_reason", ""),
    ("time to stop", "duration_s", "s"),
    *ENERGY_ROWS,
    ("energy to voltage cutoff", "energy_to_cutoff_Wh", "Wh"),
    ("  at constant power", "energy_to_cutoff_power_W", "W"),
    ("  ended by", "energy_to_cutoff_stop", ""),
    ("start cell temperature", "cell_temperature_start_degC", "degC"),
    ("peak cell temperature", "cell_temperature_max_degC", "degC"),
    ("cell temperature rise", "cell_temperature_rise_K", "K"),
    ("minimum pack voltage", "voltage_min_V", "V"),
    ("cell voltage margin", "voltage_margin_min_V", "V"),
    ("heat generated", "heat_generated_Wh", "Wh"),
    ("heat to ambient", "heat_to_ambient_Wh", "Wh"),
    ("heat to coolant", "heat_to_coolant_Wh", "Wh"),
    ("heater energy", "heater_energy_Wh", "Wh"),
    ("thermostat switches", "thermostat_switches", ""),
    ("final SoC", "soc_end", ""),
    ("time above hot temperature", "time_above_hot_temperature_s", "s"),
    ("time charging below 0 degC", "time_charging_below_0degC_s", "s"),
    ("Arrhenius time at reference", "equivalent_time_at_reference_s", "s"),
    ("warnings", "warning_count", ""),
)
#: Rows a comparison adds when one of its cases is a resolved pack (``n/a`` for a lumped case).
PACK_COMPARISON_ROWS: tuple[tuple[str, str, str], ...] = (
    ("peak of the mean cell temperature", "cell_temperature_mean_max_degC", "degC"),
    ("hottest cell", "hottest_cell", ""),
    ("cell-to-cell temperature spread", "cell_temperature_spread_max_K", "K"),
    ("SoC spread at the end", "soc_spread_end", ""),
    ("largest current share", "current_share_max", ""),
    ("first cell at a limit", "first_limit_cell", ""),
)


def comparison_rows(outcomes: Sequence[CaseOutcome]) -> tuple[tuple[str, str, str], ...]:
    """The rows of a comparison: :data:`COMPARISON_ROWS`, :data:`~thermoelec.analysis.results.DERATING_ROWS` when a
    case derates, and :data:`PACK_COMPARISON_ROWS` when a case resolves its cells."""
    resolved = any(o.metrics().get("pack_model") == "resolved" for o in outcomes)
    derated = any(o.metrics().get("derating") for o in outcomes)
    return COMPARISON_ROWS + (DERATING_ROWS if derated else ()) + (PACK_COMPARISON_ROWS if resolved else ())


@dataclass
class CaseOutcome:
    """One case: its overrides, the mission result and the energy-to-cutoff run."""

    name: str
    overrides: dict[str, Any]
    result: SimulationResult
    cutoff: SimulationResult | None

    def metrics(self) -> dict[str, Any]:
        """The summary plus the comparison's own keys."""
        row = dict(self.result.summary)
        row["failed_checks"] = ", ".join(c["check"] for c in row.get("checks", []) if not c["passed"]) or "none"
        row["cell_temperature_start_degC"] = float(self.result.series["cell_temperature_degC"][0])
        row["warning_count"] = len(self.result.warnings)
        if self.cutoff is not None:
            row["energy_to_cutoff_Wh"] = self.cutoff.summary["energy_discharged_Wh"]
            row["energy_to_cutoff_power_W"] = float(self.cutoff.series["power_W"][0])
            row["energy_to_cutoff_stop"] = self.cutoff.summary["stop_reason"]
        else:
            row["energy_to_cutoff_Wh"] = row["energy_to_cutoff_power_W"] = row["energy_to_cutoff_stop"] = None
        return row


def slug(name: str) -> str:
    """A folder name for a case."""
    return re.sub(r"[^A-Za-z0-9]+", "-", name).strip("-").lower() or "case"


def case_folders(names: Sequence[str]) -> list[str]:
    """One folder name per case, all different: names that differ only in case or punctuation
    (``Cold start``, ``cold-start``) get ``cold-start`` and ``cold-start-2``.

    Parameters
    ----------
    names : sequence of str
        The case names, in order.

    Returns
    -------
    list of str
        Folder names under ``cases/``, in the same order.
    """
    folders: list[str] = []
    for name in names:
        base = folder = slug(name)
        n = 1
        while folder in folders:
            n += 1
            folder = f"{base}-{n}"
        folders.append(folder)
    return folders


def case_list(scenario: Scenario, extra: Sequence[tuple[str, Mapping[str, Any]]] = (),
              group: str | None = None) -> list[tuple[str, dict]]:
    """The scenario's ``[[case]]`` variants (or the options of an option group) followed by ``extra`` ones,
    as ``(name, overrides)``.

    Parameters
    ----------
    scenario : Scenario
        The scenario.
    extra : sequence of (str, mapping)
        More cases, by name and overrides (``--case``).
    group : str, optional
        An option group (``[[option.GROUP]]``) whose options are the cases instead of ``[[case]]``.

    Raises
    ------
    ScenarioError
        When there is no case, two cases share a name, or the group does not exist.
    """
    if group is not None:
        groups = option_groups(scenario)
        if group not in groups:
            raise ScenarioError(scenario.source, "option", f"no option group {group!r}; the scenario has "
                                + (", ".join(groups) or "none ([[option.NAME]] tables declare them)"))
        cases = [(o.name, dict(o.overrides)) for o in groups[group].options]
    else:
        cases = [(c.name, dict(c.model_extra or {})) for c in scenario.spec.case]
    cases += [(name, dict(values)) for name, values in extra]
    if not cases:
        raise ScenarioError(scenario.source, "case", "nothing to compare: add [[case]] tables with a name and "
                            "dotted keys, or give --case NAME KEY=VALUE ...")
    names = [name for name, _ in cases]
    for name in names:
        if names.count(name) > 1:
            raise ScenarioError(scenario.source, "case", f"two cases are named {name!r}; names must differ")
    return cases


def _mean_discharge_power(result: SimulationResult) -> float | None:
    s = result.series
    times, current = s["time_s"], s["current_A"]
    if len(times) < 2:
        return None
    dt = np.diff(times)
    discharging = 0.5 * (current[:-1] + current[1:]) > 0
    seconds = float(np.sum(dt[discharging]))
    # the load's demand: a heater fed from the pack is added again by the cutoff run itself
    energy = (result.summary["energy_discharged_Wh"] - result.summary.get("heater_energy_from_pack_Wh", 0.0)) \
        * JOULES_PER_WH
    return energy / seconds if seconds > 0 and energy > 0 else None


def energy_to_cutoff(case: Scenario, mission: SimulationResult) -> SimulationResult | None:
    """Discharge from the case's start at the mission's mean discharge power until a limit stops it.

    Returns ``None`` for a mission that never discharges.
    """
    power = _mean_discharge_power(mission)
    if power is None:
        return None
    # the same start as the mission: its soak segments (if any) come first
    soak = [seg for seg in case.raw["profile"]["segment"] if seg.get("mode") == "soak"]
    overrides: dict[str, Any] = {
        "profile": {"repeat": 1, "segment": [*soak, {"mode": "power", "value": f"{power!r} W",
                                                     "duration": CUTOFF_RUN_DURATION}]},
    }
    if case.spec.thermal.ambient_temperature is None:  # it came from the profile file
        overrides["thermal.ambient_temperature"] = f"{mission.series['ambient_temperature_degC'][0]!r} degC"
    return simulate(case.with_overrides(overrides))


def case_scenarios(scenario: Scenario, cases: Sequence[tuple[str, Mapping[str, Any]]]) -> list[Scenario]:
    """Every case validated, before any is computed (an invalid last case is found first).

    Parameters
    ----------
    scenario : Scenario
        The base scenario; its ``[[case]]`` tables come first in ``cases``.
    cases : sequence of (str, mapping)
        Names and dotted-path overrides (:func:`case_list`).

    Returns
    -------
    list of Scenario
        One per case, in order.

    Raises
    ------
    ScenarioError
        At the first invalid case, naming it (``[[case]] 2 "cold start"`` of the file, or ``--case``).
    """
    in_file = len(scenario.spec.case)
    variants = []
    for index, (name, overrides) in enumerate(cases, start=1):
        origin = f'{scenario.source}: [[case]] {index} "{name}"' if index <= in_file else f'--case "{name}"'
        try:
            variants.append(scenario.with_overrides(overrides, origin=origin))
        except ScenarioError as exc:
            where = exc.file if exc.file != scenario.source else origin
            raise ScenarioError(where, exc.key, exc.message, exc.line if where == exc.file else None) from None
    return variants


def run_cases(scenario: Scenario, cases: Sequence[tuple[str, Mapping[str, Any]]],
              variants: Sequence[Scenario] | None = None) -> list[CaseOutcome]:
    """Simulate every case (mission and energy-to-cutoff run), all validated first.

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    cases : sequence of (str, mapping)
        Names and overrides (:func:`case_list`).
    variants : sequence of Scenario, optional
        The cases already validated (:func:`case_scenarios`).

    Returns
    -------
    list of CaseOutcome
        In order.
    """
    variants = case_scenarios(scenario, cases) if variants is None else variants
    outcomes = []
    for (name, overrides), case in zip(cases, variants, strict=True):
        result = simulate(case)
        result.metadata["case"] = name
        outcomes.append(CaseOutcome(name, dict(overrides), result, energy_to_cutoff(case, result)))
    return outcomes


def comparison_table(outcomes: Sequence[CaseOutcome]):
    """Side-by-side table: one row per metric (:func:`comparison_rows`), one column per case."""
    import pandas as pd

    metrics = [o.metrics() for o in outcomes]
    rows = []
    for label, key, unit in comparison_rows(outcomes):
        rows.append({"metric": label.strip(), "key": key, "unit": unit,
                     **{o.name: m.get(key) for o, m in zip(outcomes, metrics, strict=True)}})
    return pd.DataFrame(rows)


def _jsonable(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, np.generic):
        return value.item()
    return value


def comparison_json(outcomes: Sequence[CaseOutcome]) -> str:
    """Every case's overrides and metrics as JSON text."""
    cases = []
    folders = case_folders([o.name for o in outcomes])
    for outcome, folder in zip(outcomes, folders, strict=True):
        metrics = {k: _jsonable(v) for k, v in outcome.metrics().items() if k != "events"}
        cases.append({"name": outcome.name, "folder": f"cases/{folder}", "overrides": outcome.overrides,
                      "metrics": metrics})
    return json.dumps({"cases": cases}, indent=2, allow_nan=False)


def write_comparison(outcomes: Sequence[CaseOutcome], out_dir: Path) -> list[Path]:
    """Write ``comparison.csv``, ``comparison.json`` and each case's results (``cases/<name>/``, one
    folder per case: :func:`case_folders`).

    The overlay figure and the report are the output layer's
    (:func:`thermoelec.output.figures.write_comparison_figure`, :mod:`thermoelec.output.report`).
    """
    out_dir.mkdir(parents=True, exist_ok=True)
    written = [out_dir / "comparison.csv", out_dir / "comparison.json"]
    comparison_table(outcomes).to_csv(written[0], index=False)
    written[1].write_text(comparison_json(outcomes) + "\n")
    for outcome, folder in zip(outcomes, case_folders([o.name for o in outcomes]), strict=True):
        written += outcome.result.write(out_dir / "cases" / folder)
    return written
