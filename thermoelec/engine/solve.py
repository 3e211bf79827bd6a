"""The integration driver: segments, phases, events, and the solver back ends.

A mission is a list of segments; a segment is one phase, or two for CC-CV (a
constant-current phase, then a constant-voltage phase). Each phase boundary is a
discontinuity of the right-hand side, so the integrator is stopped exactly there
and restarted, never smoothed across. Within a phase the right-hand side is
smooth and autonomous, and every limit is a root function located by the
integrator (:mod:`thermoelec.engine.model` defines them).

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
from dataclasses import dataclass, field, replace
from typing import Protocol

import numpy as np

from thermoelec.engine import model as m
from thermoelec.engine.model import Kernels, Problem
from thermoelec.engine.profile import Segment
from thermoelec.physics.thermal import Switch

__all__ = ["BACKENDS", "SolverOptions", "Trajectory", "integrate_problem"]

STOP_EVENTS = {
    m.EV_VOLTAGE_MIN: "voltage_min",
    m.EV_VOLTAGE_MAX: "voltage_max",
    m.EV_POWER: "power_limit",
    m.EV_TEMPERATURE: "temperature_max",
    m.EV_SOC_EMPTY: "soc_limit",
    m.EV_SOC_FULL: "soc_limit",
}
#: Events in the order they win when several fire at the same instant.
EVENT_PRIORITY = m.EVENT_PRIORITY
#: A phase shorter than this is skipped [s] (a root that lands on a segment end).
MIN_PHASE = 1e-12
#: Time ahead [s] at which a root function's direction is probed at a phase start.
START_PROBE = 1e-3
#: A phase is integrated without root finding only when every root function starts
#: beyond this many times its first-order reach over the phase, g > k |g'| dt; it is
#: then checked at the phase end and repeated with root finding if any went non-positive.
REACH_FACTOR = 4.0
#: The CVODE back end solves a phase's implicit steps with the diagonal of the Jacobian
#: alone when Newton's iteration with it contracts at least this fast for the longest
#: step the phase allows (:func:`thermoelec.engine.model.diagonal_newton_contraction`); a
#: tightly coupled or stiff network (a small sink on a large conductance) and long
#: phases get the full dense Jacobian.
DIAGONAL_CONTRACTION = 0.2
#: Newton matrices of the CVODE back end (``SolverOptions.linear_solver``).
LINEAR_SOLVERS = ("auto", "dense", "diagonal")
#: Longest automatic first step after a restart [s] (``SolverOptions.first_step``).
FIRST_STEP_MAX = 1.0
#: Relative slack on the cell voltage limits when the terminal voltage is imposed,
#: so that a CV set point exactly at Ns x voltage_max is not taken as a violation.
IMPOSED_VOLTAGE_SLACK = 1e-9


#: Typical scales of the states [-, V, K, J]: the default absolute tolerance is rtol times these.
#: Mission energies and charges are kJ and kC; a much smaller integral scale lets the
#: roundoff of an integrand (a large conductance times a tiny temperature difference)
#: drive the step size down to milliseconds without making any reported value better.
ATOL_SCALES = {"soc": 1e-2, "voltage": 1e-2, "temperature": 1.0, "integral": 1e3}


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
    first_step : float or "auto"
        CVODE's first step after each restart [s]; 0 lets CVODE estimate it, at a
        cost of two to four extra right-hand-side calls at every restart (a third
        of the work on a 1 Hz profile). ``"auto"``: half the median segment
        length, at most :data:`FIRST_STEP_MAX`, so that at the default ``rtol``
        a profile of equal short segments takes two equal steps in each and the
        second reuses the first's Newton matrix; scaled by ``sqrt(rtol / 1e-6)``,
        as the local error of the first (order-1) step grows with its square
        (CVODE's own estimate scales so too). The CVODE back end integrates the
        RC voltages relative to their exact zero-order-hold response, so what is
        left after a restart is slow; a step that proves too long fails its
        error test and CVODE shortens it, so this sets cost, not accuracy. A step
        never passes a phase end.
    linear_solver : str
        Newton matrix of the CVODE back end: ``"dense"`` (the full Jacobian),
        ``"diagonal"`` (its diagonal only: one right-hand-side call to form, no
        matrix to hand over), or ``"auto"``: diagonal for a phase in which it
        converges fast (:data:`DIAGONAL_CONTRACTION`), dense otherwise and for a
        phase the diagonal one failed.
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
    first_step: float | str = "auto"
    linear_solver: str = "auto"
    scipy_method: str = "LSODA"

    def atol_vector(self, n_rc: int) -> np.ndarray:
        """Per-state absolute tolerances in state order."""
        def atol(name: str) -> float:
            given = getattr(self, f"atol_{name}")
            return given if given is not None else self.rtol * ATOL_SCALES[name]

        return np.concatenate([[atol("soc")], np.full(n_rc, atol("voltage")),
                               [atol("temperature"), atol("temperature"), atol("temperature")],
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

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: list[float],
                  find_roots: bool = True) -> PhaseOutcome:
        """Integrate from ``t0`` to ``t_end``; report at ``outputs`` (ending with ``t_end``).

        With ``find_roots`` false the caller has shown that no root function can
        reach zero in the phase, and the back end may skip root finding.
        """
        ...

    def statistics(self) -> dict[str, float]:
        """Solver counters summed over all phases."""
        ...


def _float32_at_or_after(t: float) -> float:
    """The smallest float32 value >= t (see :class:`CvodeBackend`)."""
    t = float(t)
    if t.is_integer() and abs(t) <= 2.0**24:  # the common case, exact in float32
        return t
    f = np.float32(t)
    if float(f) < t:
        f = np.nextafter(f, np.float32(np.inf))
    return float(f)


class CvodeBackend:
    """CVODE (BDF, Newton; dense or diagonal Newton matrix) through scikits.odes 2.7, restarted per phase.

    CVODE integrates the states with each RC voltage taken relative to its exact
    zero-order-hold response from the phase start (:func:`thermoelec.engine.model.rc_base_setup`),
    an exact change of variables: the states handed back are the usual ones.

    scikits.odes stores the stop time in single precision, so ``tstop`` is set to
    the first float32 at or after the phase end and the state at the exact end
    is taken from CVODE's interpolant (``step(t_end)`` in normal mode); the step
    can overshoot the end by at most one float32 ulp with the phase's own
    right-hand side, which the interpolant does not see.
    """

    name = "cvode"

    def __init__(self, kernels: Kernels, options: SolverOptions, n_rc: int):
        self.kernels = kernels
        self.options = options
        self._common = dict(old_api=False, lmm_type="BDF", nonlinsolver="newton", rtol=options.rtol,
                            atol=options.atol_vector(n_rc), max_steps=options.max_steps,
                            first_step_size=float(options.first_step))
        # Up to four instances of the same integrator, made when first needed: with or
        # without the root functions (phases where no root function can reach zero, see
        # integrate_problem), and with the dense or the diagonal Newton matrix.
        self._solvers: dict[tuple[bool, bool], object] = {}
        self._started: set[tuple[bool, bool]] = set()
        self._stats: dict[str, float] = {"NumPhasesWithRoots": 0, "NumPhasesWithoutRoots": 0,
                                         "NumPhasesDiagonal": 0, "NumPhasesDense": 0}

    def _solver(self, find_roots: bool, diagonal: bool):
        key = (find_roots, diagonal)
        solver = self._solvers.get(key)
        if solver is None:
            from scikits.odes import ode  # imported here: scipy runs need no SUNDIALS

            linear = {"linsolver": "diag"} if diagonal else {"linsolver": "dense", "jacfn": self.kernels.cvode_jacobian}
            roots = {"rootfn": self.kernels.cvode_roots, "nr_rootfns": m.N_EVENTS} if find_roots else {}
            solver = self._solvers[key] = ode("cvode", self.kernels.cvode_rhs, **self._common, **linear,
                                              **roots)._integrator
        return solver

    def _accumulate(self, solver) -> None:
        info = solver.get_info()
        stats = self._stats
        for key in ("NumSteps", "NumRhsEvals", "NumLinSolvSetups", "NumErrTestFails"):
            stats[key] = stats.get(key, 0) + info[key]

    def statistics(self) -> dict[str, float]:
        return dict(self._stats)

    @staticmethod
    def _failure(out, t0: float, times: list[float], states: list[np.ndarray], kernels: Kernels) -> PhaseOutcome:
        """A failed step: keep the last state CVODE reached (``out.errors``), name the time."""
        reached = getattr(out, "errors", None)
        t_fail = getattr(reached, "t", None)
        y_fail = getattr(reached, "y", None)
        if t_fail is not None and y_fail is not None and float(t_fail) > (times[-1] if times else t0):
            times.append(float(t_fail))
            states.append(kernels.unshift(times[-1], y_fail))
        where = f" at t = {float(t_fail):.6g} s" if t_fail is not None else ""
        return PhaseOutcome(times, states, "error", f"CVODE: {out.message}{where}")

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: list[float],
                  find_roots: bool = True) -> PhaseOutcome:
        choice = self.options.linear_solver
        # the shift, and the contraction bound for the longest step the phase allows, in one kernel call
        w0, contraction = self.kernels.shift_from(t0, y0, t_end - t0 if choice == "auto" else 0.0)
        diagonal = contraction <= DIAGONAL_CONTRACTION if choice == "auto" else choice == "diagonal"
        outcome = self._integrate(t0, w0, t_end, outputs, find_roots, diagonal)
        if outcome.status == "error" and diagonal and choice == "auto":
            outcome = self._integrate(t0, w0, t_end, outputs, find_roots, False)
        return outcome

    def _integrate(self, t0: float, w0: np.ndarray, t_end: float, outputs: list[float],
                   find_roots: bool, diagonal: bool) -> PhaseOutcome:
        """One phase from the shifted state ``w0`` (the base is set by :meth:`integrate`)."""
        key = (find_roots, diagonal)
        solver = self._solver(find_roots, diagonal)
        self._stats["NumPhasesWithRoots" if find_roots else "NumPhasesWithoutRoots"] += 1
        self._stats["NumPhasesDiagonal" if diagonal else "NumPhasesDense"] += 1
        kernels = self.kernels
        kernels.error = None
        if key in self._started:
            solver.reinit_IC(t0, w0)
        else:
            solver.init_step(t0, w0)
            self._started.add(key)
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
                    states.append(kernels.unshift(times[-1], out.values.y))
                    return PhaseOutcome(times, states, "root")
                if flag < 0:
                    return self._failure(out, t0, times, states, kernels)
                times.append(float(tout))
                states.append(kernels.unshift(times[-1], out.values.y))
        finally:
            self._accumulate(solver)
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

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: list[float],
                  find_roots: bool = True) -> PhaseOutcome:
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
            hits = [(ev[0], ye[0]) for ev, ye in zip(sol.t_events, sol.y_events, strict=False) if len(ev)]
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
    so the reported series shows each jump of the demand exactly. Each phase's
    parameter vector is kept once (``phase_params``); ``params`` expands it per row.
    """

    times: np.ndarray
    states: np.ndarray
    phase_params: np.ndarray
    phase_index: np.ndarray
    stop_reason: str
    status: str  # "ok" | "failed"
    message: str
    events: list[dict] = field(default_factory=list)
    statistics: dict[str, float] = field(default_factory=dict)
    wall_time: float = 0.0
    segments_completed: int = 0
    soak: Trajectory | None = None

    @property
    def params(self) -> np.ndarray:
        """The parameter vector of each row (a new array)."""
        return self.phase_params[self.phase_index]


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


