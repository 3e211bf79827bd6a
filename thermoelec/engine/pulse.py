"""Constant-demand pulses from a rested state, many at once on the batched solver: what capability solves on.

A pulse is a mission of one segment: a constant current or power for a given
duration, from a state at rest (RC pairs relaxed), with every limit of the pack
specification and the cell's voltage limits as the root functions of the mission
plan (:func:`thermoelec.engine.mission.event_setup`; of the voltage limits the one in the
pulse's direction) and the full model running
(RC pairs charging, self-heating, thermostats). :func:`pulse_margins` integrates a
set of them with the batched Bogacki-Shampine solver
(:func:`thermoelec.engine.batch` walks the same one-segment plan) and returns for
each the *pulse margin*:

- a pulse that runs to its end: the least of its limits' root functions at the
  end, each over its scale (> 0, the distance to the nearest limit);
- a pulse stopped by a limit at ``t_e``: ``-(t_p - t_e) / t_p`` (in -1..0; -1 when
  the limit is reached at once).

The margin falls through zero at the largest demand that honours every limit
through the whole pulse, continuously where the limit that binds is met at the
pulse's end (a voltage, a temperature, the SoC: all monotonic under a constant
demand), so a bracketing root finder on the demand finds the capability
(:mod:`thermoelec.analysis.capability`). The voltage limiter of a derating does
not act in a pulse (a capability is what the pack gives inside its limits).

Only this module, the driver and the batched solver walk a mission plan; it
imports the events, the layout, the kernels, the batched solver, the mission
plan and the problem.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from thermoelec import jit
from thermoelec.engine import batch
from thermoelec.engine import layout as L
from thermoelec.engine import model as m
from thermoelec.engine.events import ACTION_STOP, EV_VOLTAGE_MAX, EV_VOLTAGE_MIN, EVENT_ACTION, EVENT_SCALES, N_EVENTS
from thermoelec.engine.mission import KIND_DEMAND, event_setup, initial_controls, thermostat_switches
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Problem, pack_parameters
from thermoelec.engine.profile import Segment
from thermoelec.physics.loads import LOAD_MODES

__all__ = ["PULSE_KINDS", "PulseKind", "PulseSet", "prepare_pulses", "pulse_margins", "run_pulses"]


@dataclass(frozen=True)
class PulseKind:
    """One kind of pulse: a load mode and a direction.

    Attributes
    ----------
    name : str
        Its name in the capability's outputs (``discharge_power``).
    mode : str
        The load mode (:data:`thermoelec.physics.loads.LOAD_MODES`): ``current`` or ``power``.
    sign : float
        +1 discharges, -1 charges; the demand is ``sign`` times a magnitude.
    unit : str
        Unit of the magnitude.
    """

    name: str
    mode: str
    sign: float
    unit: str


#: The four capabilities of a pack: power and current, discharge and charge.
PULSE_KINDS: tuple[PulseKind, ...] = (
    PulseKind("discharge_power", "power", 1.0, "W"),
    PulseKind("discharge_current", "current", 1.0, "A"),
    PulseKind("charge_power", "power", -1.0, "W"),
    PulseKind("charge_current", "current", -1.0, "A"),
)

#: Stop events by code: a pulse's margin is the least of their root functions.
_STOPS = np.array([EVENT_ACTION[k] == ACTION_STOP for k in range(N_EVENTS)], dtype=np.bool_)
_SCALES = np.array(EVENT_SCALES)
#: The batched solver's running extremes before the first observation (a pulse's are not kept).
_EXTRA_START = batch._EXTRA_START
_integrate_one = batch._integrate_one
work_arrays = batch.work_arrays


@dataclass(frozen=True)
class PulseSet:
    """Pulses prepared for :func:`run_pulses`: one parameter vector per temperature, one start per state.

    Attributes
    ----------
    params : float64 array, shape (n_temperatures, len(p))
        The scenario's parameter vector at each temperature (its ambient), no derating [SI, unit per slot].
    starts : float64 array, shape (n_temperatures, n_socs, n_states)
        The rested start states: every cell at the SoC, cells and sink at the temperature [-, V, K, J, C].
    setups : float64 array, shape (len(PULSE_KINDS), 2 N_EVENTS)
        The root-function set-up of each kind of pulse [-, V, K, A, W].
    modes : float64 array, shape (len(PULSE_KINDS),)
        Load-mode code of each kind [-].
    signs : float64 array, shape (len(PULSE_KINDS),)
        Direction of each kind [-].
    switches : float64 array, shape (3, 3)
        The thermostats (:func:`thermoelec.engine.mission.thermostat_switches`) [-, K, K].
    controls : bool array, shape (n_temperatures, 3)
        Which thermostats start on at each temperature [-].
    atol : float64 array, shape (n_states,)
        Absolute tolerances [-, V, K, J, C].
    rtol : float
        Relative tolerance [-].
    sink_index : int
        Index of the sink temperature in the state [-].
    """

    params: np.ndarray
    starts: np.ndarray
    setups: np.ndarray
    modes: np.ndarray
    signs: np.ndarray
    switches: np.ndarray
    controls: np.ndarray
    atol: np.ndarray
    rtol: float
    sink_index: int


def prepare_pulses(problem: Problem, temperatures: np.ndarray, socs: np.ndarray, options: SolverOptions) -> PulseSet:
    """The parameter vectors, rested start states and root-function set-ups of a grid of pulses.

    The pulses start at rest: RC pairs relaxed, every cell at the SoC, the cells, the
    sink and the ambient at the temperature (a coolant keeps its inlet temperature),
    thermostats on where the temperature is past their on threshold. The BMS's
    derating is dropped: a pulse honours the limits of the pack specification and the
    voltage limits, which stop it.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].
    temperatures : float64 array, shape (n_temperatures,)
        The temperatures of the grid [K].
    socs : float64 array, shape (n_socs,)
        The SoC of the grid [-].
    options : SolverOptions
        Tolerances [-, and per state -, V, K, J, C].

    Returns
    -------
    PulseSet
        What :func:`run_pulses` integrates.
    """
    plain = replace(problem, derating=None, ambient_profile=None, soak=(), initial_coolant_temperature=None)
    p0 = pack_parameters(plain)
    params = np.tile(p0, (len(temperatures), 1))
    params[:, L.H_AMBIENT] = temperatures
    params[:, L.H_AMBIENT_TABLE] = 0.0
    soc_index, temperature_index = L.cell_state_indices(plain.n_rc, plain.n_cells)
    sink = L.sink_temperature_index(plain.n_rc, plain.n_cells)
    starts = np.empty((len(temperatures), len(socs), plain.n_states))
    for i, temperature in enumerate(temperatures):
        state = replace(plain, initial_cell_temperature=float(temperature), initial_sink_temperature=float(temperature),
                        ambient_temperature=float(temperature)).initial_state()
        for j, soc in enumerate(socs):
            starts[i, j] = state
            starts[i, j, soc_index] = soc
            starts[i, j, temperature_index] = temperature
            starts[i, j, sink] = temperature
    setups, modes, signs = [], [], []
    for kind in PULSE_KINDS:
        mode = LOAD_MODES[kind.mode].code
        setup = event_setup(plain, Segment(kind.mode, kind.sign, 1.0), mode, kind.sign, KIND_DEMAND)
        # a pulse moves away from the voltage limit of the other direction: a rested start beyond it (a cold full
        # cell's OCV above voltage_max) is the start's, not the pulse's
        setup[EV_VOLTAGE_MAX if kind.sign > 0 else EV_VOLTAGE_MIN] = 0.0
        setups.append(setup)
        modes.append(mode)
        signs.append(kind.sign)
    switches = thermostat_switches(plain)
    controls = np.array([initial_controls(switches, float(t)) for t in temperatures]).reshape(len(temperatures), 3)
    return PulseSet(params, starts, np.array(setups), np.array(modes, float), np.array(signs), switches, controls,
                    options.atol_vector(plain.n_rc, plain.n_cells), float(options.rtol), sink)


@jit.njit(cache=True, error_model="numpy")
def pulse_margins(demands, temperature_index, soc_index, kind_index, durations, params, starts, setups, modes,
                  switches, controls, rtol, atol, sink_index, margins, events, end_power):
    """The margin of each pulse, the event that stopped it and the power at its end (one compiled loop).

    Each pulse is a one-segment mission plan walked by the batched solver's
    :func:`thermoelec.engine.batch._integrate_one` (the kernels of both pack models,
    the events located to ``batch.EVENT_TIME_TOLERANCE``).

    Parameters
    ----------
    demands : float64 array, shape (m,)
        The signed demand of each pulse in its mode's unit [A or W].
    temperature_index : int64 array, shape (m,)
        The temperature of each pulse (a row of ``params``) [-].
    soc_index : int64 array, shape (m,)
        Its SoC (a column of ``starts``) [-].
    kind_index : int64 array, shape (m,)
        Its kind (a row of ``setups``, an entry of ``modes``) [-].
    durations : float64 array, shape (m,)
        Its duration [s], > 0.
    params : float64 array, shape (n_temperatures, len(p))
        Parameter vectors (:attr:`PulseSet.params`) [SI, unit per slot].
    starts : float64 array, shape (n_temperatures, n_socs, n_states)
        Rested start states [-, V, K, J, C].
    setups : float64 array, shape (n_kinds, 2 N_EVENTS)
        Root-function set-ups of the kinds [-, V, K, A, W].
    modes : float64 array, shape (n_kinds,)
        Load-mode codes of the kinds [-].
    switches : float64 array, shape (3, 3)
        The thermostats [-, K, K].
    controls : bool array, shape (n_temperatures, 3)
        Thermostats on at the start [-].
    rtol : float
        Relative tolerance [-].
    atol : float64 array, shape (n_states,)
        Absolute tolerances [-, V, K, J, C].
    sink_index : int
        Index of the sink temperature in the state [-].
    margins : float64 array, shape (m,)
        Written: the pulse margin of each pulse (NaN where the solver gave up) [-].
    events : int64 array, shape (m,)
        Written: the event that stopped it, -1 where it ran to its end [-].
    end_power : float64 array, shape (m,)
        Written: the power to the load at its end (or at its stop) [W].
    """
    n_phases = np.ones(1, dtype=np.int64)
    setup_index = np.zeros((1, 2), dtype=np.int64)
    ambients = np.full(1, np.nan)
    g = np.empty(N_EVENTS)
    alg = np.empty(L.N_ALGEBRAICS)
    stages, vectors, roots, step_alg, active = work_arrays(starts.shape[2])
    no_offsets = np.zeros(1, dtype=np.int64)  # the plain right-hand side's table offsets: a pulse takes the full one
    for i in range(demands.size):
        p = params[temperature_index[i]].copy()
        y = starts[temperature_index[i], soc_index[i]].copy()
        k = kind_index[i]
        plan_modes = np.zeros((1, 2))
        plan_modes[0, 0] = modes[k]
        plan_values = np.zeros((1, 2))
        plan_values[0, 0] = demands[i]
        duration = np.full(1, durations[i])
        extra = np.empty(_EXTRA_START.size)
        extra[:] = _EXTRA_START
        t0 = y[int(p[L.H_NCELLS]) * (2 + int(p[L.H_NRC])) - 1]  # a cell's temperature (all start at one)
        status, event, t_stop, _ = _integrate_one(
            p, no_offsets, n_phases, plan_modes, plan_values, duration, ambients, setups[k:k + 1], setup_index,
            switches, controls[temperature_index[i]].copy(), y, rtol, atol, 0.0, 298.15, 0.0, extra, t0, t0,
            sink_index, False, stages, vectors, roots, step_alg, active)
        p[L.H_TIME] = t_stop
        m.roots(y, g, p, alg, np.empty(y.size))
        end_power[i] = alg[L.A_VOLTAGE] * alg[L.A_CURRENT]
        events[i] = event
        if status == 2:
            margins[i] = np.nan
        elif status == 1:
            margins[i] = -(durations[i] - t_stop) / durations[i]
        else:
            least = np.inf
            for e in range(N_EVENTS):
                if p[L.H_ACTIVE + e] != 0.0 and _STOPS[e]:
                    least = min(least, g[e] / _SCALES[e])
            margins[i] = least


def run_pulses(pulses: PulseSet, demands: np.ndarray, temperature_index: np.ndarray, soc_index: np.ndarray,
               kind_index: np.ndarray, durations: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Integrate pulses of a :class:`PulseSet` (:func:`pulse_margins`); the demand is a magnitude, the kind its sign.

    Parameters
    ----------
    pulses : PulseSet
        The prepared grid.
    demands : float array, shape (m,)
        Magnitude of each pulse's demand [A or W], >= 0.
    temperature_index, soc_index, kind_index : int arrays, shape (m,)
        Where each pulse sits in the grid and which kind it is [-].
    durations : float array, shape (m,)
        Duration of each pulse [s].

    Returns
    -------
    margins : float64 array, shape (m,)
        The pulse margins [-] (> 0 inside every limit to the end, <= 0 stopped, NaN solver gave up).
    events : int64 array, shape (m,)
        The event that stopped each pulse, -1 for none [-].
    end_power : float64 array, shape (m,)
        Power to the load at each pulse's end or stop [W].
    """
    kind_index = np.ascontiguousarray(kind_index, dtype=np.int64)
    signed = np.ascontiguousarray(demands, dtype=float) * pulses.signs[kind_index]
    n = signed.size
    margins, events, end_power = np.empty(n), np.empty(n, dtype=np.int64), np.empty(n)
    pulse_margins(signed, np.ascontiguousarray(temperature_index, dtype=np.int64),
                  np.ascontiguousarray(soc_index, dtype=np.int64), kind_index,
                  np.ascontiguousarray(durations, dtype=float), pulses.params, pulses.starts, pulses.setups,
                  pulses.modes, pulses.switches, pulses.controls, pulses.rtol, pulses.atol, pulses.sink_index,
                  margins, events, end_power)
    return margins, events, end_power
