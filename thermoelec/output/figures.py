"""Figures of a mission: dashboard, energy chart, operating region, case overlays, and writing them.

Owns the drawing of a result (:class:`thermoelec.analysis.results.SimulationResult`)
and of a case comparison, and the files they go to (:func:`save`,
:func:`write_figures`, :func:`write_comparison_figure`). Each figure has a data
function that computes what it shows (tested against the summary and closed
forms) and a drawing function that returns a :class:`matplotlib.figure.Figure`.
Figures are built without pyplot, so no display and no global state are
involved. Mode and event names come from their registries
(:mod:`thermoelec.physics.loads`, :mod:`thermoelec.engine.events`). Imports from
analysis/ and below only; never from fit/, the API or the command line.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from thermoelec.analysis.results import DEMAND_MODES, THERMOSTAT_EVENTS, SimulationResult
from thermoelec.engine.events import CCCV_CAP_EVENT, EV_CV_CUTOFF, EV_CV_SWITCH, EVENT_NAMES, STOP_EVENTS
from thermoelec.output.pack_figures import pack_map
from thermoelec.physics.constants import COULOMBS_PER_AH, SECONDS_PER_HOUR
from thermoelec.physics.loads import maximum_power, voltage_limited_power

__all__ = [
    "FIGURE_NAMES",
    "MODE_COLOURS",
    "PACK_MAP",
    "AxisRange",
    "EnergyPart",
    "OperatingState",
    "OperatingView",
    "axis_range",
    "comparison_overlay",
    "dashboard",
    "energy_chart",
    "energy_parts",
    "operating_region",
    "operating_states",
    "operating_view",
    "save",
    "segment_labels",
    "title_of",
    "write_comparison_figure",
    "write_figures",
]

#: Pale background colours of the demand modes, taken in the order of :data:`DEMAND_MODES`.
_MODE_PALETTE = ("#eeeeee", "#dde8f6", "#fbe8d3", "#e3f1dc", "#efe0f3", "#f6f3d6", "#dcf0f0")
#: The background colour of each demand mode of the dashboard (a rest, then the load modes).
MODE_COLOURS: dict[str, str] = dict(zip(DEMAND_MODES, _MODE_PALETTE, strict=False))
#: Names of the events that stop a mission, from the event registry.
STOP_EVENT_NAMES: frozenset[str] = frozenset(EVENT_NAMES[code] for code in STOP_EVENTS)
#: Names of the CC-CV events the dashboard marks: the switch to CV, the cutoff, the duration cap.
CCCV_EVENT_NAMES: frozenset[str] = frozenset((EVENT_NAMES[EV_CV_SWITCH], EVENT_NAMES[EV_CV_CUTOFF], CCCV_CAP_EVENT))
#: A limit further than this share of the data's span beyond it is marked at the axis edge, not drawn [-].
LIMIT_REACH = 0.5
#: The least span of a temperature axis [K] and of a voltage axis [V]: a flat series is not magnified into noise.
MIN_TEMPERATURE_SPAN, MIN_VOLTAGE_SPAN = 2.0, 0.2
#: Segment names are written on the dashboard for runs at least this share of the mission long, at most this many.
NAME_MIN_SHARE, NAME_MAX_LABELS = 0.04, 24


def title_of(result: SimulationResult) -> str:
    """The name of a result for titles: the scenario, the case, and any overrides beyond the case's."""
    name = str(result.summary.get("scenario", "") or "thermoelec run")
    case = result.metadata.get("case")
    overrides = [str(o).replace("=", " = ", 1) for o in result.metadata.get("overrides", [])]
    if case:
        return f"{name} - case {case}"
    if overrides:
        shown = "; ".join(overrides[:3]) + ("; ..." if len(overrides) > 3 else "")
        return f"{name} (with {shown})"
    return name


def _time_axis(times: np.ndarray) -> tuple[np.ndarray, str]:
    """Time in a readable unit for the axis."""
    span = float(times[-1] - times[0]) if len(times) else 0.0
    if span > 3 * SECONDS_PER_HOUR:
        return times / SECONDS_PER_HOUR, "time [h]"
    if span > 600:
        return times / 60.0, "time [min]"
    return times, "time [s]"


def _scale_like(times: np.ndarray, t: float) -> float:
    span = float(times[-1] - times[0]) if len(times) else 0.0
    return t / SECONDS_PER_HOUR if span > 3 * SECONDS_PER_HOUR else t / 60.0 if span > 600 else t


# ---------------------------------------------------------------------------
# Mission dashboard
# ---------------------------------------------------------------------------