def _event_setup(problem: Problem, segment: Segment, phase: _Phase) -> tuple[np.ndarray, np.ndarray]:
    """Activity flags and thresholds of the root functions in one phase."""
    cell, ns = problem.cell, problem.pack.series
    active = np.zeros(m.N_EVENTS)
    thresholds = np.zeros(m.N_EVENTS)
    imposed_voltage = phase.mode == m.MODE_VOLTAGE
    # With the terminal voltage imposed, the cell voltage is (V + I R_ic) / Ns: it
    # stays on the safe side of V / Ns in the direction of the current, so the
    # voltage limits are checked once at the phase start (model.start_check).
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
    return np.concatenate([active, thresholds])


def _switches(problem: Problem) -> dict[int, Switch]:
    """The thermostats of the problem, by their event."""
    th = problem.thermal
    found = {m.EV_FAN: th.fan.switch if th.fan else None, m.EV_HEATER: th.heater.switch if th.heater else None,
             m.EV_PUMP: th.pump}
    return {event: switch for event, switch in found.items() if switch is not None}


def _configure(p: np.ndarray, problem: Problem, segment: Segment, phase: _Phase, cache: dict,
               controls: dict[int, bool], switches: dict[int, Switch], ambient_table: float) -> None:
    """Write the phase's mode, demand, ambient, thermostat states and root-function set-up into ``p``.

    A segment with its own ambient temperature (a CSV row, a soak) overrides the
    ambient profile for its duration.
    """
    p[m.H_MODE] = phase.mode
    p[m.H_VALUE] = phase.value
    p[m.H_AMBIENT] = problem.ambient_temperature if segment.ambient_temperature is None \
        else segment.ambient_temperature
    p[m.H_AMBIENT_TABLE] = ambient_table if segment.ambient_temperature is None else 0.0
    key = (phase.kind, phase.mode, phase.value > 0.0, segment.cv_voltage, segment.cutoff_current,
           segment.voltage_below, segment.voltage_above, segment.soc_below, segment.soc_above)
    setup = cache.get(key)
    if setup is None:
        setup = cache[key] = _event_setup(problem, segment, phase)
    p[m.H_ACTIVE:m.H_THRESHOLD + m.N_EVENTS] = setup
    for event, switch in switches.items():
        on = controls[event]
        p[m.CONTROL_FLAGS[event]] = 1.0 if on else 0.0
        p[m.H_ACTIVE + event] = 1.0
        p[m.H_THRESHOLD + event] = switch.off_at if on else switch.on_at


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


