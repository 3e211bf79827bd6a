"""Why a mission stopped, in words: which demand could not be met, where, and why at that state.

Owns :func:`explain_stop`, the ``stop_explanation`` of a summary: the segment
(its dotted key and name), its demand, the time, the state (SoC, cell
temperature) and the physical reason read from the pack as a source ``E``
behind ``R`` at the stop — above the maximum-power point ``E²/(4R)`` (maximum
power transfer, circuit theory), or the most power the cells give at their
voltage limit, ``I_v (E − I_v R)`` with ``I_v = (E − Ns V_min) / R_cells``.

Imports from engine/ and physics/ only; never from output/, fit/, the API or
the command line.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from thermoelec.engine.events import EVENT_NAMES, STOP_EVENTS
from thermoelec.engine.problem import Problem
from thermoelec.engine.profile import Segment
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.loads import LOAD_MODES, maximum_power

__all__ = ["describe_segment", "explain_stop"]

#: The stop event names of each stop reason, from the event registry.
_STOP_NAMES: dict[str, frozenset[str]] = {}
for _code, _reason in STOP_EVENTS.items():
    _STOP_NAMES[_reason] = _STOP_NAMES.get(_reason, frozenset()) | {EVENT_NAMES[_code]}


def describe_segment(segment: Segment) -> str:
    """A segment in words: its key, its name, its demand (``profile.segment[1] "take-off", power 950 W``).

    Parameters
    ----------
    segment : Segment
        A mission segment (pack level, SI).
    """
    where = segment.origin + (f' "{segment.name}"' if segment.name else "")
    if segment.mode == "cccv":
        return f"{where}, CC-CV charge at {segment.value:.4g} A to {segment.cv_voltage:.4g} V"
    if segment.mode == "rest":
        return f"{where}, rest"
    mode = LOAD_MODES[segment.mode]
    return f"{where}, {mode.label} {segment.value:.4g} {mode.unit}"


def _state(series: Mapping[str, np.ndarray], row: int) -> str:
    return f"SoC {series['soc'][row]:.3f}, cell {series['cell_temperature_degC'][row]:.1f} degC"


def _segment_start(series: Mapping[str, np.ndarray], row_segments: np.ndarray, segment: int) -> float:
    rows = np.flatnonzero(row_segments == segment)
    return float(series["time_s"][rows[0]]) if rows.size else float(series["time_s"][-1])


def _voltage_limited_power(problem: Problem, emf: float, resistance: float) -> float | None:
    """The most power the pack delivers with its cells at ``voltage_min`` [W] (None: above the maximum-power point)."""
    r_cells = resistance - problem.pack.interconnect_resistance
    current = (emf - problem.pack.series * problem.cell.voltage_min) / r_cells
    if current <= 0.0 or current > 0.5 * emf / resistance:
        return None
    return float(current * (emf - current * resistance))


def _reason(problem: Problem, stop_reason: str, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    """The physical reason of a limit stop at the last row."""
    emf, resistance = float(series["pack_emf_V"][-1]), float(series["pack_resistance_ohm"][-1])
    cell = problem.cell
    source = f"the pack is a source of {emf:.4g} V behind {resistance:.4g} ohm"
    if stop_reason == "power_limit":
        return (f"{source}, so it can deliver at most E^2/(4R) = {maximum_power(emf, resistance):.4g} W: "
                f"the demand of {segment.value:.4g} W lies beyond the maximum-power point")
    if stop_reason == "voltage_min":
        v_cell = float(series["cell_voltage_V"][-1])
        level = (f"is {v_cell:.4g} V, below voltage_min ({cell.voltage_min:.4g} V),"
                 if v_cell < cell.voltage_min - 1e-6 else f"fell to voltage_min ({cell.voltage_min:.4g} V)")
        text = f"each cell's terminal voltage {level} at {series['current_A'][-1]:.4g} A"
        limited = _voltage_limited_power(problem, emf, resistance)
        if segment.mode == "power" and limited is not None:
            text += (f"; {source}, so with its cells at voltage_min it delivers at most {limited:.4g} W, "
                     f"less than the {segment.value:.4g} W demanded")
        else:
            text += f"; {source}, and the demand's I R drop takes the cells below their limit"
        return text
    if stop_reason == "voltage_max":
        return (f"each cell's terminal voltage rose to voltage_max ({cell.voltage_max:.4g} V) at "
                f"{series['current_A'][-1]:.4g} A: the charge (or regeneration) pushes the cells above their "
                "limit at that state")
    if stop_reason == "temperature_max":
        limit = problem.limits.cell_temperature_max - ZERO_CELSIUS
        return f"the cell temperature reached cell_temperature_max ({limit:.4g} degC): the heat outran the cooling"
    if stop_reason == "soc_limit":
        full = series["soc"][-1] >= 0.5
        return "the state of charge reached 1 (full)" if full else "the state of charge reached 0 (empty)"
    return stop_reason


def explain_stop(problem: Problem, stop_reason: str, message: str, events: Sequence[Mapping[str, Any]],
                 series: Mapping[str, np.ndarray], row_segments: np.ndarray) -> str | None:
    """The ``stop_explanation`` of a summary: a sentence on why the mission stopped; None when it completed.

    Parameters
    ----------
    problem : Problem
        The simulated problem (segments, pack, limits).
    stop_reason : str
        The mission's stop reason (``end_of_profile``, a limit, ``solver_error``).
    message : str
        The solver's message for a failure.
    events : sequence of dict
        The located events (``time_s`` [s], ``event``, ``segment``, ``origin``).
    series : mapping of str to array
        The result's series (``time_s`` [s], ``soc`` [-], ``cell_temperature_degC`` [degC],
        ``current_A`` [A], ``cell_voltage_V`` [V], ``pack_emf_V`` [V], ``pack_resistance_ohm`` [ohm]).
    row_segments : int array
        The mission segment of each row [-].

    Returns
    -------
    str or None
        Which demand could not be met, when (at once, at the start of a segment, or after a
        time in it) and why at that state.
    """
    if stop_reason == "end_of_profile":
        return None
    last = len(series["time_s"]) - 1
    t_stop = float(series["time_s"][last])
    if stop_reason == "solver_error":
        return (f"the solver failed at t = {t_stop:.6g} s ({_state(series, last)}): {message}; the results cover "
                "the mission up to that time only")
    stop = next((e for e in reversed(events) if e["event"] in _STOP_NAMES.get(stop_reason, ())), None)
    index = int(stop["segment"]) if stop is not None else int(row_segments[last])
    segment = problem.segments[index]
    start = _segment_start(series, row_segments, index)
    state, reason = _state(series, last), _reason(problem, stop_reason, segment, series)
    if t_stop == 0.0:
        return (f"stopped at once (t = 0 s) on {stop_reason}: the first demand ({describe_segment(segment)}) "
                f"cannot be met at {state}: {reason}")
    if t_stop - start <= 1e-9 * max(1.0, t_stop):
        return (f"stopped at t = {t_stop:.6g} s on {stop_reason} as {describe_segment(segment)} began: its demand "
                f"cannot be met at {state}: {reason}")
    return (f"stopped at t = {t_stop:.6g} s on {stop_reason}, {t_stop - start:.4g} s into "
            f"{describe_segment(segment)}, at {state}: {reason}")
