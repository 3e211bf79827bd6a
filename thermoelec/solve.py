"""The integration driver: segments, phases, events, and the solver back ends.

A mission is a list of segments; a segment is one phase, or two for CC-CV (a
constant-current phase, then a constant-voltage phase). Each phase boundary is a
discontinuity of the right-hand side, so the integrator is stopped exactly there
and restarted, never smoothed across. Within a phase the right-hand side is
smooth and autonomous, and every limit is a root function located by the
integrator (:mod:`thermoelec.model` defines them).

Back ends (registry :data:`BACKENDS`):

``cvode``
    SUNDIALS CVODE, BDF with Newton iteration and a dense direct linear solver,
    through scikits.odes (Hindmarsh et al., ACM TOMS 31 (2005) 363).
``scipy``
    ``scipy.integrate.solve_ivp`` (LSODA by default) with its event location.
"""

from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, field
from typing import Protocol

import numpy as np

from . import model as m
from .model import Kernels, Problem
from .profile import Segment

__all__ = ["BACKENDS", "SolverOptions", "Trajectory", "integrate_problem"]

STOP_EVENTS = {
    m.EV_VOLTAGE_MIN: "voltage_min",
    m.EV_VOLTAGE_MAX: "voltage_max",
    m.EV_POWER: "power_limit",
    m.EV_TEMPERATURE: "temperature_max",
    m.EV_SOC_EMPTY: "soc_limit",
    m.EV_SOC_FULL: "soc_limit",
}
SEGMENT_END_EVENTS = {m.EV_CV_CUTOFF, m.EV_END_VOLTAGE_BELOW, m.EV_END_VOLTAGE_ABOVE, m.EV_END_SOC_BELOW,
                      m.EV_END_SOC_ABOVE}
#: Events in the order they win when several fire at the same instant.
EVENT_PRIORITY = (m.EV_POWER, m.EV_VOLTAGE_MIN, m.EV_VOLTAGE_MAX, m.EV_TEMPERATURE, m.EV_SOC_EMPTY,
                  m.EV_SOC_FULL, m.EV_CV_SWITCH, m.EV_CV_CUTOFF, m.EV_END_VOLTAGE_BELOW, m.EV_END_VOLTAGE_ABOVE,
                  m.EV_END_SOC_BELOW, m.EV_END_SOC_ABOVE)
#: A root function within this many of its scales of zero (or below) counts as fired.
ROOT_TOLERANCE = 1e-9
#: A phase shorter than this is skipped [s] (a root that lands on a segment end).
MIN_PHASE = 1e-12
#: Time ahead [s] at which a root function's direction is probed at a phase start.
START_PROBE = 1e-3
#: Relative slack on the cell voltage limits when the terminal voltage is imposed,
#: so that a CV set point exactly at Ns x voltage_max is not taken as a violation.
IMPOSED_VOLTAGE_SLACK = 1e-9


#: Typical scales of the states [-, V, K, J]: the default absolute tolerance is rtol times these.
ATOL_SCALES = {"soc": 1e-2, "voltage": 1e-2, "temperature": 1.0, "integral": 1.0}


@dataclass(frozen=True)
class SolverOptions:
    """Integrator settings.

    Attributes
    ----------
    backend : str
        A key of :data:`BACKENDS`.
    rtol : float
        Relative tolerance [-].
    atol_soc, atol_voltage, atol_temperature, atol_integral : float or None
        Absolute tolerances of SoC [-], RC voltages [V], temperatures [K] and the
        energy / charge integrals [J, C]. By default each is ``rtol`` times a
        typical scale of its state (:data:`ATOL_SCALES`), so that tightening
        ``rtol`` tightens every state.
    output_interval : float
        Spacing of the reported series [s]; phase ends and events are always reported.
    max_steps : int
        Internal steps allowed per phase before the integrator gives up.
    scipy_method : str
        ``solve_ivp`` method for the scipy back end.
    """

    backend: str = "cvode"
    rtol: float = 1e-6
    atol_soc: float | None = None
    atol_voltage: float | None = None
    atol_temperature: float | None = None
    atol_integral: float | None = None
    output_interval: float = 1.0
    max_steps: int = 50_000
    scipy_method: str = "LSODA"

    def atol_vector(self, n_rc: int) -> np.ndarray:
        """Per-state absolute tolerances in state order."""
        def atol(name: str) -> float:
            given = getattr(self, f"atol_{name}")
            return given if given is not None else self.rtol * ATOL_SCALES[name]

        return np.concatenate([[atol("soc")], np.full(n_rc, atol("voltage")),
                               [atol("temperature"), atol("temperature")],
                               np.full(m.N_QUADRATURES, atol("integral"))])