def _mode_runs(modes: np.ndarray) -> list[tuple[int, int, str]]:
    """``(first row, last row, mode)`` of each run of equal demand mode."""
    if len(modes) == 0:
        return []
    change = np.flatnonzero(modes[1:] != modes[:-1]) + 1
    starts = np.concatenate([[0], change])
    ends = np.concatenate([change - 1, [len(modes) - 1]])
    return [(int(a), int(b), str(modes[a])) for a, b in zip(starts, ends, strict=True)]


def dashboard(result: SimulationResult) -> Figure:
    """Demand, current, voltage with limits, SoC, temperatures with limit, heat; stops and mode switches marked.

    Parameters
    ----------
    result : SimulationResult
        A simulated mission; its series [s, A, V, W, degC], limits and events are drawn.

    Returns
    -------
    Figure
        Six panels sharing the time axis (s, min or h by the mission's length); the title names the
        scenario and the case, and a stop is explained in words under it.
    """
    s = result.series
    t, t_label = _time_axis(s["time_s"])
    fig = Figure(figsize=(10, 13), layout="constrained")
    axes = fig.subplots(6, 1, sharex=True)
    ax_power, ax_current, ax_voltage, ax_soc, ax_temp, ax_heat = axes
    modes = result.demand_mode if result.demand_mode is not None else np.array(["current"] * len(t), dtype=object)
    marker = "o" if len(t) < 3 else None  # a mission stopped at once has one row: show it as a point
    _shade_modes(axes, t, modes)
    _draw_power(fig, ax_power, t, s, modes, result.demand_value, marker)
    _draw_electrical(ax_current, ax_voltage, ax_soc, t, s, result.limits, marker)
    _draw_thermal(ax_temp, ax_heat, t, s, result.limits, marker)
    _name_segments(ax_power, t, result.segment_name)
    ax_heat.set_xlabel(t_label)
    if t[-1] <= t[0]:  # nothing ran: a unit span from the start, not one centred on it
        ax_heat.set_xlim(t[0], t[0] + 1.0)
    _mark_events(axes, result.events, s["time_s"])
    summary = result.summary
    state = "completed" if summary["completed"] else f"stopped: {summary['stop_reason']}"
    title = f"{title_of(result)}\n{state} at {summary['duration_s']:.0f} s, verdict {summary.get('verdict', '?')}"
    explanation = summary.get("stop_explanation")
    if explanation:
        title += "\n" + "\n".join(_wrap(explanation, 120))
    fig.suptitle(title, fontsize=10)
    return fig


def _wrap(text: str, width: int) -> list[str]:
    """Words of ``text`` in lines of at most ``width`` characters."""
    lines, line = [], ""
    for word in text.split():
        if line and len(line) + 1 + len(word) > width:
            lines.append(line)
            line = word
        else:
            line = f"{line} {word}".strip()
    return [*lines, line] if line else lines


def segment_labels(times: np.ndarray, names: np.ndarray | None) -> list[tuple[float, float, str]]:
    """The named runs of segments to write on the dashboard: ``(start, end, name)`` [the times' unit].

    Consecutive rows of one name make a run; runs shorter than :data:`NAME_MIN_SHARE` of the
    mission are left unlabelled, and at most :data:`NAME_MAX_LABELS` (the longest) are kept, in
    time order.

    Parameters
    ----------
    times : array
        Row times (any unit).
    names : object array or None
        Each row's segment name, empty where it has none.
    """
    if names is None or len(times) < 2 or not any(names):
        return []
    span = float(times[-1] - times[0]) or 1.0
    runs = [(float(times[a]), float(times[b]), name) for a, b, name in _mode_runs(np.asarray(names, dtype=object))
            if name and (times[b] - times[a]) >= NAME_MIN_SHARE * span]
    kept = sorted(runs, key=lambda run: run[1] - run[0], reverse=True)[:NAME_MAX_LABELS]
    return sorted(kept)


def _name_segments(ax: Any, t: np.ndarray, names: np.ndarray | None) -> None:
    for start, end, name in segment_labels(t, names):
        ax.annotate(name, (0.5 * (start + end), 0.97), xycoords=("data", "axes fraction"), ha="center", va="top",
                    fontsize=6, color="0.25", annotation_clip=True)


def _shade_modes(axes: Sequence[Any], t: np.ndarray, modes: np.ndarray) -> None:
    """Each run of one demand mode shaded in its colour on every panel, a thin line at each change."""
    seen: set[str] = set()
    for first, last, mode in _mode_runs(modes):
        for ax in axes:
            ax.axvspan(t[first], t[last], color=MODE_COLOURS.get(mode, "#ffffff"), lw=0,
                       label=f"{mode} mode" if ax is axes[0] and mode not in seen else None)
        seen.add(mode)
        if first > 0:
            for ax in axes:
                ax.axvline(t[first], color="0.6", lw=0.6)


