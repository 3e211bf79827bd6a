"""The integration driver: walks a mission plan phase by phase on a solver back end.

Within a phase the right-hand side is smooth and autonomous, and every limit is
a root function located by the back end (:mod:`thermoelec.engine.backends`).
The phases, their root-function set-ups and what each event does come from the
mission plan (:mod:`thermoelec.engine.mission`), which the batched solver
(:mod:`thermoelec.engine.batch`) walks too.

Root finding: each phase starts with :func:`thermoelec.engine.model.start_check`
(events already true, which root finding cannot see). A phase in which every
root function starts beyond :data:`REACH_FACTOR` times its first-order reach is
integrated without root functions and checked at its end; should any have gone
non-positive, the phase is integrated again with root finding, so every event
is located by the integrator.

Only this module and the batched solver walk the mission plan. It sits at the
top of the engine and imports from every part below it (back ends, events,
layout, mission, kernels, options, problem); nothing of the engine imports it,
and it must not import the batched solver or anything above the engine.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, field, replace

import numpy as np

from thermoelec.engine.backends import BACKENDS
from thermoelec.engine.events import (
    ACTION_HOLD,
    ACTION_NEXT_PHASE,
    ACTION_STOP,
    ACTION_TOGGLE,
    CCCV_CAP_EVENT,
    CONTROL_EVENTS,
    EVENT_ACTION,
    EVENT_HOLD,
    EVENT_NAMES,
    STOP_EVENTS,
)
from thermoelec.engine.layout import (
    A_CURRENT,
    CELL_OF_EVENT,
    H_AMBIENT_TABLE,
    H_MODE,
    H_TIME,
    H_VALUE,
    HEADER,
    cell_state_indices,
)
from thermoelec.engine.mission import (
    IMPOSED_VOLTAGE_SLACK,
    MAX_EVENTS_AT_ONE_INSTANT,
    MIN_PHASE,
    START_PROBE,
    MissionPlan,
    configure_phase,
    initial_controls,
    plan_mission,
    soak_problem,
    start_after_soak,
    thermostat_switches,
)
from thermoelec.engine.model import Kernels, fired_event, trajectory_algebraics
from thermoelec.engine.options import FIRST_STEP_FRACTION, LINEAR_SOLVERS, SolverOptions, automatic_first_step
from thermoelec.engine.problem import Problem, jacobian_bandwidth, pack_parameters
from thermoelec.engine.resolved import trajectory_cell_values

__all__ = ["REACH_FACTOR", "Trajectory", "integrate_problem"]

#: A phase is integrated without root finding only when every root function starts
#: beyond this many times its first-order reach over the phase, g > k |g'| dt; it is
#: then checked at the phase end and repeated with root finding if any went non-positive.
REACH_FACTOR = 4.0


@dataclass
class Trajectory:
    """Raw output of :func:`integrate_problem`, before the results layer.

    Rows of ``(time, state)`` and the phase of each row: at a phase boundary
    the state appears twice, in the phase before and the phase after it, so the
    reported series shows each jump of the demand exactly. The header of each
    phase's parameter vector is kept once (``phase_params``), its demand in it;
    the blocks after the header do not change between phases and are kept once
    (``parameters``, a resolved pack's is tens of kilobytes). :attr:`demand_modes`
    (load-mode codes) and :attr:`demand_values` [A, W, Ω, V] read it for every row.

    Attributes
    ----------
    times : float64 array, shape (n,)
        Row times [s].
    states : float64 array, shape (n, n_states)
        State rows (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    phase_params : float64 array, shape (n_phases, HEADER)
        The header of the parameter vector of each phase as it started [SI, unit per slot].
    phase_index : int64 array, shape (n,)
        The phase of each row [-].
    parameters : float64 array
        The scenario's parameter vector: its blocks, with the header of the last phase [SI, unit per slot].
    stop_reason : str
        One of :data:`thermoelec.engine.events.STOP_REASONS`.
    status : str
        ``"ok"`` or ``"failed"`` (the solver failed; ``message`` says why).
    message : str
        The solver's message for a failure, else empty.
    events : list of dict
        Each event: ``time_s`` [s], ``event`` name, ``segment`` index, ``origin``,
        ``state`` (``"on"`` / ``"off"``) for a thermostat, and in a resolved pack
        ``cell`` (from 0) for a cell limit or a thermostat: the cell at the limit
        (for a voltage limit the first cell of the group at it), or the cell sensed.
    statistics : dict of str to float
        The back end's counters (:meth:`~thermoelec.engine.backends.Backend.statistics`).
    wall_time : float
        Wall-clock time of the integration [s].
    segments_completed : int
        Segments run to their end [-].
    soak : Trajectory or None
        The soak's own trajectory, None without a soak.
    phase_segment : int64 array, shape (n_phases,)
        The mission segment each phase belongs to (index into ``Problem.segments``) [-].
    """

    times: np.ndarray
    states: np.ndarray
    phase_params: np.ndarray
    phase_index: np.ndarray
    parameters: np.ndarray
    stop_reason: str
    status: str  # "ok" | "failed"
    message: str
    events: list[dict] = field(default_factory=list)
    statistics: dict[str, float] = field(default_factory=dict)
    wall_time: float = 0.0
    segments_completed: int = 0
    soak: Trajectory | None = None
    phase_segment: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))

    @property
    def row_segments(self) -> np.ndarray:
        """The mission segment of each row (index into ``Problem.segments``) [-]."""
        return self.phase_segment[self.phase_index]

    @property
    def demand_modes(self) -> np.ndarray:
        """Load-mode code of each row [-] (:data:`thermoelec.physics.loads.LOAD_MODES`)."""
        return self.phase_params[self.phase_index, H_MODE].astype(int)

    @property
    def demand_values(self) -> np.ndarray:
        """Demand of each row in its mode's unit [A, W, Ω, V] (a new array)."""
        return self.phase_params[self.phase_index, H_VALUE].copy()

    def algebraics(self) -> np.ndarray:
        """The algebraic outputs of every row (:func:`thermoelec.engine.model.trajectory_algebraics`).

        Returns
        -------
        float64 array, shape (n, N_ALGEBRAICS)
            Current [A], voltages [V], heats [W], ... in the order of
            :data:`thermoelec.engine.layout.ALGEBRAICS`.
        """
        return trajectory_algebraics(self.times, self.states, self.phase_params, self.phase_index, self.parameters)

    def cell_values(self) -> np.ndarray:
        """Per-cell values of every row of a resolved pack (:func:`thermoelec.engine.resolved.trajectory_cell_values`).

        Returns
        -------
        float64 array, shape (n, n_cells, N_CELL_VALUES)
            Current [A], heat [W], group voltage [V], OCV [V], series resistance [Ω],
            coolant temperature entering the cell's segment [K], heat to the coolant [W].
        """
        return trajectory_cell_values(self.times, self.states, self.phase_params, self.phase_index, self.parameters)


def _output_times(t0: float, t_end: float, interval: float) -> list[float]:
    """Global output grid points strictly inside (t0, t_end), then t_end."""
    if math.isinf(t_end):
        raise ValueError("an unbounded phase needs a finite cap")
    eps = 1e-9 * interval
    first = math.floor(t0 / interval) + 1
    if first * interval >= t_end - eps:  # the common case of a short segment: no grid point inside
        return [t_end]
    last = math.ceil(t_end / interval) - 1
    grid = [k * interval for k in range(first, last + 1)]
    return [t for t in grid if t0 + eps < t < t_end - eps] + [t_end]


@dataclass
class _Run:
    """What the driver accumulates while it walks the plan."""

    times: list[float] = field(default_factory=list)
    states: list[np.ndarray] = field(default_factory=list)
    row_phase: list[int] = field(default_factory=list)
    phase_params: list[np.ndarray] = field(default_factory=list)
    phase_segment: list[int] = field(default_factory=list)
    segment: int = 0
    events: list[dict] = field(default_factory=list)
    stop_reason: str = "end_of_profile"
    status: str = "ok"
    message: str = ""

    def start_phase(self, t: float, y: np.ndarray, p: np.ndarray) -> int:
        self.phase_params.append(p[:HEADER].copy())
        self.phase_segment.append(self.segment)
        self.times.append(t)
        self.states.append(y)
        self.row_phase.append(len(self.phase_params) - 1)
        return len(self.phase_params) - 1


def _check_options(options: SolverOptions) -> None:
    if options.backend not in BACKENDS:
        raise ValueError(f"unknown solver backend {options.backend!r}; valid: {', '.join(BACKENDS)}")
    if options.linear_solver not in LINEAR_SOLVERS:
        raise ValueError(f"unknown linear solver {options.linear_solver!r}; valid: {', '.join(LINEAR_SOLVERS)}")


def integrate_problem(problem: Problem, options: SolverOptions, initial_state: np.ndarray | None = None) -> Trajectory:
    """Integrate a mission from t = 0 until its profile ends or a stop event fires.

    Never raises for a solver failure: the trajectory up to the failure comes
    back with ``status = "failed"`` and the solver's message. An unknown back end
    or Newton matrix is a ValueError naming the valid ones.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].
    options : SolverOptions
        Back end, tolerances [-, and per state -, V, K, J, C], output interval [s].
    initial_state : float64 array, shape (n_states,), optional
        State at t = 0 (default :meth:`Problem.initial_state`); a soak, if the
        problem has one, starts from it [-, V, K, J, C].

    Returns
    -------
    Trajectory
        Rows (times [s], states [-, V, K, J, C]), events, stop reason, solver
        counters; the soak's own trajectory in ``soak``.
    """
    _check_options(options)
    soak = None
    soaking = soak_problem(problem)
    if soaking is not None:
        soak = integrate_problem(soaking, options, initial_state)
        initial_state = start_after_soak(soak.states[-1], problem.n_rc, problem.n_cells)
    if options.first_step == "auto":
        fraction = FIRST_STEP_FRACTION["lumped" if problem.resolved is None else "resolved"]
        options = replace(options, first_step=automatic_first_step((s.duration for s in problem.segments),
                                                                   options.rtol, fraction))
    plan = plan_mission(problem)
    p = pack_parameters(problem)
    kernels = Kernels(p, problem.n_states)
    backend = BACKENDS[options.backend](kernels, options, problem.n_rc, problem.n_cells, jacobian_bandwidth(problem))
    started = _time.perf_counter()
    y = problem.initial_state() if initial_state is None else np.array(initial_state, dtype=float)
    run = _Run()
    completed = _walk(plan, problem, p, kernels, backend, options, y, run)
    return Trajectory(
        times=np.asarray(run.times), states=np.asarray(run.states), phase_params=np.asarray(run.phase_params),
        phase_index=np.asarray(run.row_phase, dtype=np.int64), parameters=p.copy(),
        stop_reason=run.stop_reason, status=run.status,
        message=run.message, events=run.events, statistics=backend.statistics(),
        wall_time=_time.perf_counter() - started, segments_completed=completed, soak=soak,
        phase_segment=np.asarray(run.phase_segment, dtype=np.int64),
    )


def _walk(plan: MissionPlan, problem: Problem, p: np.ndarray, kernels: Kernels, backend, options: SolverOptions,
          y: np.ndarray, run: _Run) -> int:
    """Every segment of the plan in turn; returns the number completed (``run`` collects the rows)."""
    switches = thermostat_switches(problem)
    temperatures = y[cell_state_indices(problem.n_rc, problem.n_cells)[1]]
    controls = initial_controls(switches, temperatures.max(), temperatures.min())
    default_ambient, default_table = problem.ambient_temperature, float(p[H_AMBIENT_TABLE])
    # the voltage limiter's hold state, and the current a ramp starts from (the one delivered just before)
    hold, delivered = 0.0, 0.0
    ramped = problem.derating is not None and problem.derating.ramp_rate > 0.0
    t = 0.0
    at_once = 0  # events in a row without time passing
    for seg in range(plan.n_segments):
        t_seg_end = t + plan.durations[seg]
        phase = 0
        run.segment = seg
        while True:
            if ramped and run.phase_params:
                p[H_TIME] = t
                delivered = float(kernels.algebraics(y)[A_CURRENT])
            hold = configure_phase(p, seg, phase, plan.modes, plan.values, plan.ambients, plan.setups,
                                   plan.setup_index, default_ambient, default_table, switches, controls, hold,
                                   delivered, t, -1)
            p[H_TIME] = t
            t_before = t
            t, y, fired, ended_by_time = _phase(kernels, backend, options, p, t, y, t_seg_end, run)
            if fired is None:
                break
            at_once = at_once + 1 if t == t_before else 0
            if at_once > MAX_EVENTS_AT_ONE_INSTANT:
                run.status, run.stop_reason = "failed", "solver_error"
                run.message = (f"{at_once} events at t = {t:.6g} s without time passing (the last "
                               f"{EVENT_NAMES[fired]}): switches that undo each other at once")
                return seg
            event = {"time_s": t, "event": EVENT_NAMES[fired], "segment": seg, "origin": plan.origins[seg]}
            if problem.resolved is not None and fired in CELL_OF_EVENT:
                event["cell"] = int(kernels.algebraics(y)[CELL_OF_EVENT[fired]])
            run.events.append(event)
            action = EVENT_ACTION[fired]
            if action == ACTION_TOGGLE:
                c = CONTROL_EVENTS.index(fired)
                controls[c] = not controls[c]
                event["state"] = "on" if controls[c] else "off"
                continue  # the same phase goes on with the thermostat switched
            if action == ACTION_HOLD:
                hold = float(EVENT_HOLD[fired])
                continue  # the same phase goes on, held at a voltage limit or let go
            if action == ACTION_STOP:
                run.stop_reason = STOP_EVENTS[fired]
                return seg
            if action == ACTION_NEXT_PHASE and phase + 1 < plan.n_phases[seg]:
                phase += 1
                continue
            break  # a cutoff or an end condition ends the segment
        if run.status == "failed":
            return seg
        if ended_by_time and plan.capped[seg]:
            run.events.append({"time_s": t, "event": CCCV_CAP_EVENT, "segment": seg, "origin": plan.origins[seg]})
    return plan.n_segments


def _phase(kernels: Kernels, backend, options: SolverOptions, p: np.ndarray, t: float, y: np.ndarray,
           t_end: float, run: _Run) -> tuple[float, np.ndarray, int | None, bool]:
    """One phase from ``(t, y)`` to ``t_end`` or its first event.

    Returns the time and state where it ended, the event that fired there
    (None: none) and whether it ran to ``t_end``; a solver failure sets
    ``run.status`` and ends it with no event.
    """
    code = kernels.phase_start(y, START_PROBE, IMPOSED_VOLTAGE_SLACK, t_end - t, REACH_FACTOR)
    if code >= 0 and EVENT_ACTION[code] == ACTION_HOLD:
        # the voltage limiter acts at once: the phase restarts held (or let go) before any time passes, so the
        # instant before it (the demand past a cell's limit) is no state of the mission and gets no row
        return t, y, code, False
    phase_id = run.start_phase(t, y, p)
    if code >= 0:
        return t, y, code, False
    if t_end - t <= MIN_PHASE:
        return t, y, None, False
    outputs = _output_times(t, t_end, options.output_interval)
    find_roots = code == -1
    outcome = backend.integrate(t, y, t_end, outputs, find_roots)
    if not find_roots and outcome.status == "end" and not kernels.all_positive(outcome.states[-1]):
        outcome = backend.integrate(t, y, t_end, outputs, True)
    run.times.extend(outcome.times)
    run.states.extend(outcome.states)
    run.row_phase.extend([phase_id] * len(outcome.times))
    if outcome.times:
        t, y = outcome.times[-1], outcome.states[-1]
    if outcome.status == "error":
        run.status, run.message, run.stop_reason = "failed", outcome.message, "solver_error"
        return t, y, None, False
    if outcome.status == "end":
        return t, y, None, True
    return t, y, fired_event(kernels.event_values(y), p), False
