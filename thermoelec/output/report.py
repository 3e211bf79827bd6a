"""The HTML report: one self-contained file for a design review.

Figures are embedded as base64 PNG, the style sheet is inline, and nothing is
fetched from the network, so the file can be mailed or archived as it is.
"""

from __future__ import annotations

import datetime as _dt
import json
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis import verdict as _verdict
from thermoelec.analysis.results import DERATING_ROWS, ENERGY_ROWS, NET_ENERGY_ROWS, SimulationResult
from thermoelec.output import html as H
from thermoelec.output.tables import PACK_ROWS, SUMMARY_ROWS, check_rows, format_value

__all__ = ["CAPABILITY_CAUTION", "capability_report", "comparison_report", "fit_report", "limit_checks", "run_report",
           "verdict", "write_report"]

# ---------------------------------------------------------------------------
# Pass/fail against each limit: rendered from the summary, computed once in analysis/verdict.py
# ---------------------------------------------------------------------------


def limit_checks(summary: Mapping[str, Any], limits: Mapping[str, float]) -> list[dict[str, Any]]:
    """The checks of a summary (its ``checks``; computed by :func:`thermoelec.analysis.verdict.limit_checks`)."""
    return list(summary["checks"]) if "checks" in summary else _verdict.limit_checks(summary, limits)


def verdict(summary: Mapping[str, Any], limits: Mapping[str, float]) -> bool:
    """True when the summary's verdict is a pass."""
    if "verdict" in summary:
        return summary["verdict"] == _verdict.PASS
    return _verdict.verdict(limit_checks(summary, limits)) == _verdict.PASS


# ---------------------------------------------------------------------------
# HTML pieces
# ---------------------------------------------------------------------------


def _checks_table(summary: Mapping[str, Any], limits: Mapping[str, float]) -> str:
    rows = [[H.escape(cell) for cell in row[:4]] + [H.pass_cell(row[4] == "pass")]
            for row in check_rows(limit_checks(summary, limits))]
    return H.table(["limit", "value", "worst in mission", "margin", "result"], rows, table_class="limits")


def _rows_table(summary: Mapping[str, Any], rows: Iterable[tuple[str, str, str]], table_class: str = "") -> str:
    return H.table(["metric", "value"], [[H.escape(label.strip()), H.escape(format_value(summary.get(key), unit))]
                                        for label, key, unit in rows], table_class=table_class)


def _summary_table(summary: Mapping[str, Any]) -> str:
    energy = {key for _, key, _ in ENERGY_ROWS}
    return _rows_table(summary, [row for row in SUMMARY_ROWS if row[1] not in energy] + list(NET_ENERGY_ROWS))


def _notes(notes: Sequence[str]) -> str:
    if not notes:
        return ""
    return "<div class='note'><ul>" + "".join(f"<li>{H.escape(n)}</li>" for n in notes) + "</ul></div>"


def _stop(summary: Mapping[str, Any]) -> str:
    text = summary.get("stop_explanation")
    return f"<p class='stop'><strong>Why it stopped.</strong> {H.escape(text)}</p>" if text else ""


def _events(events: Sequence[Mapping[str, Any]], empty: str = "No events.") -> str:
    if not events:
        return f"<p>{H.escape(empty)}</p>"
    rows = [[H.escape(format_value(float(e["time_s"]), "s")), H.escape(e["event"]), H.escape(e.get("origin", "")),
             H.escape(e.get("segment_name", "")), H.escape(e.get("state", ""))] for e in events]
    return H.table(["time", "event", "where", "segment", "state"], rows, numeric_from=9)


def _soak(soak: Mapping[str, Any] | None) -> str:
    if not soak:
        return "<p>No soak before the mission.</p>"
    rows = [("duration", "duration_s", "s"), ("stop", "stop_reason", ""),
            ("cell temperature at its end", "cell_temperature_end_degC", "degC"),
            ("sink temperature at its end", "sink_temperature_end_degC", "degC"),
            ("SoC at its start", "soc_start", ""), ("SoC at its end", "soc_end", ""),
            ("heater energy", "heater_energy_Wh", "Wh")]
    drop = (soak["soc_start"] - soak["soc_end"]) if "soc_start" in soak else None
    table = _rows_table({**soak, "soc_drop": drop}, [*rows, ("SoC drop", "soc_drop", "")])
    return table + "<h3>Events of the soak</h3>" + _events(soak.get("events", []), "No events during the soak.")