def _draw_power(fig: Figure, ax: Any, t: np.ndarray, s: Mapping[str, np.ndarray], modes: np.ndarray,
                demand_value: np.ndarray | None, marker: str | None = None) -> None:
    """Power to the load [W] and the demanded power; the figure's legend (modes and power lines)."""
    ax.plot(t, s["power_W"], color="C1", lw=1.0, marker=marker, label="power to load")
    if demand_value is not None:
        demanded = np.where(modes == "power", demand_value, np.nan)
        if np.isfinite(demanded).any():
            ax.plot(t, demanded, color="k", lw=0.8, ls="--", marker=marker, mfc="none", label="demanded power")
    ax.set_ylabel("power [W]")
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", fontsize=8, ncol=7)


@dataclass(frozen=True)
class AxisRange:
    """A value axis set by the data: its limits, and the limit lines on it or off it.

    Attributes
    ----------
    low, high : float
        The axis range (data padded, on-scale limits included).
    shown : tuple of float
        Limits inside the range: drawn as lines.
    off_scale : tuple of float
        Limits beyond it: marked at the edge with their value.
    """

    low: float
    high: float
    shown: tuple[float, ...]
    off_scale: tuple[float, ...]


def axis_range(data: Sequence[np.ndarray], limits: Sequence[float], min_span: float) -> AxisRange:
    """The range of a value axis from its data; a limit joins it only when near the data.

    A limit within :data:`LIMIT_REACH` of the data's span (or of ``min_span``) of the data is
    drawn and taken into the range; one further away would squash the data flat (a 4 K rise on a
    15-62 degC axis), so it stays off the axis and is marked at the edge.

    Parameters
    ----------
    data : sequence of arrays
        The series drawn on the axis (NaN ignored).
    limits : sequence of float
        Limit values in the data's unit.
    min_span : float
        The least span of the axis, in the data's unit.
    """
    values = np.concatenate([np.asarray(d, dtype=float).ravel() for d in data]) if data else np.zeros(1)
    values = values[np.isfinite(values)]
    low, high = (float(values.min()), float(values.max())) if values.size else (0.0, 1.0)
    reach = LIMIT_REACH * max(high - low, min_span)
    shown = tuple(v for v in limits if low - reach <= v <= high + reach)
    off = tuple(v for v in limits if v not in shown)
    low, high = min([low, *shown]), max([high, *shown])
    pad = 0.5 * max(min_span - (high - low), 0.0) + 0.06 * max(high - low, min_span)
    return AxisRange(low - pad, high + pad, shown, off)


def _limit_lines(ax: Any, scale: AxisRange, colour: str, label: str, unit: str) -> None:
    """The limits of an axis: lines where on scale, an arrow and the value at the edge where not."""
    for k, value in enumerate(scale.shown):
        ax.axhline(value, color=colour, ls="--", lw=0.9, label=label if k == 0 else None)
    for value in scale.off_scale:
        above = value > scale.high
        ax.annotate(f"{label} {value:.4g} {unit} (off scale)", (0.995, 0.97 if above else 0.03),
                    xycoords="axes fraction", ha="right", va="top" if above else "bottom", fontsize=7,
                    color=colour)
        ax.annotate("", (0.999, 1.0 if above else 0.0), (0.999, 0.88 if above else 0.12), xycoords="axes fraction",
                    arrowprops={"arrowstyle": "->", "color": colour, "lw": 0.9})
    ax.set_ylim(scale.low, scale.high)


def _draw_electrical(ax_current: Any, ax_voltage: Any, ax_soc: Any, t: np.ndarray, s: Mapping[str, np.ndarray],
                     lim: Mapping[str, float], marker: str | None = None) -> None:
    """Pack current [A], pack voltage [V] with the open-circuit voltage and the limits, SoC [-] (a resolved
    pack's as the band of its cells around the pack's)."""
    ax_current.plot(t, s["current_A"], color="C0", lw=1.0, marker=marker)
    ax_current.axhline(0.0, color="0.3", lw=0.5)
    ax_current.set_ylabel("pack current [A]\n(+ discharge)")

    ax_voltage.plot(t, s["voltage_V"], color="C2", lw=1.0, marker=marker, label="terminal")
    ax_voltage.plot(t, s["ocv_V"], color="C2", lw=0.8, ls=":", marker=marker, label="open circuit")
    if lim:
        scale = axis_range([s["voltage_V"], s["ocv_V"]], [lim["voltage_min_V"], lim["voltage_max_V"]],
                           MIN_VOLTAGE_SPAN)
        _limit_lines(ax_voltage, scale, "C3", "limit (Ns x cell)", "V")
    ax_voltage.set_ylabel("pack voltage [V]")
    ax_voltage.legend(loc="lower left", fontsize=7, ncol=3)

    if "soc_min" in s:  # a resolved pack: its cells from the emptiest to the fullest, around the pack's SoC
        ax_soc.fill_between(t, s["soc_min"], s["soc_max"], color="C4", alpha=0.25, lw=0, label="cells: min..max")
    ax_soc.plot(t, s["soc"], color="C4", lw=1.0, marker=marker, label="pack" if "soc_min" in s else None)
    if "soc_min" in s:
        ax_soc.legend(loc="lower left", fontsize=7, ncol=2)
    ax_soc.set_ylabel("SoC [-]")
    ax_soc.set_ylim(-0.02, 1.02)


