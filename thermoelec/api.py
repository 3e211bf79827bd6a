"""The public entry points: simulate a mission, draw its figures.

The top layer (with :mod:`thermoelec.cli`): it may import every layer below.
:func:`simulate` and :func:`simulate_file` are those of
:mod:`thermoelec.analysis.simulate`; the plot functions draw a result with
:mod:`thermoelec.output.figures`, imported when first called so that
``import thermoelec`` does not load matplotlib.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from thermoelec.analysis.results import SimulationResult
from thermoelec.analysis.simulate import simulate, simulate_file

if TYPE_CHECKING:
    from matplotlib.figure import Figure

__all__ = ["plot_dashboard", "plot_energy", "plot_operating_region", "simulate", "simulate_file"]


def plot_dashboard(result: SimulationResult) -> Figure:
    """The mission dashboard of a result.

    Parameters
    ----------
    result : SimulationResult
        A simulated mission (:func:`simulate`).

    Returns
    -------
    matplotlib.figure.Figure
        Demand, current, voltage with limits, SoC, temperatures with limit and heat
        against time; stops and mode switches marked (:func:`thermoelec.output.figures.dashboard`).
    """
    from thermoelec.output.figures import dashboard

    return dashboard(result)


def plot_energy(result: SimulationResult) -> Figure:
    """The energy chart of a result: pack voltage [V] against charge moved [Ah], energies [Wh] shaded.

    Parameters
    ----------
    result : SimulationResult
        A simulated mission (:func:`simulate`).

    Returns
    -------
    matplotlib.figure.Figure
        One panel per direction that moved charge (:func:`thermoelec.output.figures.energy_chart`).
    """
    from thermoelec.output.figures import energy_chart

    return energy_chart(result)


def plot_operating_region(result: SimulationResult) -> Figure:
    """The operating region of a result: load power and dissipation [W] against pack current [A].

    Parameters
    ----------
    result : SimulationResult
        A simulated mission (:func:`simulate`).

    Returns
    -------
    matplotlib.figure.Figure
        The curves at the start, the coldest instant and the end, with the mission's operating
        points (:func:`thermoelec.output.figures.operating_region`).
    """
    from thermoelec.output.figures import operating_region

    return operating_region(result)