@dataclass
class PhaseOutcome:
    """What a back end returns for one phase."""

    times: list[float]
    states: list[np.ndarray]
    status: str  # "end" | "root" | "error"
    message: str = ""


class Backend(Protocol):
    """A solver back end: integrates one smooth phase, stopping at a root."""

    name: str

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: np.ndarray) -> PhaseOutcome:
        """Integrate from ``t0`` to ``t_end``; report at ``outputs`` (ending with ``t_end``)."""
        ...

    def statistics(self) -> dict[str, float]:
        """Solver counters summed over all phases."""
        ...


def _float32_at_or_after(t: float) -> float:
    """The smallest float32 value >= t (see :class:`CvodeBackend`)."""
    f = np.float32(t)
    if float(f) < t:
        f = np.nextafter(f, np.float32(np.inf))
    return float(f)


class CvodeBackend:
    """CVODE (BDF, Newton, dense) through scikits.odes 2.7, restarted per phase.

    scikits.odes stores the stop time in single precision, so ``tstop`` is set to
    the first float32 at or after the phase end and the state at the exact end
    is taken from CVODE's interpolant (``step(t_end)`` in normal mode); the step
    can overshoot the end by at most one float32 ulp with the phase's own
    right-hand side, which the interpolant does not see.
    """

    name = "cvode"

    def __init__(self, kernels: Kernels, options: SolverOptions, n_rc: int):
        from scikits.odes import ode  # imported here: scipy runs need no SUNDIALS

        self.kernels = kernels
        self._solver = ode(
            "cvode", kernels.cvode_rhs, old_api=False, lmm_type="BDF", nonlinsolver="newton",
            linsolver="dense", jacfn=kernels.cvode_jacobian, rootfn=kernels.cvode_roots,
            nr_rootfns=m.N_EVENTS, rtol=options.rtol, atol=options.atol_vector(n_rc),
            max_steps=options.max_steps,
        )._integrator
        self._started = False
        self._stats: dict[str, float] = {}

    def _accumulate(self) -> None:
        for key, value in self._solver.get_info().items():
            if key.startswith("Num"):
                self._stats[key] = self._stats.get(key, 0) + value

    def statistics(self) -> dict[str, float]:
        return dict(self._stats)

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: np.ndarray) -> PhaseOutcome:
        solver = self._solver
        self.kernels.error = None
        if self._started:
            solver.reinit_IC(t0, y0)
        else:
            solver.init_step(t0, y0)
            self._started = True
        solver.set_options(tstop=_float32_at_or_after(t_end))
        times: list[float] = []
        states: list[np.ndarray] = []
        try:
            for tout in outputs:
                try:
                    out = solver.step(float(tout))
                except Exception as exc:  # scikits.odes raises for some failures instead of flagging
                    return PhaseOutcome(times, states, "error", f"CVODE: {exc}")
                flag = int(out.flag)
                if self.kernels.error is not None:
                    return PhaseOutcome(times, states, "error", f"right-hand side failed: {self.kernels.error!r}")
                if flag == 2:  # root found; out.roots keeps every root since init, values is this one
                    times.append(float(out.values.t))
                    states.append(np.array(out.values.y, dtype=float))
                    return PhaseOutcome(times, states, "root")
                if flag < 0:
                    return PhaseOutcome(times, states, "error", f"CVODE: {out.message} at t = {out.values.t:.6g} s")
                times.append(float(tout))
                states.append(np.array(out.values.y, dtype=float))
        finally:
            self._accumulate()
        return PhaseOutcome(times, states, "end")