def temperature_series(s: Mapping[str, np.ndarray]) -> list[np.ndarray]:
    """The temperatures the dashboard draws [degC]: cell, sink, ambient, and the coolant where there is one
    (a resolved pack's coldest cell too, the bottom of its band)."""
    keys = ("cell_temperature_degC", "sink_temperature_degC", "ambient_temperature_degC", "coolant_temperature_degC",
            "cell_temperature_min_degC")
    return [s[key] for key in keys if key in s]


def _draw_thermal(ax_temp: Any, ax_heat: Any, t: np.ndarray, s: Mapping[str, np.ndarray],
                  lim: Mapping[str, float], marker: str | None = None) -> None:
    """Cell, sink and ambient temperatures [degC] with the cell limit; heat flows [W].

    A resolved pack's cells are drawn as a band from the coldest to the hottest cell
    with their mean; the line of the cell temperature is then the hottest cell's.
    """
    resolved = "cell_temperature_min_degC" in s
    if resolved:
        ax_temp.fill_between(t, s["cell_temperature_min_degC"], s["cell_temperature_degC"], color="C3", alpha=0.2,
                             lw=0, label="cells: min..max")
        ax_temp.plot(t, s["cell_temperature_mean_degC"], color="C3", lw=0.8, ls=":", label="cells: mean")
    ax_temp.plot(t, s["cell_temperature_degC"], color="C3", lw=1.2, marker=marker,
                 label="hottest cell" if resolved else "cell")
    ax_temp.plot(t, s["sink_temperature_degC"], color="C5", lw=1.0, marker=marker, label="sink")
    ax_temp.plot(t, s["ambient_temperature_degC"], color="0.4", lw=0.9, ls="-.", marker=marker, label="ambient")
    if "coolant_temperature_degC" in s:
        ax_temp.plot(t, s["coolant_temperature_degC"], color="C0", lw=0.8, ls=":", label="coolant out")
    if lim:
        scale = axis_range(temperature_series(s), [lim["cell_temperature_max_degC"]], MIN_TEMPERATURE_SPAN)
        _limit_lines(ax_temp, scale, "C3", "cell limit", "degC")
    ax_temp.set_ylabel("temperature [degC]")
    ax_temp.legend(loc="upper left", fontsize=7, ncol=5)

    ax_heat.plot(t, s["heat_W"], color="C1", lw=1.0, marker=marker, label="generated")
    ax_heat.plot(t, s["heat_to_ambient_W"], color="C9", lw=0.9, marker=marker, label="to ambient")
    for key, colour, label in (("heater_power_W", "C3", "heater"), ("heat_to_coolant_W", "C0", "to coolant")):
        if key in s and np.any(s[key] != 0.0):
            ax_heat.plot(t, s[key], color=colour, lw=0.9, ls="--", label=label)
    ax_heat.axhline(0.0, color="0.3", lw=0.5)
    ax_heat.set_ylabel("heat [W]")
    ax_heat.legend(loc="upper right", fontsize=7, ncol=2)


def _mark_events(axes: Sequence[Any], events: Sequence[Mapping[str, Any]], times: np.ndarray) -> None:
    """Thermostat switches on the temperature panel; stops and CC-CV events across every panel."""
    ax_power, ax_temp = axes[0], axes[4]
    for event in events:
        name = event["event"]
        if name in THERMOSTAT_EVENTS:
            te = _scale_like(times, event["time_s"])
            ax_temp.axvline(te, color="C6", lw=0.7, ls=":")
            ax_temp.annotate(f"{name.removesuffix('_switch')} {event.get('state', '')}", (te, 0.02),
                             xycoords=("data", "axes fraction"), rotation=90, va="bottom", ha="right", fontsize=6,
                             color="C6")
            continue
        if name in STOP_EVENT_NAMES or name in CCCV_EVENT_NAMES:
            te = _scale_like(times, event["time_s"])
            stop = name in STOP_EVENT_NAMES
            for ax in axes:
                ax.axvline(te, color="C3" if stop else "C0", lw=1.2 if stop else 0.8, ls="-" if stop else "--")
            left, right = ax_power.get_xlim()
            near_start = te - left < 0.03 * (right - left)  # a label left of a line at the axis start is clipped
            ax_power.annotate(name.replace("_", " "), (te, 0.98), xycoords=("data", "axes fraction"),
                              rotation=90, va="top", ha="left" if near_start else "right", fontsize=7,
                              color="C3" if stop else "C0")


