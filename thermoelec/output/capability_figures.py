"""Figures of a pack's power capability: a heat map per pulse duration, the binding limit marked in every cell.

Owns :data:`LIMIT_MARKS` (the short mark of each limit that can bind a
capability), :func:`capability_marks` (the data of a panel: values and marks, by
temperature and SoC, tested on what it returns), :func:`capability_map` (one
figure per duration: discharge and charge power and current over temperature x
SoC) and :func:`write_capability_figures`. Imports from analysis/ and below only.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from thermoelec.analysis.capability import BINDING_NONE, COLD_CHARGE, Capability
from thermoelec.engine.events import STOP_REASONS
from thermoelec.engine.pulse import PULSE_KINDS
from thermoelec.output.figures import save
from thermoelec.physics.constants import ZERO_CELSIUS

__all__ = ["LIMIT_MARKS", "PanelData", "capability_map", "capability_marks", "figure_stem",
           "write_capability_figures"]

#: The mark written in a heat-map cell for the limit that binds it (every stop reason, the cold charge, none).
LIMIT_MARKS: dict[str, str] = {
    "voltage_min": "V-", "voltage_max": "V+", "power_limit": "Pm", "temperature_max": "T+", "soc_limit": "S",
    "discharge_current_max": "I", "charge_current_max": "I", "discharge_power_max": "P", "charge_power_max": "P",
    "discharge_temperature_min": "Td", "charge_temperature_max": "Tc", "sink_temperature_max": "Ts",
    "nothing_deliverable": "0", COLD_CHARGE: "Tc-", BINDING_NONE: "?", "end_of_profile": "", "solver_error": "?",
}
if set(STOP_REASONS) - set(LIMIT_MARKS):
    raise ImportError(f"no capability mark for {sorted(set(STOP_REASONS) - set(LIMIT_MARKS))}")
#: What each mark means, for the legend.
MARK_MEANINGS: dict[str, str] = {
    "V-": "voltage_min", "V+": "voltage_max", "Pm": "maximum-power point", "T+": "cell_temperature_max",
    "S": "SoC 0 or 1", "I": "cell current limit", "P": "pack power limit", "Td": "discharge_temperature_min",
    "Tc": "charge_temperature_max", "Ts": "sink_temperature_max", "0": "nothing deliverable",
    "Tc-": "charge_temperature_min", "?": "not solved",
}


@dataclass(frozen=True)
class PanelData:
    """One heat map: a capability over temperature x SoC at one duration.

    Attributes
    ----------
    temperatures : array
        Column coordinates [degC].
    socs : array
        Row coordinates [-].
    values : array, shape (n_socs, n_temperatures)
        The capability [W or A] (rows by SoC).
    marks : object array, shape (n_socs, n_temperatures)
        The binding limit's mark in each cell (:data:`LIMIT_MARKS`).
    """

    temperatures: np.ndarray
    socs: np.ndarray
    values: np.ndarray
    marks: np.ndarray

    @property
    def used_marks(self) -> list[str]:
        """The marks that appear, each once, in the order of :data:`MARK_MEANINGS`."""
        present = set(self.marks.ravel())
        return [mark for mark in MARK_MEANINGS if mark in present]


def capability_marks(result: Capability, duration: int, kind: str) -> PanelData:
    """The data of one heat map: the values and the binding limits' marks of a capability at a duration.

    Parameters
    ----------
    result : Capability
        A computed capability (:func:`thermoelec.analysis.capability.capability`).
    duration : int
        Index of the pulse duration in the grid.
    kind : str
        A name of :data:`thermoelec.engine.pulse.PULSE_KINDS`.
    """
    values = result.values[kind][duration].T  # rows by SoC, columns by temperature
    marks = np.vectorize(lambda name: LIMIT_MARKS.get(name, "?"), otypes=[object])(result.binding[kind][duration].T)
    return PanelData(result.grid.temperatures - ZERO_CELSIUS, result.grid.socs, values, marks)


def _edges(centres: np.ndarray) -> np.ndarray:
    """Cell edges around centres (half way between them, the ends mirrored); a single centre gets a unit width."""
    if len(centres) == 1:
        return np.array([centres[0] - 0.5, centres[0] + 0.5])
    mids = 0.5 * (centres[1:] + centres[:-1])
    return np.concatenate([[2 * centres[0] - mids[0]], mids, [2 * centres[-1] - mids[-1]]])


def capability_map(result: Capability, duration: int) -> Figure:
    """The four capabilities at one pulse duration as heat maps over temperature x SoC, each cell marked.

    Parameters
    ----------
    result : Capability
        A computed capability.
    duration : int
        Index of the pulse duration in the grid.

    Returns
    -------
    Figure
        Discharge power and current (top), charge power and current (bottom); the colour is the
        capability, the mark in each cell the limit that binds it (legend below).
    """
    fig = Figure(figsize=(12, 9), layout="constrained")
    axes = fig.subplots(2, 2)
    order = ("discharge_power", "discharge_current", "charge_power", "charge_current")
    used: list[str] = []
    for ax, name in zip(axes.ravel(), order, strict=True):
        kind = next(k for k in PULSE_KINDS if k.name == name)
        panel = capability_marks(result, duration, name)
        mesh = ax.pcolormesh(_edges(panel.temperatures), _edges(panel.socs), np.ma.masked_invalid(panel.values),
                             cmap="viridis", shading="flat")
        fig.colorbar(mesh, ax=ax, label=f"{name.replace('_', ' ')} [{kind.unit}]")
        small = len(panel.temperatures) * len(panel.socs) > 120
        top = np.nanmax(np.r_[panel.values.ravel(), 0.0])
        for (r, c), mark in np.ndenumerate(panel.marks):
            value = panel.values[r, c]
            dark = np.isfinite(value) and value < 0.5 * top  # viridis is dark at its low end (NaN: no colour)
            ax.text(panel.temperatures[c], panel.socs[r], mark, ha="center", va="center", fontsize=5 if small else 7,
                    color="white" if dark else "black")
        ax.set_xlabel("temperature at the start [degC]")
        ax.set_ylabel("SoC at the start [-]")
        ax.set_title(f"{name.replace('_', ' ')}, {result.grid.durations[duration]:g} s pulse", fontsize=10)
        used += [m for m in panel.used_marks if m not in used]
    fig.suptitle(f"{result.metadata.get('scenario', '')}: pulse capability from rest, "
                 f"{result.grid.durations[duration]:g} s; the mark in a cell is the limit that binds it\n"
                 + "   ".join(f"{m}: {MARK_MEANINGS[m]}" for m in used), fontsize=10)
    return fig


def figure_stem(duration: float) -> str:
    """The file stem of a duration's heat map: ``capability_2s``, ``capability_0.5s``.

    Parameters
    ----------
    duration : float
        Pulse duration [s].
    """
    return f"capability_{duration:g}s"


def write_capability_figures(result: Capability, out_dir: str | Path,
                             formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """Write the heat map of each pulse duration (:func:`capability_map`) into ``out_dir``.

    Parameters
    ----------
    result : Capability
        A computed capability.
    out_dir : str or Path
        The folder (created if missing).
    formats : sequence of str
        File formats matplotlib writes.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    for i, duration in enumerate(result.grid.durations):
        paths += save(capability_map(result, i), out, figure_stem(float(duration)), formats)
    return paths
