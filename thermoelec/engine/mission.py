"""The mission, once: a problem's segments as a table of phases that both drivers walk.

A mission is a list of segments; a segment is one phase, or two for CC-CV (a
constant-current phase, then a constant-voltage phase). Each phase boundary is
a discontinuity of the right-hand side, so the drivers stop exactly there and
restart. :func:`plan_mission` turns a :class:`~thermoelec.engine.problem.Problem`
into a :class:`MissionPlan`: per segment its phases (load mode, demand, the set-up
of the root functions), its duration and ambient. What an event does is the
action of :data:`thermoelec.engine.events.EVENT_ACTION`; :func:`configure_phase`
writes a phase into the parameter vector. The CVODE driver
(:mod:`thermoelec.engine.driver`) and the batched solver (:mod:`thermoelec.engine.batch`)
both walk the same plan with the same writer, so a mission means the same
thing to both. Soaks (:func:`soak_problem`) run first, as their own problem;
the mission then starts at t = 0 from their end state with the integrals reset
(:func:`start_after_soak`). Thermostats start on when the cell temperature is
already past their on threshold (:func:`initial_controls`).

This module imports nothing of the engine but the events, the layout, the problem
and the profile (and physics' load modes); it knows no kernel, no back end and no
driver, and must not import them: only the driver and the batched solver walk the plan.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from thermoelec import jit
from thermoelec.engine.events import (
    CONTROL_EVENTS,
    EV_CHARGE_CURRENT,
    EV_CHARGE_POWER,
    EV_CHARGE_TEMPERATURE,
    EV_CV_CUTOFF,
    EV_CV_SWITCH,
    EV_DISCHARGE_CURRENT,
    EV_DISCHARGE_POWER,
    EV_DISCHARGE_TEMPERATURE,
    EV_END_SOC_ABOVE,
    EV_END_SOC_BELOW,
    EV_END_VOLTAGE_ABOVE,
    EV_END_VOLTAGE_BELOW,
    EV_FAN,
    EV_HEATER,
    EV_HOLD_MAX,
    EV_HOLD_MIN,
    EV_HOLD_RELEASE,
    EV_NOTHING_DELIVERABLE,
    EV_POWER,
    EV_PUMP,
    EV_SINK_TEMPERATURE,
    EV_SOC_EMPTY,
    EV_SOC_FULL,
    EV_TEMPERATURE,
    EV_VOLTAGE_MAX,
    EV_VOLTAGE_MIN,
    N_EVENTS,
)
from thermoelec.engine.layout import (
    CONTROL_FLAG_OF,
    H_ACTIVE,
    H_AMBIENT,
    H_AMBIENT_TABLE,
    H_HOLD,
    H_MODE,
    H_RAMP_CURRENT,
    H_RAMP_TIME,
    H_THRESHOLD,
    H_VALUE,
    quadrature_index,
)
from thermoelec.engine.problem import Problem
from thermoelec.engine.profile import Segment
from thermoelec.physics.loads import LOAD_MODES, MODE_CURRENT, MODE_VOLTAGE

__all__ = ["IMPOSED_VOLTAGE_SLACK", "MIN_PHASE", "START_PROBE", "MissionPlan", "cccv_cap", "configure_phase",
           "initial_controls", "plan_mission", "soak_problem", "start_after_soak", "thermostat_switches"]

_jit = jit.njit(cache=True, nogil=True, error_model="numpy")

#: A phase shorter than this is skipped [s] (a root that lands on a segment end).
MIN_PHASE = 1e-12
#: Time ahead [s] at which a root function's direction is probed at a phase start.
START_PROBE = 1e-3
#: Events one instant may fire before the driver gives up on the mission: switches that undo each other
#: without time passing (a thermostat on its own threshold, a limiter held and let go) would never end.
MAX_EVENTS_AT_ONE_INSTANT = 100
#: Relative slack on the cell voltage limits when the terminal voltage is imposed,
#: so that a CV set point exactly at Ns x voltage_max is not taken as a violation.
IMPOSED_VOLTAGE_SLACK = 1e-9
#: Phase kinds: a segment's demand, the CC and the CV phase of a CC-CV charge.
KIND_DEMAND, KIND_CC, KIND_CV = 0, 1, 2
#: Phases a segment can have (CC-CV has two).
MAX_PHASES = 2

_BY_CODE = {mode.code: mode for mode in LOAD_MODES.values()}


@dataclass(frozen=True)
class MissionPlan:
    """A mission's segments as phases, in arrays both drivers read (``n`` segments).

    Attributes
    ----------
    n_phases : int array, shape (n,)
        Phases of each segment: 1, or 2 for CC-CV.
    modes : float array, shape (n, 2)
        Load-mode code of each phase (:data:`thermoelec.physics.loads.LOAD_MODES`).
    values : float array, shape (n, 2)
        Demand of each phase in its mode's unit [A, W, Ω, V].
    setups : float array, shape (k, 2 N_EVENTS)
        The distinct root-function set-ups: activity flags, then thresholds [V, K, A, -].
    setup_index : int array, shape (n, 2)
        The set-up of each phase.
    durations : float array, shape (n,)
        Segment lengths [s] (a CC-CV charge without a duration: :func:`cccv_cap`).
    ambients : float array, shape (n,)
        A segment's own ambient [K] (a CSV row, a soak), NaN for the mission's.
    capped : bool array, shape (n,)
        The duration is the CC-CV cap, not the scenario's.
    origins : tuple of str
        Where each segment came from, for events and messages.
    """

    n_phases: np.ndarray
    modes: np.ndarray
    values: np.ndarray
    setups: np.ndarray
    setup_index: np.ndarray
    durations: np.ndarray
    ambients: np.ndarray
    capped: np.ndarray
    origins: tuple[str, ...]

    @property
    def n_segments(self) -> int:
        """Number of segments of the mission [-]."""
        return len(self.durations)


def _phases_of(segment: Segment) -> list[tuple[int, float, int]]:
    """``(mode code, demand, kind)`` of each phase of a segment."""
    if segment.mode == "cccv":
        return [(MODE_CURRENT, segment.value, KIND_CC), (MODE_VOLTAGE, segment.cv_voltage, KIND_CV)]
    if segment.mode == "rest":
        return [(MODE_CURRENT, 0.0, KIND_DEMAND)]
    return [(LOAD_MODES[segment.mode].code, segment.value, KIND_DEMAND)]


def event_setup(problem: Problem, segment: Segment, mode: int, value: float, kind: int) -> np.ndarray:
    """Activity flags and thresholds of the root functions in one phase.

    Parameters
    ----------
    problem : Problem
        Limits [V per cell, K] and series count [-] of the scenario.
    segment : Segment
        The segment the phase belongs to: its end conditions [V, -] and CC-CV set
        points [V, A].
    mode : int
        Load-mode code of the phase (:data:`thermoelec.physics.loads.LOAD_MODES`) [-].
    value : float
        Its demand [A, W, Ω or V].
    kind : int
        ``KIND_DEMAND``, ``KIND_CC`` or ``KIND_CV`` [-].

    Returns
    -------
    float64 array, shape (2 N_EVENTS,)
        Flags (1 active) [-], then thresholds [V, K, A, -], in
        :data:`~thermoelec.engine.events.EVENTS` order.
    """
    cell, ns = problem.cell, problem.pack.series
    active = np.zeros(N_EVENTS)
    thresholds = np.zeros(N_EVENTS)
    load = _BY_CODE[mode]
    # With the terminal voltage imposed, the cell voltage is (V + I R_ic) / Ns: it
    # stays on the safe side of V / Ns in the direction of the current, so the
    # voltage limits are checked once at the phase start (model.start_check).
    active[EV_VOLTAGE_MIN] = not load.imposes_voltage
    active[EV_VOLTAGE_MAX] = not load.imposes_voltage
    if kind == KIND_CC and segment.cv_voltage <= ns * cell.voltage_max:
        active[EV_VOLTAGE_MAX] = False  # the CV switch comes first (at or before the cell limit)
    thresholds[EV_VOLTAGE_MIN], thresholds[EV_VOLTAGE_MAX] = cell.voltage_min, cell.voltage_max
    _limit_setup(problem, load, value, active, thresholds)
    active[EV_POWER] = load.power_limited and value > 0.0
    active[EV_TEMPERATURE] = True
    thresholds[EV_TEMPERATURE] = problem.limits.cell_temperature_max
    active[EV_SOC_EMPTY] = active[EV_SOC_FULL] = True
    thresholds[EV_SOC_EMPTY], thresholds[EV_SOC_FULL] = 0.0, 1.0
    if kind == KIND_CC:
        active[EV_CV_SWITCH] = True
        thresholds[EV_CV_SWITCH] = segment.cv_voltage
    if kind == KIND_CV:
        active[EV_CV_CUTOFF] = True
        thresholds[EV_CV_CUTOFF] = segment.cutoff_current
    for event, threshold in ((EV_END_VOLTAGE_BELOW, segment.voltage_below),
                             (EV_END_VOLTAGE_ABOVE, segment.voltage_above),
                             (EV_END_SOC_BELOW, segment.soc_below),
                             (EV_END_SOC_ABOVE, segment.soc_above)):
        if threshold is not None:
            active[event] = True
            thresholds[event] = threshold
    return np.concatenate([active, thresholds])


def _limit_setup(problem: Problem, load, value: float, active: np.ndarray, thresholds: np.ndarray) -> None:
    """The root functions of the pack specification's limits and of the BMS's voltage limiter in a phase.

    A phase discharges when its demand is positive (a load resistance always), charges
    when it is negative or a charger holds the terminal voltage: the temperature limits of
    each direction act in its phases, the current and power limits wherever the current can
    flow that way. The voltage limiter replaces the stops at the voltage limits by its holds
    (not where the terminal voltage is imposed).
    """
    limits, derating = problem.limits, problem.derating
    discharging = value > 0.0 and not load.imposes_voltage
    charging = value < 0.0 or load.imposes_voltage
    for event, table, direction in ((EV_DISCHARGE_CURRENT, limits.discharge_current_max, not charging),
                                    (EV_CHARGE_CURRENT, limits.charge_current_max, not discharging),
                                    (EV_DISCHARGE_POWER, limits.discharge_power_max, not charging),
                                    (EV_CHARGE_POWER, limits.charge_power_max, not discharging)):
        active[event] = table is not None and direction
    for event, threshold, direction in ((EV_DISCHARGE_TEMPERATURE, limits.discharge_temperature_min, discharging),
                                        (EV_CHARGE_TEMPERATURE, limits.charge_temperature_max, charging),
                                        (EV_SINK_TEMPERATURE, limits.sink_temperature_max, True)):
        if threshold is not None and direction:
            active[event], thresholds[event] = True, threshold
    if derating is None or load.imposes_voltage:
        return
    active[EV_NOTHING_DELIVERABLE] = True
    if derating.voltage_limiter:  # hold the cells at their limits instead of stopping there
        active[EV_HOLD_MIN], active[EV_HOLD_MAX] = active[EV_VOLTAGE_MIN], active[EV_VOLTAGE_MAX]
        active[EV_HOLD_RELEASE] = True
        thresholds[EV_HOLD_MIN], thresholds[EV_HOLD_MAX] = thresholds[EV_VOLTAGE_MIN], thresholds[EV_VOLTAGE_MAX]
        active[EV_VOLTAGE_MIN] = active[EV_VOLTAGE_MAX] = False


def cccv_cap(problem: Problem, segment: Segment) -> float:
    """Duration cap of a CC-CV segment without one: ten full charges at its CC rate.

    A CC-CV segment normally ends on its cutoff current; the cap only makes the
    phase finite (the CVODE driver reports a ``cccv_cap`` event should it be reached).

    Parameters
    ----------
    problem : Problem
        The scenario: the cell capacity [C] and the cells in parallel [-].
    segment : Segment
        The CC-CV segment; its ``value`` is the pack's charge current [A].

    Returns
    -------
    float
        ``10 Q / |I_cell|`` [s].
    """
    per_cell = abs(segment.value) / problem.pack.parallel
    return 10.0 * problem.cell.capacity / max(per_cell, 1e-12)


def plan_mission(problem: Problem) -> MissionPlan:
    """The phases of every segment of ``problem.segments``, with their root-function set-ups.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units: its segments, limits and pack layout [SI].

    Returns
    -------
    MissionPlan
        Per segment its phases' modes [-] and demands [A, W, Ω or V], durations [s],
        ambients [K] and root-function set-ups (flags [-], thresholds [V, K, A, -]).
        Identical set-ups are stored once (a 1 Hz profile has thousands of phases
        and a handful of set-ups).
    """
    kinds: dict[tuple, int] = {}
    blocks = []
    n_seg = len(problem.segments)
    n_phases = np.ones(n_seg, dtype=np.int64)
    modes, values = np.zeros((n_seg, MAX_PHASES)), np.zeros((n_seg, MAX_PHASES))
    index = np.zeros((n_seg, MAX_PHASES), dtype=np.int64)
    durations, ambients = np.empty(n_seg), np.empty(n_seg)
    capped = np.zeros(n_seg, dtype=np.bool_)
    for s, seg in enumerate(problem.segments):
        phases = _phases_of(seg)
        n_phases[s] = len(phases)
        for j, (mode, value, kind) in enumerate(phases):
            # what event_setup reads of the segment and the phase
            key = (kind, mode, np.sign(value), seg.cv_voltage, seg.cutoff_current, seg.voltage_below,
                   seg.voltage_above, seg.soc_below, seg.soc_above)
            if key not in kinds:
                kinds[key] = len(blocks)
                blocks.append(event_setup(problem, seg, mode, value, kind))
            modes[s, j], values[s, j], index[s, j] = mode, value, kinds[key]
        capped[s] = not math.isfinite(seg.duration)
        durations[s] = cccv_cap(problem, seg) if capped[s] else seg.duration
        ambients[s] = np.nan if seg.ambient_temperature is None else seg.ambient_temperature
    return MissionPlan(n_phases, modes, values, np.array(blocks).reshape(len(blocks), 2 * N_EVENTS), index,
                       durations, ambients, capped, tuple(seg.origin for seg in problem.segments))


def thermostat_switches(problem: Problem) -> np.ndarray:
    """The fan, heater and pump thermostats as rows ``(present, on_at, off_at)``.

    Parameters
    ----------
    problem : Problem
        The scenario; its thermal network's fan, heater and pump switches [K].

    Returns
    -------
    float64 array, shape (3, 3)
        One row per thermostat in the order of
        :data:`thermoelec.engine.events.CONTROL_EVENTS`: present (1 or 0) [-], the on
        and off thresholds of the cell temperature [K]; an absent one is all zeros.
    """
    th = problem.thermal
    found = {EV_FAN: th.fan.switch if th.fan else None, EV_HEATER: th.heater.switch if th.heater else None,
             EV_PUMP: th.pump}
    rows = np.zeros((len(CONTROL_EVENTS), 3))
    for c, event in enumerate(CONTROL_EVENTS):
        switch = found[event]
        if switch is not None:
            rows[c] = (1.0, switch.on_at, switch.off_at)
    return rows


def initial_controls(switches: np.ndarray, cell_temperature: float, coldest: float | None = None) -> np.ndarray:
    """Whether each thermostat starts on: already past its on threshold at the cell temperature it senses.

    A heating switch (``on_at < off_at``) is on at or below its on threshold, a
    cooling one at or above it (:meth:`thermoelec.physics.thermal.Switch.initially_on`).
    In a resolved pack a cooling switch senses the hottest cell, a heating one the
    coldest (as the root functions do, :func:`thermoelec.engine.model.roots_from`).

    Parameters
    ----------
    switches : float64 array, shape (3, 3)
        Rows ``(present, on_at, off_at)`` of :func:`thermostat_switches` [-, K, K].
    cell_temperature : float
        Cell temperature at the start (of the hottest cell) [K].
    coldest : float, optional
        Temperature of the coldest cell at the start (default ``cell_temperature``) [K].

    Returns
    -------
    bool array, shape (3,)
        True for each thermostat that starts on [-]; an absent one is False.
    """
    coldest = cell_temperature if coldest is None else coldest
    on = np.zeros(len(switches), dtype=np.bool_)
    for c, (present, on_at, off_at) in enumerate(switches):
        if present:
            on[c] = coldest <= on_at if on_at < off_at else cell_temperature >= on_at
    return on


@jit.ahead_of_time("f8(f8[::1], i8, i8, f8[:, ::1], f8[:, ::1], f8[::1], f8[:, ::1], i8[:, ::1], f8, f8, "
                   "f8[:, ::1], b1[::1], f8, f8, f8, i8)")
@_jit
def configure_phase(p, seg, phase, modes, values, ambients, setups, setup_index, default_ambient, default_table,
                    switches, controls, hold, ramp_current, time, kept_row):
    """Write one phase into the parameter vector ``p``: demand, ambient, root functions, thermostats, hold, ramp.

    The one writer of the per-phase slots, for both drivers. A segment with its
    own ambient (a CSV row, a soak) holds it and switches the ambient profile
    off; the others take ``default_ambient`` and the profile block at
    ``default_table`` (0: none). A present thermostat's root function waits for
    its off threshold while it is on, for its on threshold while it is off. The
    voltage limiter's hold state carries over from the phase before where the
    phase has the limiter (else the phase is free), and the ramp starts from the
    current delivered just before (``ramp_current`` at ``time``): re-anchored at a
    switch within a phase, the ramp goes on as it was.

    Parameters
    ----------
    p : float64 array
        The parameter vector (:mod:`thermoelec.engine.layout`), written in place [SI, unit per slot].
    seg : int
        Index of the segment in the plan [-].
    phase : int
        Its phase: 0, or 1 for the CV phase of a CC-CV charge [-].
    modes : float64 array, shape (n, 2)
        Load-mode code of each phase, :attr:`MissionPlan.modes` [-].
    values : float64 array, shape (n, 2)
        Demand of each phase, :attr:`MissionPlan.values` [A, W, Ω or V].
    ambients : float64 array, shape (n,)
        A segment's own ambient, NaN for the mission's, :attr:`MissionPlan.ambients` [K].
    setups : float64 array, shape (k, 2 N_EVENTS)
        Root-function set-ups, :attr:`MissionPlan.setups`: flags [-], then thresholds [V, K, A, -].
    setup_index : int64 array, shape (n, 2)
        The set-up of each phase, :attr:`MissionPlan.setup_index` [-].
    default_ambient : float
        The mission's ambient [K].
    default_table : float
        Offset of the ambient-profile block in ``p``, 0 for none [-].
    switches : float64 array, shape (3, 3)
        Rows ``(present, on_at, off_at)`` of :func:`thermostat_switches` [-, K, K].
    controls : bool array, shape (3,)
        Which thermostats are on (read, not changed) [-].
    hold : float
        The voltage limiter's hold state so far (``events.HOLD_*``) [-].
    ramp_current : float
        The pack current delivered just before the phase (re)starts [A].
    time : float
        Time of the phase (re)start [s].
    kept_row : int
        The row of ``setups`` that ``p``'s root-function slots hold unchanged since it was
        written, -1 for none [-]: its copy is skipped (a plain 1 Hz mission's segments
        mostly share one row; the copy was a tenth of a step of the batched solver).

    Returns
    -------
    float
        The hold state of the phase: ``hold``, or free where the phase has no limiter [-].
    """
    p[H_MODE] = modes[seg, phase]
    p[H_VALUE] = values[seg, phase]
    own = not np.isnan(ambients[seg])
    p[H_AMBIENT] = ambients[seg] if own else default_ambient
    p[H_AMBIENT_TABLE] = 0.0 if own else default_table
    row = setup_index[seg, phase]
    if row != kept_row:
        for e in range(H_THRESHOLD + N_EVENTS - H_ACTIVE):  # element by element: a slice copy costs ~4x as much
            p[H_ACTIVE + e] = setups[row, e]
    for c in range(switches.shape[0]):
        if switches[c, 0] != 0.0:
            event = EV_FAN + c
            p[CONTROL_FLAG_OF[c]] = 1.0 if controls[c] else 0.0
            p[H_ACTIVE + event] = 1.0
            p[H_THRESHOLD + event] = switches[c, 2] if controls[c] else switches[c, 1]
    if p[H_ACTIVE + EV_HOLD_RELEASE] == 0.0:
        hold = 0.0
    p[H_HOLD] = hold
    p[H_RAMP_CURRENT] = ramp_current
    p[H_RAMP_TIME] = time
    return hold


def soak_problem(problem: Problem) -> Problem | None:
    """The soak segments of ``problem`` as a problem of their own.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].

    Returns
    -------
    Problem or None
        The same scenario with the soak as its segments and no soak [SI]; None
        without a soak.
    """
    if not problem.soak:
        return None
    return replace(problem, segments=problem.soak, soak=())


def start_after_soak(state: np.ndarray, n_rc: int, n_cells: int = 1) -> np.ndarray:
    """The mission's initial state from a soak's end state: the same states, the integrals reset.

    Parameters
    ----------
    state : float64 array, shape (n_states,)
        State at the end of the soak (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    float64 array, shape (n_states,)
        A copy with the quadratures set to zero [-, V, K, J, C].
    """
    start = np.array(state, dtype=float)
    start[quadrature_index(n_rc, n_cells):] = 0.0
    return start