# ---------------------------------------------------------------------------
# Energy chart: voltage against charge
# ---------------------------------------------------------------------------


#: The parts of a mission on the voltage-charge plane: a discharge, a charge from the load
#: (regeneration) and a charge from a charger (CC-CV, a held voltage).
ENERGY_DIRECTIONS = ("discharge", "regeneration", "charge")
#: What each part's terminal curve delivers or takes in: its area's label.
_TERMINAL_SIDE = {"discharge": "to the load", "regeneration": "fed in by the load", "charge": "from the charger"}


@dataclass(frozen=True)
class EnergyPart:
    """A discharge, a regeneration or a charge part of a mission on the voltage-charge plane.

    ``charge_Ah`` counts the charge moved in that part only (rests and the other
    parts add nothing), so the areas under the curves are energies: under
    ``ocv_V`` the cells' (chemical) energy, under ``voltage_V`` the load's (or the
    charger's), between them the energy dissipated.
    """

    direction: str  # one of ENERGY_DIRECTIONS
    charge_Ah: np.ndarray
    ocv_V: np.ndarray
    voltage_V: np.ndarray
    battery_Wh: float
    load_Wh: float

    @property
    def dissipated_Wh(self) -> float:
        """Energy lost between the two curves [Wh]."""
        return abs(self.battery_Wh - self.load_Wh)

    @property
    def efficiency(self) -> float | None:
        """Out over in: load over cells in discharge, cells over terminals in a charge."""
        num, den = (self.load_Wh, self.battery_Wh) if self.direction == "discharge" else \
            (self.battery_Wh, self.load_Wh)
        return num / den if den > 0 else None

    @property
    def terminal_label(self) -> str:
        """What the terminal curve's area is: to the load, fed in by the load, from the charger."""
        return _TERMINAL_SIDE[self.direction]

    @property
    def axis_range(self) -> tuple[float, float]:
        """The voltage axis of the part [V]: from zero, so areas read as energies, to above its curves."""
        return 0.0, 1.04 * float(max(np.max(self.ocv_V), np.max(self.voltage_V)))


def _interval_parts(result: SimulationResult) -> dict[str, np.ndarray]:
    """Which output intervals belong to each part (by the sign of the mean current and the segment's source)."""
    s = result.series
    times, current = s["time_s"], s["current_A"]
    dt = np.diff(times)
    mean_current = 0.5 * (current[:-1] + current[1:])
    charging = (mean_current < 0) & (dt > 0)
    charger = result.charger[1:] if result.charger is not None else np.ones(len(dt), dtype=bool)
    return {"discharge": (mean_current > 0) & (dt > 0), "regeneration": charging & ~charger,
            "charge": charging & charger}


def energy_parts(result: SimulationResult) -> list[EnergyPart]:
    """Discharge, regeneration and charge parts of the mission (those that move charge), with their areas.

    The areas use the trapezoidal rule over the output rows on the charge axis,
    so they are exactly the areas drawn by :func:`energy_chart`; the regeneration and
    charge parts add up to the summary's charge (``energy_charged_Wh``, split into
    ``energy_regenerated_Wh`` and ``energy_from_charger_Wh``).
    """
    s = result.series
    times, current = s["time_s"], s["current_A"]
    ocv, voltage = s["ocv_V"], s["voltage_V"]
    if len(times) < 2:
        return []
    dt = np.diff(times)
    mean_current = 0.5 * (current[:-1] + current[1:])
    parts = []
    for direction, moving in _interval_parts(result).items():
        if not moving.any():
            continue
        dq = np.where(moving, np.abs(mean_current) * dt / COULOMBS_PER_AH, 0.0)
        x = np.concatenate([[0.0], np.cumsum(dq)])
        rows = np.zeros(len(times), dtype=bool)
        rows[:-1] |= moving
        rows[1:] |= moving
        battery = float(np.sum(0.5 * (ocv[:-1] + ocv[1:]) * dq))
        load = float(np.sum(0.5 * (voltage[:-1] + voltage[1:]) * dq))
        parts.append(EnergyPart(direction, x[rows], ocv[rows], voltage[rows], battery, load))
    return parts