def overrides_text(overrides: Mapping[str, Any] | Sequence[str]) -> list[str]:
    """Overrides as ``key = value`` lines, from a mapping or ``key=value`` strings."""
    if isinstance(overrides, Mapping):
        return [f"{k} = {_value_text(v)}" for k, v in overrides.items()]
    return [" = ".join(part.strip() for part in str(item).split("=", 1)) for item in overrides]


def _value_text(value: Any) -> str:
    if isinstance(value, Mapping):
        return "{" + ", ".join(f"{k} = {_value_text(v)}" for k, v in value.items()) + "}"
    if isinstance(value, list):
        return "[" + ", ".join(_value_text(v) for v in value) + "]"
    return str(value)


def _overrides(lines: Sequence[str]) -> str:
    if not lines:
        return "<p>No overrides: the scenario file as it is.</p>"
    return "<ul class='overrides'>" + "".join(f"<li><code>{H.escape(line)}</code></li>" for line in lines) + "</ul>"


def _pack_section(result: SimulationResult, figure: Any) -> str:
    """A resolved pack's cells: the hottest and where, the spreads, the first cell at a limit, the pack map."""
    from thermoelec.output.figures import PACK_MAP

    summary = result.summary
    rows = [[H.escape(label), H.escape(format_value(summary.get(key), unit))] for label, key, unit in PACK_ROWS]
    return "".join([
        "<h2>Cells of the pack</h2>",
        f"<p>Every cell resolved: {summary['cells']} cells, "
        f"{result.limits['series']} groups in series of {result.limits['parallel']} in parallel. The pack's "
        "cell temperature above is the hottest cell's; each cell is still one lumped node (its core-to-surface "
        "gradient is not resolved).</p>",
        H.table(["metric", "value"], rows),
        H.figure(figure(PACK_MAP), "Pack map: the peak temperature of each cell where it sits, the hottest ringed, "
                "parallel groups boxed, the coolant's path from inlet to outlet."),
    ])


def _derating_section(summary: Mapping[str, Any]) -> str:
    """What the BMS's derating cost the mission (nothing without a derating)."""
    if not summary.get("derating"):
        return ""
    return ("<h2>Derating</h2><p>The battery management system held the demand within its allowances (and, with "
            "the voltage limiter, the cells at their voltage limits instead of stopping): the dashboard shades "
            "what it did not deliver.</p>" + _rows_table(summary, DERATING_ROWS, "derating"))


def _warnings(warnings: Sequence[str]) -> str:
    if not warnings:
        return "<p>No warnings.</p>"
    return "<div class='warn'><ul>" + "".join(f"<li>{H.escape(w)}</li>" for w in warnings) + "</ul></div>"


def _flatten(data: Any, prefix: str = "") -> list[tuple[str, Any]]:
    if isinstance(data, dict):
        out = []
        for key, value in data.items():
            out += _flatten(value, f"{prefix}.{key}" if prefix else str(key))
        return out
    if isinstance(data, list) and data and all(isinstance(v, dict) for v in data):
        out = []
        for i, value in enumerate(data, start=1):
            out += _flatten(value, f"{prefix}[{i}]")
        return out
    return [(prefix, data)]


def _parameters(raw: Mapping[str, Any] | None, parameters: Sequence[Any] | None = None) -> str:
    """The parameter table: the resolved parameters (key, value, unit, given / default) where known,
    else the raw keys as given."""
    if parameters:
        rows = [[f"<code>{H.escape(p.key)}</code>", H.escape(p.value), H.escape(p.unit),
                 f"<span class='default'>{H.escape(p.source)}</span>" if p.source.startswith("default")
                 else H.escape(p.source)] for p in parameters]
        return H.table(["key", "value", "unit", "source"], rows, numeric_from=9, table_class="parameters")
    if not raw:
        return "<p>(parameters not available: the run was given an SI problem, not a scenario)</p>"
    rows = [[f"<code>{H.escape(k)}</code>", H.escape(_value_text(v))]
            for k, v in _flatten({k: v for k, v in raw.items() if k != "case"})]
    return H.table(["key", "value"], rows, numeric_from=9)