def automatic_first_step(problem: Problem, rtol: float) -> float:
    """The ``"auto"`` first step of :class:`SolverOptions` [s]."""
    durations = [s.duration for s in problem.segments if math.isfinite(s.duration) and s.duration > 0.0]
    typical = 0.5 * float(np.median(durations)) if durations else FIRST_STEP_MAX
    return min(FIRST_STEP_MAX, typical) * math.sqrt(rtol / 1e-6)


def cccv_cap(problem: Problem, segment: Segment) -> float:
    """Duration cap of a CC-CV segment without one [s]: ten full charges at its CC rate."""
    per_cell = abs(segment.value) / problem.pack.parallel
    return 10.0 * problem.cell.capacity / max(per_cell, 1e-12)


def integrate_problem(problem: Problem, options: SolverOptions, initial_state: np.ndarray | None = None) -> Trajectory:
    """Integrate a mission from t = 0 until its profile ends or a stop event fires.

    Never raises for a solver failure: the trajectory up to the failure comes
    back with ``status = "failed"`` and the solver's message.

    Soak segments (``problem.soak``) are integrated first, from the problem's
    initial state; the mission then starts at t = 0 from the state the soak
    ended in (integrals reset), and the soak's own trajectory is kept in
    ``Trajectory.soak``. Thermostats start on when the cell temperature is
    already past their on threshold, else off, and switch at located events.

    Root finding: each phase starts with :func:`thermoelec.engine.model.start_check`
    (events already true, which root finding cannot see). A phase in which every
    root function starts beyond :data:`REACH_FACTOR` times its first-order reach
    is integrated without root functions and checked at its end; should any have
    gone non-positive, the phase is integrated again with root finding, so every
    event is located by the integrator.
    """
    if options.backend not in BACKENDS:
        raise ValueError(f"unknown solver backend {options.backend!r}; valid: {', '.join(BACKENDS)}")
    if options.linear_solver not in LINEAR_SOLVERS:
        raise ValueError(f"unknown linear solver {options.linear_solver!r}; valid: {', '.join(LINEAR_SOLVERS)}")
    soak = None
    if problem.soak:
        soak = integrate_problem(replace(problem, segments=problem.soak, soak=()), options, initial_state)
        initial_state = soak.states[-1].copy()
        initial_state[m.quadrature_index(problem.n_rc):] = 0.0
    if options.first_step == "auto":
        options = replace(options, first_step=automatic_first_step(problem, options.rtol))
    p = m.pack_parameters(problem)
    ambient_table = float(p[m.H_AMBIENT_TABLE])
    kernels = Kernels(p, m.n_states(problem.n_rc))
    backend = BACKENDS[options.backend](kernels, options, problem.n_rc)
    started = _time.perf_counter()
    setups: dict = {}

    times: list[float] = []
    states: list[np.ndarray] = []
    row_phase: list[int] = []
    phase_params: list[np.ndarray] = []
    events: list[dict] = []

    t = 0.0
    y = problem.initial_state() if initial_state is None else np.array(initial_state, dtype=float)
    cell_t = y[m.cell_temperature_index(problem.n_rc)]
    switches = _switches(problem)
    controls = {event: switch.initially_on(cell_t) for event, switch in switches.items()}
    stop_reason = "end_of_profile"
    status, message = "ok", ""
    segments_completed = 0
    for seg_index, segment in enumerate(problem.segments):
        duration = segment.duration if math.isfinite(segment.duration) else cccv_cap(problem, segment)
        t_seg_end = t + duration
        phases = _phases_of(segment)
        k = 0
        fired: int | None = None
        ended_by_time = False
        while True:
            phase = phases[k]
            _configure(p, problem, segment, phase, setups, controls, switches, ambient_table)
            p[m.H_TIME] = t
            code = kernels.phase_start(y, START_PROBE, IMPOSED_VOLTAGE_SLACK, t_seg_end - t, REACH_FACTOR)
            phase_params.append(p.copy())
            phase_id = len(phase_params) - 1
            times.append(t)
            states.append(y)
            row_phase.append(phase_id)
            fired = code if code >= 0 else None
            if fired is None:
                if t_seg_end - t <= MIN_PHASE:
                    break
                outputs = _output_times(t, t_seg_end, options.output_interval)
                find_roots = code == -1
                outcome = backend.integrate(t, y, t_seg_end, outputs, find_roots)
                if not find_roots and outcome.status == "end" and not kernels.all_positive(outcome.states[-1]):
                    outcome = backend.integrate(t, y, t_seg_end, outputs, True)
                times.extend(outcome.times)
                states.extend(outcome.states)
                row_phase.extend([phase_id] * len(outcome.times))
                if outcome.times:
                    t, y = outcome.times[-1], outcome.states[-1]
                if outcome.status == "error":
                    status, message, stop_reason = "failed", outcome.message, "solver_error"
                    break
                if outcome.status == "end":
                    ended_by_time = True
                    break
                fired = m.fired_event(kernels.event_values(y), p)
            event = {"time_s": t, "event": m.EVENT_NAMES[fired], "segment": seg_index, "origin": segment.origin}
            events.append(event)
            if fired in controls:
                controls[fired] = not controls[fired]
                event["state"] = "on" if controls[fired] else "off"
                continue  # the same phase goes on with the thermostat switched
            if fired in STOP_EVENTS:
                stop_reason = STOP_EVENTS[fired]
                break
            if fired == m.EV_CV_SWITCH:
                k += 1
                continue
            break  # a cutoff or an end condition ends the segment
        if status == "failed" or stop_reason != "end_of_profile":
            break
        segments_completed += 1
        if ended_by_time and not math.isfinite(segment.duration):
            events.append({"time_s": t, "event": "cccv_cap", "segment": seg_index, "origin": segment.origin})

    return Trajectory(
        times=np.asarray(times), states=np.asarray(states), phase_params=np.asarray(phase_params),
        phase_index=np.asarray(row_phase, dtype=np.int64), stop_reason=stop_reason, status=status, message=message,
        events=events, statistics=backend.statistics(), wall_time=_time.perf_counter() - started,
        segments_completed=segments_completed, soak=soak,
    )