def _energy_panel(ax: Any, loss_ax: Any, part: EnergyPart) -> None:
    """One part: the areas from zero volts (each labelled once), and the voltage gap below, whose area is the loss."""
    x = part.charge_Ah
    lower = np.minimum(part.ocv_V, part.voltage_V)
    upper = np.maximum(part.ocv_V, part.voltage_V)
    inner = part.load_Wh if part.direction == "discharge" else part.battery_Wh
    inner_label = (f"to the load {inner:.4g} Wh" if part.direction == "discharge"
                   else f"stored in the cells {inner:.4g} Wh")
    ax.fill_between(x, 0.0, lower, color="C0", alpha=0.25, lw=0, label=inner_label)
    ax.fill_between(x, lower, upper, color="C3", alpha=0.6, lw=0, label=f"dissipated {part.dissipated_Wh:.4g} Wh")
    ax.plot(x, part.ocv_V, color="k", lw=1.0, label=f"open circuit: from the cells {part.battery_Wh:.4g} Wh"
            if part.direction == "discharge" else "open circuit")
    terminal = "terminal" if part.direction == "discharge" else f"terminal: {part.terminal_label} {part.load_Wh:.4g} Wh"
    ax.plot(x, part.voltage_V, color="C0", lw=1.0, label=terminal)
    ax.set_ylim(*part.axis_range)
    ax.set_ylabel("pack voltage [V]")
    eff = part.efficiency
    ax.set_title(f"{part.direction}: efficiency {eff:.2%}" if eff is not None else part.direction, fontsize=10)
    ax.legend(loc="lower left", fontsize=7)
    loss_ax.fill_between(x, 0.0, upper - lower, color="C3", alpha=0.6, lw=0)
    loss_ax.set_ylim(0.0, 1.1 * float(max(np.max(upper - lower), 1e-9)))
    loss_ax.set_ylabel("|U - V| [V]\n(area: loss)", fontsize=8)
    loss_ax.set_xlabel(f"charge moved, {part.direction} [Ah]")


def energy_chart(result: SimulationResult) -> Figure:
    """Voltage against charge moved from zero volts, a panel per part (discharge, regeneration, charge),
    with the open-circuit and terminal curves, the energies shaded and labelled, and the voltage gap below."""
    parts = energy_parts(result)
    fig = Figure(figsize=(5.6 * max(len(parts), 1), 6), layout="constrained")
    axes = fig.subplots(2, max(len(parts), 1), squeeze=False, height_ratios=(3, 1), sharex="col")
    fig.suptitle(title_of(result), fontsize=10)
    if not parts:
        text = "no charge moved"
        if result.summary.get("stop_explanation"):
            text += ":\n" + "\n".join(_wrap(result.summary["stop_explanation"], 70))
        axes[0, 0].text(0.5, 0.5, text, ha="center", va="center", transform=axes[0, 0].transAxes, fontsize=8)
        axes[1, 0].set_axis_off()
        return fig
    for k, part in enumerate(parts):
        _energy_panel(axes[0, k], axes[1, k], part)
    return fig