class ScipyBackend:
    """``scipy.integrate.solve_ivp`` restarted per phase, events as terminal functions."""

    name = "scipy"

    def __init__(self, kernels: Kernels, options: SolverOptions, n_rc: int):
        self.kernels = kernels
        self.options = options
        self.atol = options.atol_vector(n_rc)
        self._stats = {"NumRhsEvals": 0, "NumJacEvals": 0, "NumLUDecomps": 0, "NumPhases": 0}
        self._events = [self._event(k) for k in range(m.N_EVENTS)]

    def _event(self, k: int):
        kernels = self.kernels

        def event(t: float, y: np.ndarray) -> float:
            return kernels.event_values(y)[k]

        event.terminal = True
        event.direction = -1
        return event

    def statistics(self) -> dict[str, float]:
        return dict(self._stats)

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: np.ndarray) -> PhaseOutcome:
        from scipy.integrate import solve_ivp

        p = self.kernels.p
        active = [self._events[k] for k in range(m.N_EVENTS) if p[m.H_ACTIVE + k] != 0.0]
        implicit = self.options.scipy_method in ("BDF", "Radau", "LSODA")
        sol = solve_ivp(
            self.kernels.scipy_rhs, (t0, t_end), y0, method=self.options.scipy_method, t_eval=outputs,
            events=active or None, rtol=self.options.rtol, atol=self.atol,
            jac=self.kernels.scipy_jacobian if implicit else None,
        )
        self._stats["NumRhsEvals"] += sol.nfev
        self._stats["NumJacEvals"] += sol.njev
        self._stats["NumLUDecomps"] += sol.nlu
        self._stats["NumPhases"] += 1
        times = [float(t) for t in sol.t]
        states = [np.array(sol.y[:, i]) for i in range(sol.y.shape[1])]
        if sol.status == -1:
            return PhaseOutcome(times, states, "error", f"solve_ivp: {sol.message}")
        if sol.status == 1:
            hits = [(ev[0], ye[0]) for ev, ye in zip(sol.t_events, sol.y_events) if len(ev)]
            t_root, y_root = min(hits, key=lambda h: h[0])
            keep = [i for i, t in enumerate(times) if t < t_root]
            return PhaseOutcome([times[i] for i in keep] + [float(t_root)],
                                [states[i] for i in keep] + [np.array(y_root)], "root")
        return PhaseOutcome(times, states, "end")


BACKENDS: dict[str, type] = {"cvode": CvodeBackend, "scipy": ScipyBackend}


@dataclass
class Trajectory:
    """Raw output of :func:`integrate_problem`, before the results layer.

    ``rows`` of ``(time, state, phase parameter vector)``: at a phase boundary the
    state appears twice, with the parameters of the phase before and after it,
    so the reported series shows each jump of the demand exactly.
    """

    times: np.ndarray
    states: np.ndarray
    params: np.ndarray
    phase_index: np.ndarray
    stop_reason: str
    status: str  # "ok" | "failed"
    message: str
    events: list[dict] = field(default_factory=list)
    statistics: dict[str, float] = field(default_factory=dict)
    wall_time: float = 0.0
    segments_completed: int = 0


@dataclass
class _Phase:
    mode: int
    value: float
    kind: str  # "demand" | "cc" | "cv"


def _phases_of(segment: Segment) -> list[_Phase]:
    if segment.mode == "cccv":
        return [_Phase(m.MODE_CURRENT, segment.value, "cc"), _Phase(m.MODE_VOLTAGE, segment.cv_voltage, "cv")]
    if segment.mode == "rest":
        return [_Phase(m.MODE_CURRENT, 0.0, "demand")]
    return [_Phase(m.mode_code(segment.mode), segment.value, "demand")]


