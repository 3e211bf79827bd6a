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
    "EnergyPart",
    "OperatingState",
    "comparison_overlay",
    "dashboard",
    "energy_chart",
    "energy_parts",
    "operating_region",
    "operating_states",
    "save",
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
        Six panels sharing the time axis (s, min or h by the mission's length).
    """
    s = result.series
    t, t_label = _time_axis(s["time_s"])
    fig = Figure(figsize=(10, 13), layout="constrained")
    axes = fig.subplots(6, 1, sharex=True)
    ax_power, ax_current, ax_voltage, ax_soc, ax_temp, ax_heat = axes
    modes = result.demand_mode if result.demand_mode is not None else np.array(["current"] * len(t), dtype=object)
    _shade_modes(axes, t, modes)
    _draw_power(fig, ax_power, t, s, modes, result.demand_value)
    _draw_electrical(ax_current, ax_voltage, ax_soc, t, s, result.limits)
    _draw_thermal(ax_temp, ax_heat, t, s, result.limits)
    ax_heat.set_xlabel(t_label)
    _mark_events(axes, result.events, s["time_s"])
    summary = result.summary
    verdict = "completed" if summary["completed"] else f"stopped: {summary['stop_reason']}"
    fig.suptitle(f"{summary.get('scenario', '')} - {verdict} at {summary['duration_s']:.0f} s", fontsize=11)
    return fig


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
                demand_value: np.ndarray | None) -> None:
    """Power to the load [W] and the demanded power; the figure's legend (modes and power lines)."""
    ax.plot(t, s["power_W"], color="C1", lw=1.0, label="power to load")
    if demand_value is not None:
        demanded = np.where(modes == "power", demand_value, np.nan)
        if np.isfinite(demanded).any():
            ax.plot(t, demanded, color="k", lw=0.8, ls="--", label="demanded power")
    ax.set_ylabel("power [W]")
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", fontsize=8, ncol=7)


def _draw_electrical(ax_current: Any, ax_voltage: Any, ax_soc: Any, t: np.ndarray, s: Mapping[str, np.ndarray],
                     lim: Mapping[str, float]) -> None:
    """Pack current [A], pack voltage [V] with the open-circuit voltage and the limits, SoC [-] (a resolved
    pack's as the band of its cells around the pack's)."""
    ax_current.plot(t, s["current_A"], color="C0", lw=1.0)
    ax_current.axhline(0.0, color="0.3", lw=0.5)
    ax_current.set_ylabel("pack current [A]\n(+ discharge)")

    ax_voltage.plot(t, s["voltage_V"], color="C2", lw=1.0, label="terminal")
    ax_voltage.plot(t, s["ocv_V"], color="C2", lw=0.8, ls=":", label="open circuit")
    if lim:
        ax_voltage.axhline(lim["voltage_min_V"], color="C3", ls="--", lw=0.9, label="limits (Ns x cell)")
        ax_voltage.axhline(lim["voltage_max_V"], color="C3", ls="--", lw=0.9)
    ax_voltage.set_ylabel("pack voltage [V]")
    ax_voltage.legend(loc="lower left", fontsize=7, ncol=3)

    if "soc_min" in s:  # a resolved pack: its cells from the emptiest to the fullest, around the pack's SoC
        ax_soc.fill_between(t, s["soc_min"], s["soc_max"], color="C4", alpha=0.25, lw=0, label="cells: min..max")
    ax_soc.plot(t, s["soc"], color="C4", lw=1.0, label="pack" if "soc_min" in s else None)
    if "soc_min" in s:
        ax_soc.legend(loc="lower left", fontsize=7, ncol=2)
    ax_soc.set_ylabel("SoC [-]")
    ax_soc.set_ylim(-0.02, 1.02)


def _draw_thermal(ax_temp: Any, ax_heat: Any, t: np.ndarray, s: Mapping[str, np.ndarray],
                  lim: Mapping[str, float]) -> None:
    """Cell, sink and ambient temperatures [degC] with the cell limit; heat flows [W].

    A resolved pack's cells are drawn as a band from the coldest to the hottest cell
    with their mean; the line marked "cell" is then the hottest cell.
    """
    if "cell_temperature_min_degC" in s:
        ax_temp.fill_between(t, s["cell_temperature_min_degC"], s["cell_temperature_degC"], color="C3", alpha=0.2,
                             lw=0, label="cells: min..max")
        ax_temp.plot(t, s["cell_temperature_mean_degC"], color="C3", lw=0.8, ls=":", label="cells: mean")
    ax_temp.plot(t, s["cell_temperature_degC"], color="C3", lw=1.2,
                 label="hottest cell" if "cell_temperature_min_degC" in s else "cell")
    ax_temp.plot(t, s["sink_temperature_degC"], color="C5", lw=1.0, label="sink")
    ax_temp.plot(t, s["ambient_temperature_degC"], color="0.4", lw=0.9, ls="-.", label="ambient")
    if lim:
        ax_temp.axhline(lim["cell_temperature_max_degC"], color="C3", ls="--", lw=0.9, label="cell limit")
    ax_temp.set_ylabel("temperature [degC]")
    ax_temp.legend(loc="upper left", fontsize=7, ncol=4)

    ax_heat.plot(t, s["heat_W"], color="C1", lw=1.0, label="generated")
    ax_heat.plot(t, s["heat_to_ambient_W"], color="C9", lw=0.9, label="to ambient")
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
            ax_power.annotate(name.replace("_", " "), (te, 1.0), xycoords=("data", "axes fraction"),
                              rotation=90, va="top", ha="right", fontsize=7, color="C3" if stop else "C0")


# ---------------------------------------------------------------------------
# Energy chart: voltage against charge
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class EnergyPart:
    """The discharge or the charge part of a mission on the voltage-charge plane.

    ``charge_Ah`` counts the charge moved in that direction only (rests and the
    other direction add nothing), so the areas under the curves are energies:
    under ``ocv_V`` the battery's (chemical) energy, under ``voltage_V`` the
    load's (or the charger's), between them the energy dissipated.
    """

    direction: str  # "discharge" | "charge"
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
        """Out over in: load over battery in discharge, battery over charger in charge."""
        num, den = (self.load_Wh, self.battery_Wh) if self.direction == "discharge" else \
            (self.battery_Wh, self.load_Wh)
        return num / den if den > 0 else None


def energy_parts(result: SimulationResult) -> list[EnergyPart]:
    """Discharge and charge parts of the mission (those that move charge), with their areas.

    The areas use the trapezoidal rule over the output rows on the charge axis,
    so they are exactly the areas drawn by :func:`energy_chart`.
    """
    s = result.series
    times, current = s["time_s"], s["current_A"]
    ocv, voltage = s["ocv_V"], s["voltage_V"]
    if len(times) < 2:
        return []
    dt = np.diff(times)
    mean_current = 0.5 * (current[:-1] + current[1:])
    parts = []
    for direction, sign in (("discharge", 1.0), ("charge", -1.0)):
        moving = (sign * mean_current > 0) & (dt > 0)
        if not moving.any():
            continue
        dq = np.where(moving, sign * mean_current * dt / COULOMBS_PER_AH, 0.0)
        x = np.concatenate([[0.0], np.cumsum(dq)])
        rows = np.zeros(len(times), dtype=bool)
        rows[:-1] |= moving
        rows[1:] |= moving
        battery = float(np.sum(0.5 * (ocv[:-1] + ocv[1:]) * dq))
        load = float(np.sum(0.5 * (voltage[:-1] + voltage[1:]) * dq))
        parts.append(EnergyPart(direction, x[rows], ocv[rows], voltage[rows], battery, load))
    return parts


def energy_chart(result: SimulationResult) -> Figure:
    """Voltage against charge moved, with OCV and terminal curves and the energies shaded and labelled."""
    parts = energy_parts(result)
    fig = Figure(figsize=(6.5 * max(len(parts), 1), 5), layout="constrained")
    axes = fig.subplots(1, max(len(parts), 1), squeeze=False)[0]
    if not parts:
        axes[0].text(0.5, 0.5, "no charge moved", ha="center", va="center", transform=axes[0].transAxes)
        return fig
    for ax, part in zip(axes, parts, strict=True):
        x = part.charge_Ah
        lower = np.minimum(part.ocv_V, part.voltage_V)
        upper = np.maximum(part.ocv_V, part.voltage_V)
        ax.fill_between(x, 0.0, lower, color="C0", alpha=0.25, lw=0,
                        label=(f"load energy {part.load_Wh:.4g} Wh" if part.direction == "discharge"
                               else f"stored in the cells {part.battery_Wh:.4g} Wh"))
        ax.fill_between(x, lower, upper, color="C3", alpha=0.45, lw=0,
                        label=f"dissipated {part.dissipated_Wh:.4g} Wh")
        ax.plot(x, part.ocv_V, color="k", lw=1.0,
                label=f"open circuit (area: battery {part.battery_Wh:.4g} Wh)")
        ax.plot(x, part.voltage_V, color="C0", lw=1.0,
                label=(f"terminal (area: load {part.load_Wh:.4g} Wh)" if part.direction == "discharge"
                       else f"terminal (area: from charger {part.load_Wh:.4g} Wh)"))
        low = float(np.min(lower))
        ax.set_ylim(low * 0.97, float(np.max(upper)) * 1.01)
        ax.set_xlabel("charge discharged [Ah]" if part.direction == "discharge" else "charge charged [Ah]")
        ax.set_ylabel("pack voltage [V]")
        eff = part.efficiency
        ax.set_title(f"{part.direction}: efficiency {eff:.2%}" if eff is not None else part.direction)
        ax.legend(loc="lower left" if part.direction == "discharge" else "upper left", fontsize=8)
        ax.text(0.99, 0.01, "shading starts at 0 V; axis cut", transform=ax.transAxes, ha="right", va="bottom",
                fontsize=7, color="0.4")
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
    """The pack at the start, at its coldest and at the end of the mission."""
    s = result.series
    v_min = result.limits.get("voltage_min_V", 0.0)
    chosen = {"start": 0, "coldest": int(np.argmin(s["cell_temperature_degC"])), "end": len(s["time_s"]) - 1}
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


def operating_region(result: SimulationResult) -> Figure:
    """Load power and dissipation against current at chosen instants, with the mission's operating points."""
    s = result.series
    fig = Figure(figsize=(9, 6), layout="constrained")
    ax = fig.subplots()
    peak = 0.0
    for k, state in enumerate(operating_states(result)):
        colour = f"C{k}"
        current, load, loss = state.curves()
        ax.plot(current, load, color=colour, lw=1.3, label=f"load power, {state.label}")
        ax.plot(current, loss, color=colour, lw=0.9, ls="--", label="internal dissipation" if k == 0 else None)
        ax.plot(state.max_power_current_A, state.max_power_W, "o", color=colour, mfc="white", ms=7,
                label="maximum power E²/4R at I_sc/2" if k == 0 else None)
        peak = max(peak, state.max_power_W)
        if 0 < state.voltage_limit_current_A < state.max_power_current_A:
            ax.plot(state.voltage_limit_current_A, state.voltage_limit_power_W, "s", color=colour, ms=6,
                    label="minimum-voltage boundary" if k == 0 else None)
            ax.axvline(state.voltage_limit_current_A, color=colour, lw=0.7, ls=":")
    discharging = s["current_A"] > 0
    ax.scatter(s["current_A"][discharging], s["power_W"][discharging], s=4, color="k", alpha=0.4,
               label="mission operating points", zorder=3)
    ax.set_xlim(left=0)
    ax.set_ylim(0, 1.15 * peak)
    ax.set_xlabel("pack current [A]")
    ax.set_ylabel("power [W]")
    ax.set_title("operating region - right of a square the cells are below their minimum voltage;\n"
                 "right of a circle (maximum power) lies the abuse side", fontsize=9)
    ax.legend(fontsize=7, loc="upper right")
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
            ax_v.plot(t[-1], s["voltage_V"][-1], "x", color=colour, ms=8)
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
    fig.suptitle("case comparison (x: stopped early)", fontsize=11)
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