def _metadata(result: SimulationResult) -> str:
    rows = [[H.escape(k), "<br>".join(H.escape(line) for line in overrides_text(v)) if k == "overrides"
             else H.escape(v if isinstance(v, str) else json.dumps(v))] for k, v in result.metadata.items()]
    rows += [[H.escape(f"solver {k}"), H.escape(format_value(float(v)))] for k, v in result.statistics.items()]
    rows.append(["report generated", H.escape(_dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M:%S UTC"))])
    return H.table(["item", "value"], rows, numeric_from=9)


def _verdict_badge(passed: bool) -> str:
    return ("<span class='verdict pass'>PASS</span>" if passed else "<span class='verdict fail'>FAIL</span>")


# ---------------------------------------------------------------------------
# Reports
# ---------------------------------------------------------------------------


#: The stress indicators of the report: label, summary key, unit.
STRESS_ROWS: tuple[tuple[str, str, str], ...] = (
    ("time above the hot temperature", "time_above_hot_temperature_s", "s"),
    ("hot temperature", "hot_temperature_degC", "degC"),
    ("time above the temperature limit", "time_above_temperature_limit_s", "s"),
    ("time charging below 0 degC", "time_charging_below_0degC_s", "s"),
    ("time charging below 10 degC", "time_charging_below_10degC_s", "s"),
    ("peak C-rate, discharge", "c_rate_discharge_max", ""),
    ("peak C-rate, charge", "c_rate_charge_max", ""),
    ("Arrhenius-equivalent time at the reference", "equivalent_time_at_reference_s", "s"),
    ("reference temperature", "ageing_reference_temperature_degC", "degC"),
    ("activation energy", "ageing_activation_energy_kJ_per_mol", "kJ/mol"),
    ("acceleration factor (equivalent time / duration)", "ageing_acceleration_factor", ""),
    ("Biot number of a cell", "biot_number", ""),
)


def _verdict_paragraph(result: SimulationResult) -> str:
    summary = result.summary
    return (f"<p id='verdict'>{_verdict_badge(verdict(summary, result.limits))} &nbsp; stop reason "
            f"<code>{H.escape(summary['stop_reason'])}</code> after {summary['duration_s']:.0f} s; "
            f"status {H.escape(result.status)}"
            + (f": {H.escape(result.message)}" if result.message else "") + "</p>" + _stop(summary))


def run_report(result: SimulationResult, raw: Mapping[str, Any] | None = None, description: str = "",
               pngs: Mapping[str, bytes] | None = None, parameters: Sequence[Any] | None = None) -> str:
    """The report of one run as HTML text.

    ``pngs`` maps figure names of :data:`thermoelec.output.figures.FIGURE_NAMES` to PNG
    files already written, so they are embedded instead of drawn again; ``parameters``
    are the scenario's resolved parameters (:func:`thermoelec.scenario.parameters.resolved_parameters`),
    listed with their units and sources (defaults marked), else the raw keys are listed.
    """
    from thermoelec.output import figures
    from thermoelec.output.pack_figures import pack_map

    pngs = pngs or {}
    drawn = {"dashboard": figures.dashboard, "energy": figures.energy_chart,
             "operating_region": figures.operating_region, figures.PACK_MAP: pack_map}

    def figure(name: str):
        return pngs[name] if name in pngs else drawn[name](result)

    summary = result.summary
    body = [
        f"<h1>{H.escape(figures.title_of(result))}</h1>",
        f"<p>{H.escape(description)}</p>" if description else "",
        _verdict_paragraph(result),
        H.cautions(),
        "<h2>Limits</h2>", _checks_table(summary, result.limits),
        "<h2>Notes and warnings</h2>", _notes(summary.get("notes", [])), _warnings(result.warnings),
        "<h2>Energy</h2>", _rows_table(summary, ENERGY_ROWS, "energy"),
        _derating_section(summary),
        "<h2>Summary</h2>", _summary_table(summary),
        _pack_section(result, figure) if result.cells is not None else "",
        "<h2>Events</h2>", _events(summary.get("events", [])),
        "<h2>Soak</h2>", _soak(summary.get("soak")),
        "<h2>Stress indicators</h2>", _rows_table(summary, STRESS_ROWS),
        "<h2>Figures</h2>",
        H.figure(figure("dashboard"), "Mission dashboard: demand, current, voltage with limits, SoC, "
                "temperatures with the limit, heat; stops and mode switches marked."),
        H.figure(figure("energy"), "Energy chart: voltage against charge moved, discharge, regeneration and charge "
                "apart; the areas are the cells', the load's (or charger's) and the dissipated energies."),
        H.figure(figure("operating_region"), "Operating region: load power and dissipation against current "
                "at the start, the coldest instant, the worst state and the end, with the mission's operating points."),
        "<h2>Overrides</h2>", _overrides(overrides_text(result.metadata.get("overrides", []))),
        "<h2>Parameters</h2>", _parameters(raw, parameters),
        "<h2>Run</h2>", _metadata(result),
    ]
    return H.document(f"thermoelec: {figures.title_of(result)}", "".join(body))


def _case_section(outcome: Any) -> list[str]:
    from thermoelec.output import figures
    from thermoelec.output.pack_figures import pack_map

    result = outcome.result
    return [
        f"<h2>Case: {H.escape(outcome.name)}</h2>", _verdict_paragraph(result),
        "<h3>Overrides</h3>", _overrides(overrides_text(outcome.overrides)),
        "<h3>Limits</h3>", _checks_table(result.summary, result.limits), _derating_section(result.summary),
        "<h3>Notes and warnings</h3>", _notes(result.summary.get("notes", [])), _warnings(result.warnings),
        "<h3>Events</h3>", _events(result.summary.get("events", [])),
        "<h3>Soak</h3>", _soak(result.summary.get("soak")),
        H.figure(figures.dashboard(result), f"Mission dashboard, {outcome.name}."),
        H.figure(figures.energy_chart(result), f"Energy chart, {outcome.name}."),
        *([H.figure(pack_map(result), f"Pack map, {outcome.name}: the peak temperature of each cell.")]
          if result.cells is not None else []),
    ]


def comparison_report(outcomes: Sequence[Any], raw: Mapping[str, Any] | None = None, title: str = "",
                      description: str = "", parameters: Sequence[Any] | None = None) -> str:
    """The report of a case comparison as HTML text (``outcomes`` of :func:`thermoelec.analysis.compare.run_cases`)."""
    from thermoelec.analysis.compare import comparison_rows
    from thermoelec.output import figures

    metrics = [o.metrics() for o in outcomes]
    names = [o.name for o in outcomes]
    rows = [[H.escape(label.strip()), *(H.escape(format_value(m.get(key), unit)) for m in metrics)]
            for label, key, unit in comparison_rows(outcomes) if key != "verdict"]
    verdicts = [[H.escape("verdict"), *(_verdict_badge(verdict(o.result.summary, o.result.limits)) for o in outcomes)]]
    body = [
        f"<h1>{H.escape(title or 'case comparison')}</h1>",
        f"<p>{H.escape(description)}</p>" if description else "",
        H.cautions(),
        "<h2>Comparison</h2>", H.table(["", *names], verdicts + rows, table_class="comparison"),
        "<p>Energy to voltage cutoff: a discharge from the same start at the mission's mean discharge power "
        "until a limit stops it (the row below says which).</p>",
        H.figure(figures.comparison_overlay({o.name: o.result for o in outcomes}),
                "Voltage, cell temperature and SoC of every case."),
    ]
    for outcome in outcomes:
        body += _case_section(outcome)
    body += ["<h2>Parameters of the base scenario</h2>", _parameters(raw, parameters)]
    if outcomes:
        body += ["<h2>Run</h2>", _metadata(outcomes[0].result)]
    return H.document(f"thermoelec comparison: {title}", "".join(body))


#: The caution of a capability report, besides :data:`thermoelec.output.html.CAUTIONS`.
CAPABILITY_CAUTION = (
    "A pulse capability here is computed from rest at a uniform temperature, with the model's parameters and the "
    "limits given; it is no rating. A pack's published pulse limits come from tests of its cells and pack under the "
    "cell maker's conditions: do not ask the pack for more than those, whatever this table says, and derate for "
    "ageing, spread between cells and repeated pulses.")


def _capability_headline(result: Any) -> str:
    """Per duration and capability: its value at the state nearest 25 degC and SoC 0.5, its range, what binds most."""
    from thermoelec.engine.pulse import PULSE_KINDS
    from thermoelec.physics.constants import ZERO_CELSIUS

    g = result.grid
    ti = int(np.argmin(np.abs(g.temperatures - ZERO_CELSIUS - 25.0)))
    zi = int(np.argmin(np.abs(g.socs - 0.5)))
    rows = []
    for d, duration in enumerate(g.durations):
        for kind in PULSE_KINDS:
            values, binding = result.values[kind.name][d], result.binding[kind.name][d]
            names, counts = np.unique(binding.astype(str), return_counts=True)
            rows.append([H.escape(f"{duration:g} s"), H.escape(kind.name.replace("_", " ")),
                         H.escape(format_value(float(values[ti, zi]), kind.unit)), H.escape(binding[ti, zi]),
                         H.escape(f"{format_value(float(np.nanmin(values)))} .. "
                                  f"{format_value(float(np.nanmax(values)))} {kind.unit}"),
                         H.escape(names[int(np.argmax(counts))])])
    state = f"{g.temperatures[ti] - ZERO_CELSIUS:g} degC, SoC {g.socs[zi]:g}"
    return (f"<p>At {H.escape(state)} (the grid's state nearest 25 degC and SoC 0.5), and over the whole grid:</p>"
            + H.table(["pulse", "capability", f"at {state}", "binding limit there", "over the grid",
                       "binding most often"], rows, numeric_from=2, table_class="capability"))


def capability_report(result: Any, raw: Mapping[str, Any] | None = None, description: str = "",
                      pngs: Mapping[str, bytes] | None = None, parameters: Sequence[Any] | None = None) -> str:
    """The report of ``thermoelec capability`` as HTML text (``result`` a
    :class:`thermoelec.analysis.capability.Capability`; ``pngs`` the heat maps already written, by file stem)."""
    from thermoelec.output.capability_figures import capability_map, figure_stem

    pngs = pngs or {}
    g = result.grid
    name = result.metadata.get("scenario", "")
    body = [
        f"<h1>{H.escape(name)}: pulse capability</h1>",
        f"<p>{H.escape(description)}</p>" if description else "",
        "<div class='caution'><strong>Cautions.</strong><ul>"
        + "".join(f"<li>{H.escape(c)}</li>" for c in (CAPABILITY_CAUTION, *H.CAUTIONS)) + "</ul></div>",
        "<h2>Method</h2><p>For each pulse duration, temperature and SoC: the largest constant power and the largest "
        "constant current the pack delivers (discharge) and accepts (charge) for the whole pulse, simulated from "
        "rest (RC pairs relaxed; cells, sink and ambient at the temperature), with the RC pairs charging and the "
        "cells heating, inside the cells' voltage limits and every limit of the pack specification; the limit met "
        "just beyond it binds. Charging below limits.charge_temperature_min is none at all. The demands are "
        "solved for together by a bracketing root finder on the batched solver.</p>",
        f"<p>Grid: {len(g.durations)} durations ({', '.join(f'{d:g} s' for d in g.durations)}) x "
        f"{len(g.temperatures)} temperatures x {len(g.socs)} SoC points; capability.csv and capability.nc hold "
        "every entry and its binding limit.</p>",
        "<h2>Capability</h2>", _capability_headline(result),
        "<h2>Heat maps</h2>",
    ]
    for i, duration in enumerate(g.durations):
        stem = figure_stem(float(duration))
        body.append(H.figure(pngs[stem] if stem in pngs else capability_map(result, i),
                             f"{duration:g} s pulses: discharge and charge, power and current, over temperature and "
                             "SoC; the mark in each cell is the limit that binds it."))
    rows = [[H.escape(k), H.escape(v)] for k, v in result.metadata.items()]
    body += ["<h2>Parameters</h2>", _parameters(raw, parameters),
             "<h2>Run</h2>", H.table(["item", "value"], rows, numeric_from=9)]
    return H.document(f"thermoelec capability: {name}", "".join(body))


def fit_report(outcome: Any) -> str:
    """The report of a ``thermoelec fit`` job (a :class:`thermoelec.fit.jobs.FitOutcome`) as HTML text."""
    rows = [[H.escape(name), H.escape(value), H.escape(interval)] for name, value, interval in outcome.parameters]
    body = [
        f"<h1>thermoelec fit {H.escape(outcome.kind)}</h1>",
        "<p>Logs: " + ", ".join(f"<code>{H.escape(log)}</code>" for log in outcome.logs) + "</p>",
        "<div class='caution'><strong>Caution.</strong> Fitted parameters describe the tested cell over the tested "
        "range of SoC, temperature and current only; check them against a held-out test before relying on them, "
        "and follow the applicable safety standards and licensed practice when testing cells.</div>",
        "<h2>Parameters</h2>", H.table(["parameter", "value", "95 % interval / note"], rows, numeric_from=9),
    ]
    if outcome.notes:
        body += ["<h2>Notes</h2>", _warnings(outcome.notes)]
    body.append("<h2>Data against model</h2>")
    body += [H.figure(fig, caption) for fig, caption in outcome.figures]
    body += ["<h2>Cell file written</h2>", f"<pre>{H.escape(outcome.cell_file_text())}</pre>"]
    return H.document(f"thermoelec fit {outcome.kind}", "".join(body))


def write_report(text: str, out_dir: str | Path) -> Path:
    """Write ``report.html`` into ``out_dir``."""
    path = Path(out_dir) / "report.html"
    path.write_text(text, encoding="utf-8")
    return path
