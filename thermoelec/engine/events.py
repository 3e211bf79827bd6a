"""The events of a mission: the root functions the integrators locate, and what each one does.

Every limit, switch and end condition is a root function ``g_k`` of the state,
positive while all is well (:func:`thermoelec.engine.model.roots_from` computes
them); the integrator locates where one reaches zero. :data:`EVENTS` is the one
list of them: its order gives the kernel codes (``EV_*``), and each entry says
how close to zero counts as fired (its scale), which event wins when several
fire at once (its priority) and what the mission does then (its action). Both
drivers (:mod:`thermoelec.engine.driver` for CVODE, :mod:`thermoelec.engine.batch`
for sweeps) act on :data:`EVENT_ACTION`; reports and figures take the names and
the stop reasons from here.

This module is the bottom of the engine: it imports nothing of the engine (nor of
physics), so the layout, the kernels, the mission plan and both drivers can all read it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = [
    "ACTION_END_SEGMENT",
    "ACTION_HOLD",
    "ACTION_NEXT_PHASE",
    "ACTION_STOP",
    "ACTION_TOGGLE",
    "CCCV_CAP_EVENT",
    "CONTROL_EVENTS",
    "EVENTS",
    "EVENT_ACTION",
    "EVENT_HOLD",
    "EVENT_NAMES",
    "EVENT_PRIORITY",
    "EVENT_RANK",
    "EVENT_SCALES",
    "HOLD_AT_MAXIMUM",
    "HOLD_AT_MINIMUM",
    "HOLD_EVENTS",
    "HOLD_FREE",
    "LIMIT_EVENTS",
    "N_EVENTS",
    "ROOT_TOLERANCE",
    "STOP_EVENTS",
    "STOP_REASONS",
    "Event",
]

#: What an event does to the phase it fires in (kernel codes).
ACTION_STOP, ACTION_NEXT_PHASE, ACTION_END_SEGMENT, ACTION_TOGGLE, ACTION_HOLD = 0, 1, 2, 3, 4
#: The hold states of a phase under the voltage limiter (``layout.H_HOLD``): free, cells held at
#: voltage_min (discharge), cells held at voltage_max (charge).
HOLD_FREE, HOLD_AT_MINIMUM, HOLD_AT_MAXIMUM = 0, 1, -1


@dataclass(frozen=True)
class Event:
    """One root function of the engine.

    Attributes
    ----------
    name : str
        Its name in the ``events`` of a summary.
    scale : float
        Typical size of the root function (V, V², K, -, A), to compare how close to zero functions are.
    action : int
        ``ACTION_STOP`` ends the mission, ``ACTION_NEXT_PHASE`` starts the segment's next phase
        (CC -> CV), ``ACTION_END_SEGMENT`` ends the segment, ``ACTION_TOGGLE`` switches a
        thermostat and the phase goes on, ``ACTION_HOLD`` puts the phase in the hold state
        ``hold`` (the voltage limiter) and the phase goes on.
    stop_reason : str or None
        The ``stop_reason`` a stop reports.
    description : str
        When the root function reaches zero.
    hold : int
        The hold state an ``ACTION_HOLD`` event switches to (``HOLD_*``); 0 for the others.
    """

    name: str
    scale: float
    action: int
    stop_reason: str | None
    description: str
    hold: int = HOLD_FREE


#: The root functions in kernel-code order.
EVENTS: tuple[Event, ...] = (
    Event("voltage_min", 1.0, ACTION_STOP, "voltage_min", "a cell's terminal voltage falls to voltage_min [V]"),
    Event("voltage_max", 1.0, ACTION_STOP, "voltage_max", "a cell's terminal voltage rises to voltage_max [V]"),
    Event("power_limit", 100.0, ACTION_STOP, "power_limit",
          "the power demand reaches the maximum-power point E²/(4R) (E² - 4 R P = 0) [V²]"),
    Event("temperature_max", 1.0, ACTION_STOP, "temperature_max",
          "the cell temperature rises to cell_temperature_max [K]"),
    Event("soc_empty", 1.0, ACTION_STOP, "soc_limit", "the state of charge falls to 0 [-]"),
    Event("soc_full", 1.0, ACTION_STOP, "soc_limit", "the state of charge rises to 1 [-]"),
    Event("cv_switch", 1.0, ACTION_NEXT_PHASE, None, "a CC-CV charge reaches its CV voltage [V]"),
    Event("cv_cutoff", 1.0, ACTION_END_SEGMENT, None, "a CV phase's current falls to its cutoff [A]"),
    Event("end_voltage_below", 1.0, ACTION_END_SEGMENT, None,
          "the pack voltage falls to a segment's voltage_below [V]"),
    Event("end_voltage_above", 1.0, ACTION_END_SEGMENT, None,
          "the pack voltage rises to a segment's voltage_above [V]"),
    Event("end_soc_below", 1.0, ACTION_END_SEGMENT, None, "the SoC falls to a segment's soc_below [-]"),
    Event("end_soc_above", 1.0, ACTION_END_SEGMENT, None, "the SoC rises to a segment's soc_above [-]"),
    Event("fan_switch", 1.0, ACTION_TOGGLE, None, "the cell temperature reaches the fan's next threshold [K]"),
    Event("heater_switch", 1.0, ACTION_TOGGLE, None, "the cell temperature reaches the heater's next threshold [K]"),
    Event("pump_switch", 1.0, ACTION_TOGGLE, None, "the cell temperature reaches the pump's next threshold [K]"),
    # the limits of a pack specification ([limits]): each stops the mission with its own reason
    Event("discharge_current_max", 1.0, ACTION_STOP, "discharge_current_max",
          "a cell's discharge current rises to its limit at its temperature and SoC [A]"),
    Event("charge_current_max", 1.0, ACTION_STOP, "charge_current_max",
          "a cell's charge current rises to its limit at its temperature and SoC [A]"),
    Event("discharge_power_max", 100.0, ACTION_STOP, "discharge_power_max",
          "the power to the load rises to the pack's discharge power limit [W]"),
    Event("charge_power_max", 100.0, ACTION_STOP, "charge_power_max",
          "the power into the terminals rises to the pack's charge power limit [W]"),
    Event("discharge_temperature_min", 1.0, ACTION_STOP, "discharge_temperature_min",
          "the coldest cell is at or below discharge_temperature_min while the pack discharges [K]"),
    Event("charge_temperature_max", 1.0, ACTION_STOP, "charge_temperature_max",
          "the hottest cell is at or above charge_temperature_max while the pack charges [K]"),
    Event("sink_temperature_max", 1.0, ACTION_STOP, "sink_temperature_max",
          "the sink (housing) node rises to sink_temperature_max [K]"),
    # the BMS's voltage limiter ([derating]): a cell at its voltage limit is held there, the phase goes on
    Event("hold_voltage_min", 1.0, ACTION_HOLD, None,
          "a cell falls to voltage_min: the voltage limiter holds it there (less current) [V]",
          HOLD_AT_MINIMUM),
    Event("hold_voltage_max", 1.0, ACTION_HOLD, None,
          "a cell rises to voltage_max: the voltage limiter holds it there (less charge current) [V]",
          HOLD_AT_MAXIMUM),
    Event("hold_release", 1.0, ACTION_HOLD, None,
          "the demand falls below what the held cells allow: the voltage limiter lets go [A]", HOLD_FREE),
    Event("nothing_deliverable", 1.0, ACTION_STOP, "nothing_deliverable",
          "under the BMS's derating the pack may deliver no more than its cutoff current, less than demanded [A]"),
)
N_EVENTS = len(EVENTS)
_CODE = {event.name: code for code, event in enumerate(EVENTS)}

EV_VOLTAGE_MIN = _CODE["voltage_min"]
EV_VOLTAGE_MAX = _CODE["voltage_max"]
EV_POWER = _CODE["power_limit"]
EV_TEMPERATURE = _CODE["temperature_max"]
EV_SOC_EMPTY = _CODE["soc_empty"]
EV_SOC_FULL = _CODE["soc_full"]
EV_CV_SWITCH = _CODE["cv_switch"]
EV_CV_CUTOFF = _CODE["cv_cutoff"]
EV_END_VOLTAGE_BELOW = _CODE["end_voltage_below"]
EV_END_VOLTAGE_ABOVE = _CODE["end_voltage_above"]
EV_END_SOC_BELOW = _CODE["end_soc_below"]
EV_END_SOC_ABOVE = _CODE["end_soc_above"]
EV_FAN = _CODE["fan_switch"]
EV_HEATER = _CODE["heater_switch"]
EV_PUMP = _CODE["pump_switch"]
EV_DISCHARGE_CURRENT = _CODE["discharge_current_max"]
EV_CHARGE_CURRENT = _CODE["charge_current_max"]
EV_DISCHARGE_POWER = _CODE["discharge_power_max"]
EV_CHARGE_POWER = _CODE["charge_power_max"]
EV_DISCHARGE_TEMPERATURE = _CODE["discharge_temperature_min"]
EV_CHARGE_TEMPERATURE = _CODE["charge_temperature_max"]
EV_SINK_TEMPERATURE = _CODE["sink_temperature_max"]
EV_HOLD_MIN = _CODE["hold_voltage_min"]
EV_HOLD_MAX = _CODE["hold_voltage_max"]
EV_HOLD_RELEASE = _CODE["hold_release"]
EV_NOTHING_DELIVERABLE = _CODE["nothing_deliverable"]

EVENT_NAMES: tuple[str, ...] = tuple(event.name for event in EVENTS)
EVENT_SCALES: tuple[float, ...] = tuple(event.scale for event in EVENTS)
#: What each event does, by code (read by both drivers' kernels).
EVENT_ACTION = np.array([event.action for event in EVENTS], dtype=np.int64)
#: The hold state each ``ACTION_HOLD`` event switches the phase to, by code (0 for the others).
EVENT_HOLD = np.array([event.hold for event in EVENTS], dtype=np.int64)
#: The events of the voltage limiter, in code order: hold at voltage_min, at voltage_max, release.
HOLD_EVENTS: tuple[int, ...] = (EV_HOLD_MIN, EV_HOLD_MAX, EV_HOLD_RELEASE)
#: The limits of a pack specification beyond the cell's voltage and temperature: event code by the
#: ``[limits]`` key that sets it (the stop reason is the key).
LIMIT_EVENTS: dict[str, int] = {EVENTS[code].name: code for code in (
    EV_DISCHARGE_CURRENT, EV_CHARGE_CURRENT, EV_DISCHARGE_POWER, EV_CHARGE_POWER, EV_DISCHARGE_TEMPERATURE,
    EV_CHARGE_TEMPERATURE, EV_SINK_TEMPERATURE)}
#: Thermostat events in the order of their switches (fan, heater, pump).
CONTROL_EVENTS: tuple[int, ...] = tuple(code for code, event in enumerate(EVENTS) if event.action == ACTION_TOGGLE)
#: Stop events and the stop reason each reports.
STOP_EVENTS: dict[int, str] = {code: event.stop_reason for code, event in enumerate(EVENTS)
                               if event.action == ACTION_STOP and event.stop_reason is not None}
#: Every stop reason a mission can end with: the profile ran out, a stop event, or the solver failed.
STOP_REASONS: tuple[str, ...] = ("end_of_profile", *dict.fromkeys(STOP_EVENTS.values()), "solver_error")
#: Reported when a CC-CV segment without a duration reaches its cap (:func:`thermoelec.engine.mission.cccv_cap`)
#: before its cutoff current: a note of the driver, not a root function.
CCCV_CAP_EVENT = "cccv_cap"
#: A root function within this many of its scales of zero (or below) counts as fired.
ROOT_TOLERANCE = 1e-9
#: Which event wins when several fire at once (first wins): the power limit (no solution past it),
#: the other stops, then switches and ends, then the voltage limiter, then the thermostats (which end nothing).
EVENT_PRIORITY: tuple[int, ...] = (
    EV_POWER, *(k for k in range(N_EVENTS) if k != EV_POWER and EVENTS[k].action == ACTION_STOP),
    *(k for k in range(N_EVENTS) if EVENTS[k].action in (ACTION_NEXT_PHASE, ACTION_END_SEGMENT)),
    *(k for k in range(N_EVENTS) if EVENTS[k].action == ACTION_HOLD),
    *(k for k in range(N_EVENTS) if EVENTS[k].action == ACTION_TOGGLE))
#: Each event's place in :data:`EVENT_PRIORITY`, by code.
EVENT_RANK: tuple[int, ...] = tuple(EVENT_PRIORITY.index(k) for k in range(N_EVENTS))
