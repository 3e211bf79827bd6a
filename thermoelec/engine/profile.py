"""Mission profiles: load segments, repeats, zero-order-hold series, CC-CV.

A profile is a list of :class:`Segment` in SI units (pack level). The scenario
layer builds them from the file; the mission plan
(:func:`thermoelec.engine.mission.plan_mission`) turns each into one or more
integration phases (a CC-CV segment has a constant-current and a
constant-voltage phase).

This module imports nothing of the engine (the problem and the mission plan read it).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

__all__ = ["Segment", "expand_repeats", "segments_from_series"]


@dataclass(frozen=True)
class Segment:
    """One segment of a mission profile (pack level, SI units).

    Attributes
    ----------
    mode : str
        A load mode of :data:`thermoelec.physics.loads.LOAD_MODES`, ``rest`` or ``cccv``
        (a soak is a rest at its own ambient).
    value : float
        Demand: current [A], power [W], load resistance [Ω] or terminal voltage
        [V]; for ``cccv`` the constant charge current [A] (negative); 0 for ``rest``.
    duration : float
        Length [s]; ``math.inf`` for a CC-CV segment that ends on its cutoff.
    voltage_below, voltage_above : float or None
        End the segment when the pack voltage falls below / rises above this [V].
    soc_below, soc_above : float or None
        End the segment when the SoC falls below / rises above this [-].
    cv_voltage : float or None
        CC-CV: pack voltage held in the CV phase [V].
    cutoff_current : float or None
        CC-CV: current magnitude that ends the CV phase [A].
    ambient_temperature : float or None
        Ambient temperature during the segment [K]; None keeps the scenario's.
    origin : str
        Where the segment came from, for messages ("profile.segment[2]", "route.csv row 14").
    name : str
        The segment's own name from the scenario (``"take-off"``), empty without one.
    """

    mode: str
    value: float = 0.0
    duration: float = math.inf
    voltage_below: float | None = None
    voltage_above: float | None = None
    soc_below: float | None = None
    soc_above: float | None = None
    cv_voltage: float | None = None
    cutoff_current: float | None = None
    ambient_temperature: float | None = None
    origin: str = ""
    name: str = ""


def expand_repeats(segments: list[Segment], repeat: int) -> list[Segment]:
    """The segment list run ``repeat`` times, origins tagged with the pass number.

    Parameters
    ----------
    segments : list of Segment
        One pass of the profile, pack level, SI units [SI].
    repeat : int
        Number of passes, >= 1 [-]; 1 returns the segments untagged (a new list).

    Returns
    -------
    list of Segment
        ``repeat`` copies one after the other, each origin followed by ``(pass k)`` [SI].
    """
    if repeat == 1:
        return list(segments)
    return [replace(s, origin=f"{s.origin} (pass {k + 1})") for k in range(repeat) for s in segments]


def segments_from_series(
    time: np.ndarray,
    mode: str,
    demand: np.ndarray,
    ambient_temperature: np.ndarray | None,
    origin: str,
) -> list[Segment]:
    """Zero-order-hold segments from a sampled series.

    Each row's demand holds from its time stamp to the next row's; the series
    spans the first to the last time stamp, so ``n`` rows make ``n - 1`` segments.

    Parameters
    ----------
    time : array of float
        Strictly increasing time stamps [s].
    mode : str
        One of :data:`DEMAND_MODES` [-].
    demand : array of float
        Demand per row in the unit of ``mode`` (SI) [A, W, Ω or V].
    ambient_temperature : array of float or None
        Ambient temperature per row [K].
    origin : str
        File name, for messages [-].

    Returns
    -------
    list of Segment
        ``n - 1`` segments: durations [s], demands in the unit of ``mode`` [A, W, Ω or V],
        ambient temperatures [K], origins ``"<origin> row k"``.
    """
    durations = np.diff(time)
    return [
        Segment(
            mode=mode,
            value=float(demand[k]),
            duration=float(durations[k]),
            ambient_temperature=None if ambient_temperature is None else float(ambient_temperature[k]),
            origin=f"{origin} row {k + 1}",
        )
        for k in range(len(durations))
    ]
