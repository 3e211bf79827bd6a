"""Solver back ends: one smooth phase at a time, stopping at a root (registry :data:`BACKENDS`).

``cvode``
    SUNDIALS CVODE, BDF with Newton iteration and a dense, diagonal or banded
    Newton matrix or none (Krylov), through scikits.odes (Hindmarsh et al., ACM
    TOMS 31 (2005) 363).
``scipy``
    ``scipy.integrate.solve_ivp`` (LSODA by default) with its event location.

A back end knows the integrator and nothing of missions: the driver
(:mod:`thermoelec.engine.driver`) hands it one phase at a time, with the phase
already written into the kernels' parameter vector. This module imports nothing
of the engine but the events, the layout, the kernels (:class:`~thermoelec.engine.model.Kernels`)
and the options; it must not import the mission plan, the problem or the drivers.
scikits.odes and scipy are imported inside the back ends, when first used.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol

import numpy as np

from thermoelec.engine.events import N_EVENTS
from thermoelec.engine.layout import H_ACTIVE, H_CELLS, H_TIME
from thermoelec.engine.model import Kernels
from thermoelec.engine.options import SolverOptions

__all__ = ["BACKENDS", "DIAGONAL_CONTRACTION", "Backend", "CvodeBackend", "PhaseOutcome", "ScipyBackend"]

#: The CVODE back end solves a phase's implicit steps with the diagonal of the Jacobian
#: alone when Newton's iteration with it contracts at least this fast for the longest
#: step the phase allows (:func:`thermoelec.engine.model.diagonal_newton_contraction`); a
#: tightly coupled or stiff network (a small sink on a large conductance) and long
#: phases get the full dense Jacobian.
DIAGONAL_CONTRACTION = 0.2


@dataclass
class PhaseOutcome:
    """What a back end returns for one phase.

    Attributes
    ----------
    times : list of float
        Times of the reported rows: the output times reached, then the root or the
        last time reached before a failure [s].
    states : list of float64 array, shape (n_states,)
        The state at each of those times (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    status : str
        ``"end"`` (the phase ran to its end), ``"root"`` (it stopped at a root,
        the last row) or ``"error"``.
    message : str
        The solver's message for an error, else empty.
    """

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
        reach zero in the phase, and the back end may skip root finding. The phase
        (demand, active root functions) is already written into the kernels' parameter
        vector; a back end never raises for a solver failure, it returns it.

        Parameters
        ----------
        t0 : float
            Time of the phase start [s].
        y0 : float64 array, shape (n_states,)
            State at ``t0`` (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        t_end : float
            Time of the phase end, finite [s].
        outputs : list of float
            Report times in ``(t0, t_end]``, increasing, the last one ``t_end`` [s].
        find_roots : bool
            Locate the active root functions; False lets the back end skip them [-].

        Returns
        -------
        PhaseOutcome
            Rows up to the phase end or the root: times [s], states [-, V, K, J, C],
            and the status ``"end"``, ``"root"`` or ``"error"``.
        """
        ...

    def statistics(self) -> dict[str, float]:
        """Solver counters summed over all phases.

        Returns
        -------
        dict of str to float
            Counter name to count (steps, right-hand-side calls, phases, ...) [-].
        """
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
    """CVODE (BDF, Newton; dense, diagonal, banded or Krylov linear solves) through scikits.odes 2.7, per phase.

    CVODE integrates the states with each RC voltage taken relative to its exact
    zero-order-hold response from the phase start (:func:`thermoelec.engine.model.rc_base_setup`),
    an exact change of variables: the states handed back are the usual ones.

    scikits.odes stores the stop time in single precision, so ``tstop`` is set to
    the first float32 at or after the phase end and the state at the exact end
    is taken from CVODE's interpolant (``step(t_end)`` in normal mode); the step
    can overshoot the end by at most one float32 ulp with the phase's own
    right-hand side, which the interpolant does not see.

    Parameters
    ----------
    kernels : Kernels
        The kernels over the scenario's parameter vector [SI, unit per slot].
    options : SolverOptions
        Tolerances [-, and per state -, V, K, J, C], step limit [-],
        first step [s] (a number: the driver resolves ``"auto"``) and Newton matrix.
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks of the state vector: 1 for a lumped pack [-].
    bandwidth : int
        Half-bandwidth of the band Newton matrix (a resolved pack's cell couplings,
        :func:`thermoelec.engine.problem.jacobian_bandwidth`) [-].

    References
    ----------
    A. C. Hindmarsh et al., "SUNDIALS: Suite of nonlinear and differential/algebraic
    equation solvers", ACM TOMS 31 (2005) 363.
    """

    name = "cvode"

    def __init__(self, kernels: Kernels, options: SolverOptions, n_rc: int, n_cells: int = 1, bandwidth: int = 0):
        self.kernels = kernels
        self.options = options
        self.resolved = bool(kernels.p[H_CELLS] != 0.0)
        self.bandwidth = bandwidth
        self._common = dict(old_api=False, lmm_type="BDF", nonlinsolver="newton", rtol=options.rtol,
                            atol=options.atol_vector(n_rc, n_cells), max_steps=options.max_steps,
                            first_step_size=float(options.first_step))
        # Instances of the same integrator, made when first needed: with or without the
        # root functions (phases where no root function can reach zero, see
        # integrate_problem), and for each Newton matrix used.
        self._solvers: dict[tuple[bool, str], object] = {}
        self._started: set[tuple[bool, str]] = set()
        self._stats: dict[str, float] = {"NumPhasesWithRoots": 0, "NumPhasesWithoutRoots": 0,
                                         "NumPhasesDiagonal": 0, "NumPhasesDense": 0}
        if self.resolved:
            self._stats.update(NumPhasesKrylov=0, NumPhasesBand=0)

    def _linear(self, linear: str) -> dict:
        """scikits.odes options of a Newton matrix."""
        if linear == "diagonal":
            return {"linsolver": "diag"}
        if linear == "band":
            return {"linsolver": "band", "lband": self.bandwidth, "uband": self.bandwidth}
        if linear == "krylov":
            return {"linsolver": "spgmr"}
        return {"linsolver": "dense", "jacfn": self.kernels.cvode_jacobian}

    def _solver(self, find_roots: bool, linear: str):
        key = (find_roots, linear)
        solver = self._solvers.get(key)
        if solver is None:
            # imported here: scipy runs need no SUNDIALS. The integrator class itself, not
            # scikits.odes.ode("cvode", ...), whose registry imports every integrator it wraps
            # (dopri5 with scipy.integrate: 0.4 s of start-up a run never uses).
            from scikits.odes.sundials.cvode import CVODE

            roots = {"rootfn": self.kernels.cvode_roots, "nr_rootfns": N_EVENTS} if find_roots else {}
            solver = self._solvers[key] = CVODE(self.kernels.cvode_rhs, **self._common, **self._linear(linear),
                                                **roots)
        return solver

    def _accumulate(self, solver) -> None:
        info = solver.get_info()
        stats = self._stats
        for key in ("NumSteps", "NumRhsEvals", "NumLinSolvSetups", "NumErrTestFails"):
            stats[key] = stats.get(key, 0) + info[key]

    def statistics(self) -> dict[str, float]:
        """CVODE's counters summed over all phases, and how the phases were solved.

        Returns
        -------
        dict of str to float
            ``NumSteps``, ``NumRhsEvals``, ``NumLinSolvSetups``, ``NumErrTestFails``
            (CVODE's own), ``NumPhasesWithRoots`` / ``NumPhasesWithoutRoots`` and
            ``NumPhasesDiagonal`` / ``NumPhasesDense`` (with a resolved pack, or a forced choice,
            ``NumPhasesKrylov`` / ``NumPhasesBand`` too; a repeated phase counts again) [-].
        """
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
        """Integrate one phase with CVODE; see :meth:`Backend.integrate`.

        The RC base is set at ``(t0, y0)`` and CVODE integrates the shifted state. With
        ``linear_solver = "auto"`` and a lumped pack the same kernel call bounds the
        contraction of the diagonal Newton iteration for a step as long as the phase
        (:func:`thermoelec.engine.model.diagonal_newton_contraction`); at most
        :data:`DIAGONAL_CONTRACTION` the phase takes the diagonal Newton matrix, and
        should it fail there, the phase is integrated again with the dense one. A
        resolved pack takes Krylov (GMRES) steps, and the dense matrix for a phase they failed.

        Parameters
        ----------
        t0 : float
            Time of the phase start [s].
        y0 : float64 array, shape (n_states,)
            State at ``t0`` (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        t_end : float
            Time of the phase end, finite [s].
        outputs : list of float
            Report times in ``(t0, t_end]``, increasing, the last one ``t_end`` [s].
        find_roots : bool
            Locate the active root functions; False uses a CVODE instance without them [-].

        Returns
        -------
        PhaseOutcome
            Rows up to the phase end or the root: times [s], states [-, V, K, J, C]
            (unshifted), and the status ``"end"``, ``"root"`` or ``"error"``.

        References
        ----------
        A. C. Hindmarsh et al., "SUNDIALS: Suite of nonlinear and differential/algebraic
        equation solvers", ACM TOMS 31 (2005) 363.
        """
        choice = self.options.linear_solver
        if self.resolved and choice == "auto":
            # a resolved pack: Krylov (the diagonal's bound would need a full Jacobian), dense should it fail
            w0, _ = self.kernels.shift_from(t0, y0, 0.0)
            outcome = self._integrate(t0, w0, t_end, outputs, find_roots, "krylov")
            if outcome.status == "error":
                outcome = self._integrate(t0, w0, t_end, outputs, find_roots, "dense")
            return outcome
        # the shift, and the contraction bound for the longest step the phase allows, in one kernel call
        w0, contraction = self.kernels.shift_from(t0, y0, t_end - t0 if choice == "auto" else 0.0)
        linear = ("diagonal" if contraction <= DIAGONAL_CONTRACTION else "dense") if choice == "auto" else choice
        outcome = self._integrate(t0, w0, t_end, outputs, find_roots, linear)
        if outcome.status == "error" and linear == "diagonal" and choice == "auto":
            outcome = self._integrate(t0, w0, t_end, outputs, find_roots, "dense")
        return outcome

    def _integrate(self, t0: float, w0: np.ndarray, t_end: float, outputs: list[float],
                   find_roots: bool, linear: str) -> PhaseOutcome:
        """One phase from the shifted state ``w0`` (the base is set by :meth:`integrate`)."""
        key = (find_roots, linear)
        solver = self._solver(find_roots, linear)
        self._stats["NumPhasesWithRoots" if find_roots else "NumPhasesWithoutRoots"] += 1
        counter = f"NumPhases{linear.capitalize()}"
        self._stats[counter] = self._stats.get(counter, 0) + 1
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
                    _raise_interrupt(self.kernels.error)
                    return PhaseOutcome(times, states, "error", f"CVODE: {exc}")
                flag = int(out.flag)
                if self.kernels.error is not None:
                    _raise_interrupt(self.kernels.error)
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


def _raise_interrupt(error: BaseException | None) -> None:
    """Raise what a callback kept if it was no failure but an interrupt (Ctrl-C, SIGTERM): it ends the run."""
    if error is not None and not isinstance(error, Exception):
        raise error


class ScipyBackend:
    """``scipy.integrate.solve_ivp`` restarted per phase, events as terminal functions.

    Each root function is a terminal event that fires falling through zero
    (``direction = -1``); only the active ones are passed. The implicit methods
    (BDF, Radau, LSODA) get the kernels' difference Jacobian.

    Parameters
    ----------
    kernels : Kernels
        The kernels over the scenario's parameter vector [SI, unit per slot].
    options : SolverOptions
        Tolerances [-, and per state -, V, K, J, C] and the ``solve_ivp`` method.
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks of the state vector: 1 for a lumped pack [-].
    bandwidth : int
        Not used (the band Newton matrix of the CVODE back end) [-].
    """

    name = "scipy"

    def __init__(self, kernels: Kernels, options: SolverOptions, n_rc: int, n_cells: int = 1, bandwidth: int = 0):
        self.kernels = kernels
        self.options = options
        self.atol = options.atol_vector(n_rc, n_cells)
        self._stats = {"NumRhsEvals": 0, "NumJacEvals": 0, "NumLUDecomps": 0, "NumPhases": 0}
        self._events = [self._event(k) for k in range(N_EVENTS)]

    def _event(self, k: int):
        kernels = self.kernels

        def event(t: float, y: np.ndarray) -> float:
            kernels.p[H_TIME] = t  # the root functions do not read the ambient, but keep p's time true
            return kernels.event_values(y)[k]

        event.terminal = True
        event.direction = -1
        return event

    def statistics(self) -> dict[str, float]:
        """``solve_ivp``'s counters summed over all phases.

        Returns
        -------
        dict of str to float
            ``NumRhsEvals``, ``NumJacEvals``, ``NumLUDecomps`` and ``NumPhases`` [-].
        """
        return dict(self._stats)

    def integrate(self, t0: float, y0: np.ndarray, t_end: float, outputs: list[float],
                  find_roots: bool = True) -> PhaseOutcome:
        """Integrate one phase with ``solve_ivp``; see :meth:`Backend.integrate`.

        The phase stops at the earliest terminal event; the rows before it are kept and
        the root is the last row.

        Parameters
        ----------
        t0 : float
            Time of the phase start [s].
        y0 : float64 array, shape (n_states,)
            State at ``t0`` (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        t_end : float
            Time of the phase end, finite [s].
        outputs : list of float
            Report times in ``(t0, t_end]``, increasing, the last one ``t_end`` [s].
        find_roots : bool
            Not used: the active root functions are always located [-].

        Returns
        -------
        PhaseOutcome
            Rows up to the phase end or the root: times [s], states [-, V, K, J, C],
            and the status ``"end"``, ``"root"`` or ``"error"``.
        """
        from scipy.integrate import solve_ivp

        p = self.kernels.p
        active = [self._events[k] for k in range(N_EVENTS) if p[H_ACTIVE + k] != 0.0]
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