# ---------------------------------------------------------------------------
# Operating region: power and dissipation against current
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class OperatingState:
    """The pack as a source ``E`` behind ``R`` at one instant, over currents 0..short circuit.

    ``P_load(I) = E I - R I²`` and ``P_loss(I) = R I²``; the maximum power
    ``E²/(4R)`` sits at half the short-circuit current ``E/R`` (maximum power
    transfer); the minimum pack voltage bounds the usable side at
    ``I_v = (E - V_min)/R``.
    """

    label: str
    time_s: float
    emf_V: float
    resistance_ohm: float
    voltage_min_V: float

    @property
    def short_circuit_A(self) -> float:
        return self.emf_V / self.resistance_ohm

    @property
    def max_power_current_A(self) -> float:
        return 0.5 * self.short_circuit_A

    @property
    def max_power_W(self) -> float:
        return float(maximum_power(self.emf_V, self.resistance_ohm))

    @property
    def voltage_limit_current_A(self) -> float:
        return (self.emf_V - self.voltage_min_V) / self.resistance_ohm

    @property
    def voltage_limit_power_W(self) -> float:
        return float(voltage_limited_power(self.emf_V, self.resistance_ohm, self.voltage_min_V))

    def curves(self, points: int = 200) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Current [A], load power [W] and internal dissipation [W] from 0 to the short circuit."""
        current = np.linspace(0.0, self.short_circuit_A, points)
        loss = self.resistance_ohm * current**2
        return current, self.emf_V * current - loss, loss


def operating_states(result: SimulationResult) -> list[OperatingState]:
    """The pack at the start, at its coldest, at its worst (lowest cell voltage while discharging) and at the end.

    The worst state matters after a recharge: the end then shows a full, warm pack and hides it.
    Instants that fall on one row are drawn once, their labels joined.
    """
    s = result.series
    v_min = result.limits.get("voltage_min_V", 0.0)
    discharging = np.flatnonzero(s["current_A"] > 0)
    worst = int(discharging[np.argmin(s["cell_voltage_V"][discharging])]) if discharging.size else 0
    chosen = {"start": 0, "coldest": int(np.argmin(s["cell_temperature_degC"])), "lowest voltage": worst,
              "end": len(s["time_s"]) - 1}
    rows: dict[int, list[str]] = {}
    for label, row in chosen.items():
        rows.setdefault(row, []).append(label)
    states = []
    for row, labels in rows.items():
        label = ", ".join(labels)
        states.append(OperatingState(
            f"{label} ({s['cell_temperature_degC'][row]:.1f} degC, SoC {s['soc'][row]:.2f})",
            float(s["time_s"][row]), float(s["pack_emf_V"][row]), float(s["pack_resistance_ohm"][row]), v_min))
    return states


@dataclass(frozen=True)
class OperatingView:
    """What the operating-region chart shows: its states and axes, scaled to the mission.

    Attributes
    ----------
    states : list of OperatingState
        The instants drawn (:func:`operating_states`).
    current_max : float
        The current axis' end [A]: past the mission's currents and the minimum-voltage
        boundaries, not out to the short circuit.
    power_max : float
        The power axis' end [W].
    off_scale : list of str
        What lies past the current axis (the maximum-power points and short circuits), to annotate at its edge.
    """

    states: list[OperatingState]
    current_max: float
    power_max: float
    off_scale: list[str]


#: The current axis of the operating region runs to this many times the mission's largest discharge current [-].
CURRENT_AXIS_FACTOR = 2.5


def operating_view(result: SimulationResult) -> OperatingView:
    """The operating region scaled to the mission: :data:`CURRENT_AXIS_FACTOR` times its largest discharge
    current (the nearest minimum-voltage boundary without a discharge), never past the short circuit; the power
    axis to what the curves and the mission's points reach there. What lies beyond is listed in ``off_scale``."""
    s = result.series
    states = operating_states(result)
    discharging = s["current_A"] > 0
    peak = float(np.max(s["current_A"][discharging])) if discharging.any() else 0.0
    boundaries = [st.voltage_limit_current_A for st in states
                  if 0 < st.voltage_limit_current_A < st.max_power_current_A]
    wanted = CURRENT_AXIS_FACTOR * peak if peak > 0 else 1.2 * min(boundaries or
                                                                    [st.max_power_current_A for st in states])
    current_max = min(wanted, max(st.short_circuit_A for st in states))
    power = []
    for st in states:
        current, load, _ = st.curves()
        power.append(float(np.max(load[current <= current_max])))
    if discharging.any():
        power.append(float(np.max(s["power_W"][discharging])))
    off = []
    for st in states:
        beyond = []
        if st.voltage_limit_current_A > current_max and st.voltage_limit_current_A < st.max_power_current_A:
            beyond.append(f"minimum voltage at {st.voltage_limit_current_A:.4g} A ({st.voltage_limit_power_W:.4g} W)")
        if st.max_power_current_A > current_max:
            beyond.append(f"maximum power {st.max_power_W:.4g} W at {st.max_power_current_A:.4g} A")
        beyond.append(f"short circuit {st.short_circuit_A:.4g} A")
        off.append(f"{st.label.split(' (')[0]}: " + ", ".join(beyond))
    return OperatingView(states, current_max, 1.15 * max(power), off)


def operating_region(result: SimulationResult) -> Figure:
    """Load power and dissipation against current at chosen instants, with the mission's operating points,
    scaled to the mission (:func:`operating_view`); what lies past the current axis is written at its edge."""
    s = result.series
    view = operating_view(result)
    fig = Figure(figsize=(9, 6), layout="constrained")
    ax = fig.subplots()
    for k, state in enumerate(view.states):
        colour = f"C{k}"
        current, load, loss = state.curves(400)
        ax.plot(current, load, color=colour, lw=1.3, label=f"load power, {state.label}")
        ax.plot(current, loss, color=colour, lw=0.9, ls="--",
                label="internal dissipation R I² (dashed)" if k == 0 else None)
        if state.max_power_current_A <= view.current_max:
            ax.plot(state.max_power_current_A, state.max_power_W, "o", color=colour, mfc="white", ms=7,
                    label="maximum power E²/4R at I_sc/2" if k == 0 else None)
        if 0 < state.voltage_limit_current_A < state.max_power_current_A:
            ax.plot(state.voltage_limit_current_A, state.voltage_limit_power_W, "s", color=colour, ms=6,
                    label="minimum-voltage boundary" if k == 0 else None)
            ax.axvline(state.voltage_limit_current_A, color=colour, lw=0.7, ls=":")
    discharging = s["current_A"] > 0
    ax.scatter(s["current_A"][discharging], s["power_W"][discharging], s=5, color="0.45",
               label="mission operating points", zorder=3)
    if view.off_scale:
        ax.text(0.99, 0.02, "beyond the axis (->):\n" + "\n".join(view.off_scale), transform=ax.transAxes,
                ha="right", va="bottom", fontsize=7, color="0.3")
    ax.set_xlim(0, view.current_max)
    ax.set_ylim(0, view.power_max)
    ax.set_xlabel("pack current [A]")
    ax.set_ylabel("power [W]")
    ax.set_title(f"{title_of(result)}\noperating region: right of a square the cells are below their minimum "
                 "voltage,\nright of a circle (maximum power) lies the abuse side", fontsize=9)
    ax.legend(fontsize=7, loc="upper left")
    return fig


