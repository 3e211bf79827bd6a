"""Why a mission stopped, in words: which demand could not be met, where, and why at that state.

Owns :func:`explain_stop`, the ``stop_explanation`` of a summary (and
:data:`STOP_EXPLANATIONS`, the reason of each stop reason): the segment
(its dotted key and name), its demand, the time, the state (SoC, cell
temperature) and the physical reason read from the pack as a source ``E``
behind ``R`` at the stop — above the maximum-power point ``E²/(4R)`` (maximum
power transfer, circuit theory), or the most power the cells give at their
voltage limit, ``I_v (E − I_v R)`` with ``I_v = (E − Ns V_min) / R_cells``.

Imports from engine/ and physics/ only; never from output/, fit/, the API or
the command line.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np

from thermoelec.engine.events import EVENT_NAMES, STOP_EVENTS
from thermoelec.engine.problem import Problem
from thermoelec.engine.profile import Segment
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.loads import LOAD_MODES, maximum_power

__all__ = ["STOP_EXPLANATIONS", "describe_segment", "explain_stop"]

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


def _source(series: Mapping[str, np.ndarray]) -> tuple[float, float, str]:
    emf, resistance = float(series["pack_emf_V"][-1]), float(series["pack_resistance_ohm"][-1])
    return emf, resistance, f"the pack is a source of {emf:.4g} V behind {resistance:.4g} ohm"


def _power_limit(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    emf, resistance, source = _source(series)
    return (f"{source}, so it can deliver at most E^2/(4R) = {maximum_power(emf, resistance):.4g} W: "
            f"the demand of {segment.value:.4g} W lies beyond the maximum-power point")


def _voltage_min(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    emf, resistance, source = _source(series)
    cell = problem.cell
    v_cell = float(series["cell_voltage_V"][-1])
    level = (f"is {v_cell:.4g} V, below voltage_min ({cell.voltage_min:.4g} V),"
             if v_cell < cell.voltage_min - 1e-6 else f"fell to voltage_min ({cell.voltage_min:.4g} V)")
    text = f"each cell's terminal voltage {level} at {series['current_A'][-1]:.4g} A"
    limited = _voltage_limited_power(problem, emf, resistance)
    if segment.mode == "power" and limited is not None:
        return text + (f"; {source}, so with its cells at voltage_min it delivers at most {limited:.4g} W, "
                       f"less than the {segment.value:.4g} W demanded")
    return text + f"; {source}, and the demand's I R drop takes the cells below their limit"


def _voltage_max(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    return (f"each cell's terminal voltage rose to voltage_max ({problem.cell.voltage_max:.4g} V) at "
            f"{series['current_A'][-1]:.4g} A: the charge (or regeneration) pushes the cells above their limit at "
            "that state")


def _temperature_max(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    limit = problem.limits.cell_temperature_max - ZERO_CELSIUS
    return f"the cell temperature reached cell_temperature_max ({limit:.4g} degC): the heat outran the cooling"


def _soc_limit(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    full = series["soc"][-1] >= 0.5
    return "the state of charge reached 1 (full)" if full else "the state of charge reached 0 (empty)"


def _at_stop(problem: Problem, series: Mapping[str, np.ndarray], table: Any) -> str:
    """A limit table's value at the stop (at the SoC and the hottest cell's temperature)."""
    if table.is_constant:
        return f"{table.values[0]:.4g}"
    soc, temperature = float(series["soc"][-1]), float(series["cell_temperature_degC"][-1]) + ZERO_CELSIUS
    return f"{table(soc, temperature):.4g} (its table at SoC {soc:.3f}, {temperature - ZERO_CELSIUS:.1f} degC)"


def _cell_current(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray], direction: str) -> str:
    table = getattr(problem.limits, f"{direction}_current_max")
    cell = abs(float(series["current_A"][-1])) / problem.pack.parallel
    which = "the cell nearest its limit (first_limit_cell)" if problem.resolved is not None else "each cell"
    return (f"{which} reached {direction}_current_max, {_at_stop(problem, series, table)} A (a cell's mean share "
            f"is {cell:.4g} A): the demand asks more {direction} current than the cells are specified for there")


def _pack_power(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray], direction: str) -> str:
    table = getattr(problem.limits, f"{direction}_power_max")
    power = abs(float(series["power_W"][-1]))
    return (f"the {'power to the load' if direction == 'discharge' else 'charging power'} of {power:.4g} W "
            f"reached {direction}_power_max, {_at_stop(problem, series, table)} W")


def _discharge_temperature(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    limit = problem.limits.discharge_temperature_min - ZERO_CELSIUS
    coldest = series.get("cell_temperature_min_degC", series["cell_temperature_degC"])
    return (f"the coldest cell was at {float(coldest[-1]):.4g} degC, at or below discharge_temperature_min "
            f"({limit:.4g} degC), as the pack was to discharge: warm it first (a soak, a heater)")


def _charge_temperature(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    limit = problem.limits.charge_temperature_max - ZERO_CELSIUS
    return (f"the hottest cell reached charge_temperature_max ({limit:.4g} degC) while the pack charged: let it "
            "cool before charging, or charge slower")


def _sink_temperature(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    limit = problem.limits.sink_temperature_max - ZERO_CELSIUS
    return f"the sink (housing) reached sink_temperature_max ({limit:.4g} degC): the heat outran its cooling"


def _nothing_deliverable(problem: Problem, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    derating = problem.derating
    current = float(series["current_A"][-1])
    cutoff = derating.cutoff_current * problem.pack.parallel
    asked = float(series.get("current_demanded_A", series["current_A"])[-1])
    held = " with the cells held at voltage_min by the voltage limiter" if derating.voltage_limiter else ""
    return (f"under the BMS's derating{held} the pack could deliver only {current:.4g} A, at or below its cutoff "
            f"({cutoff:.4g} A), while {asked:.4g} A was demanded: nothing deliverable at SoC "
            f"{float(series['soc'][-1]):.3f} (the charge left is out of reach at this demand and temperature)")


#: The physical reason of each limit stop, by stop reason: ``reason(problem, segment, series) -> str`` at the last row.
STOP_EXPLANATIONS: dict[str, Callable[[Problem, Segment, Mapping[str, np.ndarray]], str]] = {
    "voltage_min": _voltage_min,
    "voltage_max": _voltage_max,
    "power_limit": _power_limit,
    "temperature_max": _temperature_max,
    "soc_limit": _soc_limit,
    "discharge_current_max": lambda pb, seg, s: _cell_current(pb, seg, s, "discharge"),
    "charge_current_max": lambda pb, seg, s: _cell_current(pb, seg, s, "charge"),
    "discharge_power_max": lambda pb, seg, s: _pack_power(pb, seg, s, "discharge"),
    "charge_power_max": lambda pb, seg, s: _pack_power(pb, seg, s, "charge"),
    "discharge_temperature_min": _discharge_temperature,
    "charge_temperature_max": _charge_temperature,
    "sink_temperature_max": _sink_temperature,
    "nothing_deliverable": _nothing_deliverable,
}


def _reason(problem: Problem, stop_reason: str, segment: Segment, series: Mapping[str, np.ndarray]) -> str:
    """The physical reason of a limit stop at the last row (:data:`STOP_EXPLANATIONS`)."""
    explain = STOP_EXPLANATIONS.get(stop_reason)
    return explain(problem, segment, series) if explain is not None else stop_reason


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