def _configure(p: np.ndarray, problem: Problem, segment: Segment, phase: _Phase) -> None:
    """Write the phase's mode, demand, ambient and active events into ``p``."""
    cell, ns = problem.cell, problem.pack.series
    p[m.H_MODE] = phase.mode
    p[m.H_VALUE] = phase.value
    p[m.H_AMBIENT] = problem.ambient_temperature if segment.ambient_temperature is None \
        else segment.ambient_temperature
    active = np.zeros(m.N_EVENTS)
    thresholds = np.zeros(m.N_EVENTS)
    imposed_voltage = phase.mode == m.MODE_VOLTAGE
    # With the terminal voltage imposed, the cell voltage is (V + I R_ic) / Ns: it
    # stays on the safe side of V / Ns in the direction of the current, so the
    # voltage limits are checked once at the phase start (see _start_events).
    active[m.EV_VOLTAGE_MIN] = not imposed_voltage
    active[m.EV_VOLTAGE_MAX] = not imposed_voltage
    if phase.kind == "cc" and segment.cv_voltage <= ns * cell.voltage_max:
        active[m.EV_VOLTAGE_MAX] = False  # the CV switch comes first (at or before the cell limit)
    thresholds[m.EV_VOLTAGE_MIN], thresholds[m.EV_VOLTAGE_MAX] = cell.voltage_min, cell.voltage_max
    active[m.EV_POWER] = phase.mode == m.MODE_POWER and phase.value > 0.0
    active[m.EV_TEMPERATURE] = True
    thresholds[m.EV_TEMPERATURE] = problem.limits.cell_temperature_max
    active[m.EV_SOC_EMPTY] = active[m.EV_SOC_FULL] = True
    thresholds[m.EV_SOC_EMPTY], thresholds[m.EV_SOC_FULL] = 0.0, 1.0
    if phase.kind == "cc":
        active[m.EV_CV_SWITCH] = True
        thresholds[m.EV_CV_SWITCH] = segment.cv_voltage
    if phase.kind == "cv":
        active[m.EV_CV_CUTOFF] = True
        thresholds[m.EV_CV_CUTOFF] = segment.cutoff_current
    for event, threshold in ((m.EV_END_VOLTAGE_BELOW, segment.voltage_below),
                             (m.EV_END_VOLTAGE_ABOVE, segment.voltage_above),
                             (m.EV_END_SOC_BELOW, segment.soc_below),
                             (m.EV_END_SOC_ABOVE, segment.soc_above)):
        if threshold is not None:
            active[event] = True
            thresholds[event] = threshold
    p[m.H_ACTIVE:m.H_ACTIVE + m.N_EVENTS] = active
    p[m.H_THRESHOLD:m.H_THRESHOLD + m.N_EVENTS] = thresholds


def _fired(g: np.ndarray, p: np.ndarray, heading_down: np.ndarray | None = None) -> int | None:
    """The event that fired (by priority), given the root-function values ``g``.

    A function counts as fired when it is below zero, or within
    :data:`ROOT_TOLERANCE` of its scale of zero and (when ``heading_down`` is
    given) decreasing.
    """
    for k in EVENT_PRIORITY:
        if p[m.H_ACTIVE + k] == 0.0:
            continue
        near = g[k] <= ROOT_TOLERANCE * m.EVENT_SCALES[k]
        if g[k] < -ROOT_TOLERANCE * m.EVENT_SCALES[k] or (near and (heading_down is None or heading_down[k])):
            return k
    return None


def _start_events(kernels: Kernels, y: np.ndarray, phase: _Phase) -> int | None:
    """Events already true at a phase start, which root finding cannot see.

    A root function sitting at zero and not heading down (a full cell at rest)
    is switched off for the phase, so that neither the integrator nor the root
    identification mistakes it for a crossing.
    """
    p = kernels.p
    g = kernels.event_values(y)
    g_ahead = kernels.event_values(y + START_PROBE * kernels.derivative(y))
    heading_down = g_ahead < g
    fired = _fired(g, p, heading_down=heading_down)
    if fired is not None:
        return fired
    for k in range(m.N_EVENTS):
        if p[m.H_ACTIVE + k] != 0.0 and g[k] <= ROOT_TOLERANCE * m.EVENT_SCALES[k]:
            p[m.H_ACTIVE + k] = 0.0
    if phase.mode == m.MODE_VOLTAGE:
        v_cell = kernels.algebraics(y)[m.A_CELL_VOLTAGE]
        if v_cell > p[m.H_THRESHOLD + m.EV_VOLTAGE_MAX] * (1.0 + IMPOSED_VOLTAGE_SLACK):
            return m.EV_VOLTAGE_MAX
        if v_cell < p[m.H_THRESHOLD + m.EV_VOLTAGE_MIN] * (1.0 - IMPOSED_VOLTAGE_SLACK):
            return m.EV_VOLTAGE_MIN
    return None