# ---------------------------------------------------------------------------
# Comparison overlays
# ---------------------------------------------------------------------------


def comparison_overlay(results: Mapping[str, SimulationResult]) -> Figure:
    """Voltage, cell temperature and SoC of several cases on shared axes."""
    fig = Figure(figsize=(10, 9), layout="constrained")
    ax_v, ax_t, ax_z = fig.subplots(3, 1, sharex=True)
    longest = max(results.values(), key=lambda r: r.series["time_s"][-1])
    _, t_label = _time_axis(longest.series["time_s"])
    for k, (name, result) in enumerate(results.items()):
        s = result.series
        t = _scale_time_as(longest.series["time_s"], s["time_s"])
        colour = f"C{k}"
        ax_v.plot(t, s["voltage_V"], color=colour, lw=1.0, label=name)
        ax_t.plot(t, s["cell_temperature_degC"], color=colour, lw=1.0, label=f"{name}, cell")
        ax_t.plot(t, s["ambient_temperature_degC"], color=colour, lw=0.7, ls=":")
        ax_z.plot(t, s["soc"], color=colour, lw=1.0, label=name)
        if not result.completed:
            ax_v.plot(t[-1], s["voltage_V"][-1], "x", color=colour, ms=8,
                      label="stopped early" if not any(not r.completed for r in list(results.values())[:k]) else None)
    lim = longest.limits
    if lim:
        ax_v.axhline(lim["voltage_min_V"], color="C3", ls="--", lw=0.8)
        ax_v.axhline(lim["voltage_max_V"], color="C3", ls="--", lw=0.8)
        ax_t.axhline(lim["cell_temperature_max_degC"], color="C3", ls="--", lw=0.8, label="cell limit")
    ax_v.set_ylabel("pack voltage [V]")
    ax_t.set_ylabel("temperature [degC]\n(dotted: ambient)")
    ax_z.set_ylabel("SoC [-]")
    ax_z.set_xlabel(t_label)
    ax_v.legend(fontsize=8)
    ax_t.legend(fontsize=7, ncol=2)
    stopped = [name for name, result in results.items() if not result.completed]
    fig.suptitle("case comparison" + (f" (x: stopped early - {', '.join(stopped)})" if stopped else ""), fontsize=11)
    return fig


def _scale_time_as(reference: np.ndarray, times: np.ndarray) -> np.ndarray:
    scale = _scale_like(reference, 1.0)
    return times * scale


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------

#: File stems of the figures written by :func:`write_figures` (and, for a resolved pack, :data:`PACK_MAP`).
FIGURE_NAMES = ("dashboard", "energy", "operating_region")
#: File stem of a resolved pack's map (:func:`thermoelec.output.pack_figures.pack_map`).
PACK_MAP = "pack_map"


def save(fig: Figure, out_dir: Path, stem: str, formats: Sequence[str]) -> list[Path]:
    """Save a figure as ``stem.<format>`` for each format."""
    paths = []
    for fmt in formats:
        path = out_dir / f"{stem}.{fmt}"
        fig.savefig(path, dpi=110, metadata={"Software": "thermoelec"} if fmt == "png" else None)
        paths.append(path)
    return paths


def write_figures(result: SimulationResult, out_dir: str | Path,
                  formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """Write the dashboard, energy chart and operating-region chart of one result (a resolved pack's map too)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    makers = {"dashboard": dashboard, "energy": energy_chart, "operating_region": operating_region}
    paths = []
    for stem in FIGURE_NAMES:
        paths += save(makers[stem](result), out, stem, formats)
    if result.cells is not None:  # a resolved pack: the peak temperature of every cell where it sits
        paths += save(pack_map(result), out, PACK_MAP, formats)
    return paths


def write_comparison_figure(results: Mapping[str, SimulationResult], out_dir: str | Path,
                            formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """Write the overlay of a case comparison (:func:`comparison_overlay`) as ``comparison.<format>``.

    Parameters
    ----------
    results : mapping of str to SimulationResult
        Each case's mission, by case name (in the order of the legend).
    out_dir : str or Path
        The comparison's folder (created if missing).
    formats : sequence of str
        File formats matplotlib writes (``png``, ``svg``, ...).
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    return save(comparison_overlay(results), out, "comparison", formats)