def _output_times(t0: float, t_end: float, interval: float) -> np.ndarray:
    """Global output grid points strictly inside (t0, t_end), then t_end."""
    if math.isinf(t_end):
        raise ValueError("an unbounded phase needs a finite cap")
    first = math.floor(t0 / interval) + 1
    last = math.ceil(t_end / interval) - 1
    grid = np.arange(first, last + 1) * interval
    grid = grid[(grid > t0 + 1e-9 * interval) & (grid < t_end - 1e-9 * interval)]
    return np.append(grid, t_end)


def cccv_cap(problem: Problem, segment: Segment) -> float:
    """Duration cap of a CC-CV segment without one [s]: ten full charges at its CC rate."""
    per_cell = abs(segment.value) / problem.pack.parallel
    return 10.0 * problem.cell.capacity / max(per_cell, 1e-12)


def integrate_problem(problem: Problem, options: SolverOptions) -> Trajectory:
    """Integrate a mission from t = 0 until its profile ends or a stop event fires.

    Never raises for a solver failure: the trajectory up to the failure comes
    back with ``status = "failed"`` and the solver's message.
    """
    if options.backend not in BACKENDS:
        raise ValueError(f"unknown solver backend {options.backend!r}; valid: {', '.join(BACKENDS)}")
    p = m.pack_parameters(problem)
    kernels = Kernels(p, m.n_states(problem.n_rc))
    backend = BACKENDS[options.backend](kernels, options, problem.n_rc)
    started = _time.perf_counter()

    times: list[float] = []
    states: list[np.ndarray] = []
    params: list[np.ndarray] = []
    phase_ids: list[int] = []
    events: list[dict] = []

    def record(t: float, y: np.ndarray, phase_id: int) -> None:
        times.append(t)
        states.append(y)
        params.append(p.copy())
        phase_ids.append(phase_id)

    t = 0.0
    y = problem.initial_state()
    stop_reason = "end_of_profile"
    status, message = "ok", ""
    phase_id = -1
    segments_completed = 0
    for seg_index, segment in enumerate(problem.segments):
        duration = segment.duration if math.isfinite(segment.duration) else cccv_cap(problem, segment)
        t_seg_end = t + duration
        phases = _phases_of(segment)
        k = 0
        segment_over = False
        ended_by_time = False
        while not segment_over:
            phase = phases[k]
            phase_id += 1
            _configure(p, problem, segment, phase)
            fired = _start_events(kernels, y, phase)
            record(t, y, phase_id)
            if fired is None:
                if t_seg_end - t <= MIN_PHASE:
                    segment_over = True
                    break
                outputs = _output_times(t, t_seg_end, options.output_interval)
                outcome = backend.integrate(t, y, t_seg_end, outputs)
                for tt, yy in zip(outcome.times, outcome.states):
                    record(tt, yy, phase_id)
                if outcome.times:
                    t, y = outcome.times[-1], outcome.states[-1]
                if outcome.status == "error":
                    status, message, stop_reason = "failed", outcome.message, "solver_error"
                    break
                if outcome.status == "end":
                    segment_over = ended_by_time = True
                    break
                fired = _fired(kernels.event_values(y), p)
                if fired is None:  # the root function that fired sits within tolerance: take the nearest
                    g = kernels.event_values(y) / m.EVENT_SCALES
                    g[p[m.H_ACTIVE:m.H_ACTIVE + m.N_EVENTS] == 0.0] = np.inf
                    fired = int(np.argmin(g))
            events.append({"time_s": t, "event": m.EVENT_NAMES[fired], "segment": seg_index,
                           "origin": segment.origin})
            if fired in STOP_EVENTS:
                stop_reason = STOP_EVENTS[fired]
                break
            if fired == m.EV_CV_SWITCH:
                k += 1
                continue
            segment_over = True  # a cutoff or an end condition ends the segment
        if status == "failed" or stop_reason != "end_of_profile":
            break
        segments_completed += 1
        if ended_by_time and not math.isfinite(segment.duration):
            events.append({"time_s": t, "event": "cccv_cap", "segment": seg_index, "origin": segment.origin})

    return Trajectory(
        times=np.asarray(times), states=np.asarray(states), params=np.asarray(params),
        phase_index=np.asarray(phase_ids), stop_reason=stop_reason, status=status, message=message,
        events=events, statistics=backend.statistics(), wall_time=_time.perf_counter() - started,
        segments_completed=segments_completed,
    )
