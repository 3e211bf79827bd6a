"""Batched solving for sweeps: many scenarios in one compiled loop, an embedded Runge-Kutta pair per scenario.

Short segments make CVODE pay its restart (order 1, small first steps, a new
Jacobian) at every breakpoint. An explicit one-step method pays nothing to
restart: it keeps its step size across a breakpoint and only shortens the step
that would cross it. So scenarios are integrated here with the Bogacki-Shampine
3(2) pair (P. Bogacki, L. F. Shampine, Appl. Math. Lett. 2 (1989) 321; the pair
of MATLAB's ode23 and scipy's RK23), with per-scenario error control on the
engine's own right-hand side kernel (``model.evaluate``, so the physics is the
engine's) and the same per-state tolerances, each step ending at or before the
next segment boundary.

Why a third-order pair: on a 1 Hz profile every segment is one step (the
states are slow against 1 s), and every segment starts with a new first stage
because the demand jumped, so its cost is its number of stages. This pair has
four (the last is the next step's first: first same as last), as many as
classical RK4; the Dormand-Prince 5(4) pair has seven. Its error estimate keeps
each scenario within the tolerance asked (the test against solo CVODE at rtol
1e-10 shows it).

Events: the engine's root functions (``model.roots``) are checked after every
step; when one turns non-positive, the crossing is located by bisection on the
step length (each trial a fresh Runge-Kutta step from the step's start) to
``EVENT_TIME_TOLERANCE``, and the event acts there as in the engine's driver: a
limit stops the scenario, the CC->CV switch starts the CV phase, a cutoff or an
end condition ends the segment, a thermostat switches. A limit already reached
at a phase start is caught by the engine's ``model.start_check``.
A scenario whose steps collapse (a stiff fast RC pair or a tiny sink against a
large conductance) is handed back for a solo CVODE run (status ``fallback``).

Scope: every segment kind (current, power, resistance, voltage, rest, CC-CV)
with its end conditions, thermostats (fan, heater, pump), the ambient profile
and soaks (run first, as in the engine's driver).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numba
import numpy as np

from thermoelec.analysis.results import energy_totals, round_trip_efficiency
from thermoelec.engine import model as m
from thermoelec.engine.model import Problem
from thermoelec.engine.solve import (
    IMPOSED_VOLTAGE_SLACK,
    MIN_PHASE,
    START_PROBE,
    STOP_EVENTS,
    SolverOptions,
    _event_setup,
    _phases_of,
    _switches,
    cccv_cap,
)
from thermoelec.physics.cell import arrhenius_ageing_rate

__all__ = ["BatchOutcome", "batch_metrics", "solve_batch"]

#: Event times are located to this many seconds.
EVENT_TIME_TOLERANCE = 1e-7
#: Steps allowed in one segment before the scenario goes to CVODE instead.
MAX_STEPS_PER_SEGMENT = 2000

# Bogacki-Shampine 3(2) tableau (Appl. Math. Lett. 2 (1989) 321, Eq. 4): the third-order
# solution is the fourth stage's argument; the error is the third- minus the second-order one
_A21 = 1 / 2
_A32 = 3 / 4
_B1, _B2, _B3 = 2 / 9, 1 / 3, 4 / 9
_E1, _E2, _E3, _E4 = 2 / 9 - 7 / 24, 1 / 3 - 1 / 4, 4 / 9 - 1 / 3, -1 / 8
#: Exponent of the step-size update: the embedded (second-order) error is O(h^3).
_ORDER_EXPONENT = -1.0 / 3.0

# per-scenario running extremes and integrals written by the kernel (what the sweep metrics need)
X_TC_MAX, X_TS_MAX, X_V_MIN, X_VCELL_MIN, X_I_ABS, X_ARRHENIUS, N_EXTRA = 0, 1, 2, 3, 4, 5, 6
#: Their values before the first observation.
_EXTRA_START = np.array([-np.inf, -np.inf, np.inf, np.inf, 0.0, 0.0])


@numba.njit(cache=True, error_model="numpy")
def _rk_step(y, p, t, h, k, tmp, alg, out, err):
    """One Bogacki-Shampine step of size h from y at time t, with ``k[0] = f(t, y)`` given.

    The third-order solution goes to ``out`` and the error estimate to ``err``.
    The last stage is evaluated at ``out`` itself (first same as last), so
    afterwards ``k[3] = f(out)`` and ``alg`` holds the algebraic outputs at ``out``.
    Each stage writes its own time into ``p`` (the ambient profile reads it).
    """
    n = y.size
    for i in range(n):
        tmp[i] = y[i] + h * _A21 * k[0, i]
    p[m.H_TIME] = t + 0.5 * h
    m.evaluate(tmp, p, k[1], alg)
    for i in range(n):
        tmp[i] = y[i] + h * _A32 * k[1, i]
    p[m.H_TIME] = t + 0.75 * h
    m.evaluate(tmp, p, k[2], alg)
    for i in range(n):
        out[i] = y[i] + h * (_B1 * k[0, i] + _B2 * k[1, i] + _B3 * k[2, i])
    p[m.H_TIME] = t + h
    m.evaluate(out, p, k[3], alg)
    for i in range(n):
        err[i] = h * (_E1 * k[0, i] + _E2 * k[1, i] + _E3 * k[2, i] + _E4 * k[3, i])


@numba.njit(cache=True, error_model="numpy")
def _error_norm(y, out, err, rtol, atol):
    total = 0.0
    for i in range(y.size):
        scale = atol[i] + rtol * max(abs(y[i]), abs(out[i]))
        total += (err[i] / scale) ** 2
    return np.sqrt(total / y.size)


@numba.njit(cache=True, error_model="numpy")
def _observe(y, alg, extra, tc_index, ts_index):
    """Running extremes from the state and its algebraic outputs."""
    extra[X_TC_MAX] = max(extra[X_TC_MAX], y[tc_index])
    extra[X_TS_MAX] = max(extra[X_TS_MAX], y[ts_index])
    extra[X_V_MIN] = min(extra[X_V_MIN], alg[m.A_VOLTAGE])
    extra[X_VCELL_MIN] = min(extra[X_VCELL_MIN], alg[m.A_CELL_VOLTAGE])
    extra[X_I_ABS] = max(extra[X_I_ABS], abs(alg[m.A_CURRENT]))


@numba.njit(cache=True, error_model="numpy")
def _any_fired(g, p):
    for e in range(m.N_EVENTS):
        if p[m.H_ACTIVE + e] != 0.0 and g[e] <= 0.0:
            return True
    return False


@numba.njit(cache=True, error_model="numpy")
def _near_zero(g, p):
    """True when an active root function is within its tolerance of zero (then the full start check runs)."""
    for e in range(m.N_EVENTS):
        if p[m.H_ACTIVE + e] != 0.0 and g[e] <= 1e-6 * m.EVENT_SCALES[e]:
            return True
    return False


#: What an event does to the phase it fires in (kernel codes).
_ACT_STOP, _ACT_NEXT_PHASE, _ACT_END_SEGMENT, _ACT_TOGGLE = 0, 1, 2, 3
_EVENT_ACTION = np.full(m.N_EVENTS, _ACT_END_SEGMENT, dtype=np.int64)  # cutoff and end conditions
for _e in STOP_EVENTS:
    _EVENT_ACTION[_e] = _ACT_STOP
_EVENT_ACTION[m.EV_CV_SWITCH] = _ACT_NEXT_PHASE
for _e in m.CONTROL_EVENTS:
    _EVENT_ACTION[_e] = _ACT_TOGGLE
#: Events a scenario may fire at one instant before it is handed to CVODE (a chattering thermostat).
MAX_EVENTS_PER_SEGMENT = 1000


@numba.njit(cache=True, error_model="numpy")
def _configure(p, seg, phase, modes, values, ambients, setups, setup_index, default_ambient, default_table,
               switches, controls):
    """Write one phase's demand, ambient, root-function set-up and thermostat states into ``p``
    (as ``solve._configure``)."""
    p[m.H_MODE] = modes[seg, phase]
    p[m.H_VALUE] = values[seg, phase]
    own = not np.isnan(ambients[seg])  # a segment with its own ambient overrides the ambient profile
    p[m.H_AMBIENT] = ambients[seg] if own else default_ambient
    p[m.H_AMBIENT_TABLE] = 0.0 if own else default_table
    p[m.H_ACTIVE:m.H_THRESHOLD + m.N_EVENTS] = setups[setup_index[seg, phase]]
    for c in range(switches.shape[0]):
        if switches[c, 0] != 0.0:
            event = m.EV_FAN + c
            p[m.CONTROL_FLAG_OF[c]] = 1.0 if controls[c] else 0.0
            p[m.H_ACTIVE + event] = 1.0
            p[m.H_THRESHOLD + event] = switches[c, 2] if controls[c] else switches[c, 1]


@numba.njit(cache=True, error_model="numpy")
def _integrate_one(p, n_phases, modes, values, durations, ambients, setups, setup_index, switches, controls, y,
                   rtol, atol, ea, t_ref, extra, tc_index, ts_index):
    """One scenario through its segments and their phases (a CC-CV segment has two).

    Events act as in the engine's driver (``solve.integrate_problem``): a limit
    stops the mission, the CC->CV switch starts the CV phase, a cutoff or an end
    condition ends the segment, a thermostat toggles and the phase goes on.
    Returns (status, event, time): status 0 end of profile, 1 stopped, 2 fallback.
    """
    n = y.size
    k = np.empty((4, n))
    tmp, out, err, trial, scratch = np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n)
    g, g_ahead = np.empty(m.N_EVENTS), np.empty(m.N_EVENTS)
    alg = np.empty(m.N_ALGEBRAICS)
    default_ambient = p[m.H_AMBIENT]
    default_table = p[m.H_AMBIENT_TABLE]
    h = 0.05
    rate_prev = arrhenius_ageing_rate(y[tc_index], ea, t_ref)
    t = 0.0
    for seg in range(durations.size):
        t_end = t + durations[seg]
        phase = 0
        events = 0
        while True:
            _configure(p, seg, phase, modes, values, ambients, setups, setup_index, default_ambient, default_table,
                       switches, controls)
            p[m.H_TIME] = t
            m.evaluate(y, p, k[0], alg)  # the demand changed: a new first stage
            m.roots_from(y, g, p, alg)
            code = -1
            # the engine's full check where a limit is reached or near, and always with the
            # terminal voltage imposed (the cell limits are checked only there)
            if _near_zero(g, p) or p[m.H_MODE] == m.MODE_VOLTAGE:
                code = m.start_check(y, p, alg, scratch, g, g_ahead, START_PROBE, IMPOSED_VOLTAGE_SLACK)
                p[m.H_TIME] = t
                m.evaluate(y, p, k[0], alg)
            _observe(y, alg, extra, tc_index, ts_index)
            if code < 0:
                if t_end - t <= MIN_PHASE:
                    break
                # steps to the phase end or to the first event (kept inline: a call per segment
                # with a dozen arrays costs a fifth of the batch in reference counting)
                steps = 0
                while t < t_end - 1e-12 * max(1.0, t_end):
                    steps += 1
                    if steps > MAX_STEPS_PER_SEGMENT or h < 1e-9:
                        return 2, -1, t
                    h_try = min(h, t_end - t)
                    _rk_step(y, p, t, h_try, k, tmp, alg, out, err)
                    norm = _error_norm(y, out, err, rtol, atol)
                    if norm > 1.0 or not np.isfinite(norm):
                        h = h_try * max(0.2, 0.9 * norm ** _ORDER_EXPONENT) if np.isfinite(norm) else 0.25 * h_try
                        continue
                    m.roots_from(out, g, p, alg)
                    if _any_fired(g, p):
                        low, high = 0.0, h_try  # a root lies in (low, high]
                        while high - low > EVENT_TIME_TOLERANCE:
                            mid = 0.5 * (low + high)
                            _rk_step(y, p, t, mid, k, tmp, alg, trial, err)
                            m.roots_from(trial, g, p, alg)
                            if _any_fired(g, p):
                                high = mid
                            else:
                                low = mid
                        _rk_step(y, p, t, high, k, tmp, alg, trial, err)
                        m.roots_from(trial, g, p, alg)
                        code = m.fired_event(g, p)
                        rate_new = arrhenius_ageing_rate(trial[tc_index], ea, t_ref)
                        extra[X_ARRHENIUS] += 0.5 * (rate_prev + rate_new) * high
                        rate_prev = rate_new
                        for i in range(n):
                            y[i] = trial[i]
                        _observe(y, alg, extra, tc_index, ts_index)
                        t += high
                        break
                    rate_new = arrhenius_ageing_rate(out[tc_index], ea, t_ref)
                    extra[X_ARRHENIUS] += 0.5 * (rate_prev + rate_new) * h_try
                    rate_prev = rate_new
                    t += h_try
                    for i in range(n):
                        y[i] = out[i]
                        k[0, i] = k[3, i]  # first same as last
                    _observe(y, alg, extra, tc_index, ts_index)
                    factor = 5.0 if norm == 0.0 else min(5.0, max(0.2, 0.9 * norm ** _ORDER_EXPONENT))
                    if h_try >= h:  # a step cut short by the boundary says nothing about the next one
                        h = h_try * factor
                    else:
                        h = max(h, h_try * factor)
                if code < 0:
                    t = t_end
                    break
            events += 1
            if events > MAX_EVENTS_PER_SEGMENT:
                return 2, -1, t
            action = _EVENT_ACTION[code]
            if action == _ACT_STOP:
                return 1, code, t
            if action == _ACT_TOGGLE:
                controls[code - m.EV_FAN] = not controls[code - m.EV_FAN]
            elif action == _ACT_NEXT_PHASE and phase + 1 < n_phases[seg]:
                phase += 1
            else:
                break  # a cutoff or an end condition ends the segment
    return 0, -1, t


@numba.njit(cache=True, error_model="numpy")
def _integrate_many(params, profile, n_phases, modes, values, durations, ambients, setups, setup_index, switches,
                    controls, y0, rtol, atol, ea, t_ref, tc_index, ts_index):
    """Every scenario of a batch; scenario ``s`` runs the segments of profile ``profile[s]``."""
    n_scen = params.shape[0]
    states = y0.copy()
    extras = np.empty((n_scen, N_EXTRA))
    status = np.empty(n_scen, dtype=np.int64)
    events = np.empty(n_scen, dtype=np.int64)
    times = np.empty(n_scen)
    for s in range(n_scen):
        extras[s, :] = _EXTRA_START
        p = params[s].copy()
        y = states[s]
        j = profile[s]
        st, ev, tt = _integrate_one(p, n_phases[j], modes[j], values[j], durations[j], ambients[j], setups[j],
                                    setup_index[j], switches[s], controls[s].copy(), y, rtol, atol[s], ea[s],
                                    t_ref[s], extras[s], tc_index, ts_index)
        status[s], events[s], times[s] = st, ev, tt
    return states, extras, status, events, times


@dataclass
class BatchOutcome:
    """Per scenario: status (``ok`` / ``fallback``), stop reason, end time and state, extremes."""

    status: list[str]
    stop_reason: list[str]
    duration: np.ndarray
    states: np.ndarray
    extras: np.ndarray
    initial_states: np.ndarray  # where each mission started (after its soak)


def _segment_arrays(problem: Problem) -> tuple[np.ndarray, ...]:
    """Phases, demands, durations, ambients and event set-ups of every segment (cached: sweeps share profiles)."""
    cell = problem.cell
    # the scenarios of a sweep share their segment tuple (scenario._profile_segments): it is
    # recognised by identity, and kept with the arrays so that its identity stays its own;
    # the rest is what the event set-ups and the CC-CV cap read besides the segments
    key = (id(problem.segments), cell.voltage_min, cell.voltage_max, cell.capacity, problem.pack.series,
           problem.pack.parallel, problem.limits.cell_temperature_max)
    hit = _SEGMENT_CACHE.get(key)
    if hit is None or hit[1] is not problem.segments:
        if len(_SEGMENT_CACHE) >= 64:
            _SEGMENT_CACHE.clear()
        hit = _SEGMENT_CACHE[key] = (_build_segment_arrays(problem), problem.segments)
    return hit[0]


_SEGMENT_CACHE: dict[tuple, tuple] = {}


def _build_segment_arrays(problem: Problem) -> tuple[np.ndarray, ...]:
    """Per segment: its phase count, each phase's mode, demand and set-up index; duration; ambient."""
    kinds: dict[tuple, int] = {}
    blocks = []
    n_seg = len(problem.segments)
    n_phases = np.ones(n_seg, dtype=np.int64)
    modes, values = np.zeros((n_seg, 2)), np.zeros((n_seg, 2))
    index = np.zeros((n_seg, 2), dtype=np.int64)
    durations, ambients = np.empty(n_seg), np.empty(n_seg)
    for s, seg in enumerate(problem.segments):
        phases = _phases_of(seg)
        n_phases[s] = len(phases)
        for j, phase in enumerate(phases):
            # the key of solve._configure: what _event_setup reads of the segment and the phase
            key = (phase.kind, phase.mode, phase.value > 0.0, seg.cv_voltage, seg.cutoff_current,
                   seg.voltage_below, seg.voltage_above, seg.soc_below, seg.soc_above)
            if key not in kinds:
                kinds[key] = len(blocks)
                blocks.append(_event_setup(problem, seg, phase))
            modes[s, j], values[s, j], index[s, j] = phase.mode, phase.value, kinds[key]
        durations[s] = seg.duration if np.isfinite(seg.duration) else cccv_cap(problem, seg)
        ambients[s] = np.nan if seg.ambient_temperature is None else seg.ambient_temperature
    return n_phases, modes, values, durations, ambients, np.array(blocks), index


def _thermostats(problem: Problem, t_cell: float) -> tuple[np.ndarray, np.ndarray]:
    """Fan, heater and pump switches as rows ``(present, on_at, off_at)`` [-, K, K], and whether
    each starts on at the cell temperature ``t_cell`` [K] (as the engine decides)."""
    switches = np.zeros((len(m.CONTROL_EVENTS), 3))
    controls = np.zeros(len(m.CONTROL_EVENTS), dtype=np.bool_)
    for event, switch in _switches(problem).items():
        c = event - m.EV_FAN
        switches[c] = (1.0, switch.on_at, switch.off_at)
        controls[c] = switch.initially_on(t_cell)
    return switches, controls


def solve_batch(problems: list[Problem], options: SolverOptions) -> BatchOutcome:
    """Integrate problems with the same state layout (same RC count) together.

    As in the engine's driver, the soak segments of a problem run first, as a
    problem of their own (here: a batch of the soaks); its mission starts at
    t = 0 from the state they end in, with the integrals reset.
    """
    n_rc = problems[0].n_rc
    if any(p.n_rc != n_rc for p in problems):
        raise ValueError("a batch needs one state layout: the same number of RC pairs")
    y0 = np.array([p.initial_state() for p in problems])
    soaked = [i for i, p in enumerate(problems) if p.soak]
    soak_failed = set()
    if soaked:
        soaks = solve_batch([replace(problems[i], segments=problems[i].soak, soak=()) for i in soaked], options)
        for j, i in enumerate(soaked):
            if soaks.status[j] != "ok":
                soak_failed.add(i)
                continue
            y0[i] = soaks.states[j]
            y0[i, m.quadrature_index(n_rc):] = 0.0
    params_list = [m.pack_parameters(p) for p in problems]
    width = max(len(p) for p in params_list)
    params = np.zeros((len(problems), width))
    for i, p in enumerate(params_list):
        params[i, :len(p)] = p
    # the scenarios of a sweep mostly share their profile: its arrays are stacked once
    profiles: dict[int, int] = {}
    arrays = []
    which = np.empty(len(problems), dtype=np.int64)
    for i, problem in enumerate(problems):
        a = _segment_arrays(problem)
        if id(a) not in profiles:
            profiles[id(a)] = len(arrays)
            arrays.append(a)
        which[i] = profiles[id(a)]
    n_seg = max(len(a[0]) for a in arrays)
    n_kinds = max(len(a[5]) for a in arrays)

    def stack(j: int, shape: tuple, fill: Any, dtype: Any = float) -> np.ndarray:
        out = np.full((len(arrays), *shape), fill, dtype=dtype)
        for i, a in enumerate(arrays):
            out[i, :len(a[j])] = a[j]
        return out

    # padding: a one-phase segment of zero length does nothing
    n_phases = stack(0, (n_seg,), 1, np.int64)
    modes, values = stack(1, (n_seg, 2), 0.0), stack(2, (n_seg, 2), 0.0)
    durations, ambients = stack(3, (n_seg,), 0.0), stack(4, (n_seg,), np.nan)
    setups, index = stack(5, (n_kinds, 2 * m.N_EVENTS), 0.0), stack(6, (n_seg, 2), 0, np.int64)
    tc_index = m.cell_temperature_index(n_rc)
    thermostats = [_thermostats(p, y0[i, tc_index]) for i, p in enumerate(problems)]
    switches = np.array([s for s, _ in thermostats])
    controls = np.array([c for _, c in thermostats])
    atol = np.tile(options.atol_vector(n_rc), (len(problems), 1))
    ea = np.array([p.stress.activation_energy for p in problems])
    t_ref = np.array([p.stress.reference_temperature for p in problems])
    states, extras, status, events, times = _integrate_many(
        params, which, n_phases, modes, values, durations, ambients, setups, index, switches, controls, y0,
        options.rtol, atol, ea, t_ref, tc_index, m.sink_temperature_index(n_rc))
    stop = [STOP_EVENTS.get(int(e), "end_of_profile") if s == 1 else "end_of_profile"
            for s, e in zip(status, events, strict=True)]
    names = ["fallback" if s == 2 or i in soak_failed else "ok" for i, s in enumerate(status)]
    return BatchOutcome(names, stop, times, states, extras, y0)


def batch_metrics(problem: Problem, outcome: BatchOutcome, i: int) -> dict[str, Any]:
    """The sweep metrics of scenario ``i`` of a batch (as :func:`thermoelec.analysis.sweep._metrics_of` gives them)."""
    n_rc = problem.n_rc
    y, x = outcome.states[i], outcome.extras[i]
    q = y[m.quadrature_index(n_rc):]
    tc0 = outcome.initial_states[i, m.cell_temperature_index(n_rc)]
    return {
        "completed": outcome.stop_reason[i] == "end_of_profile", "duration_s": float(outcome.duration[i]),
        "cell_temperature_max_degC": x[X_TC_MAX] - 273.15, "cell_temperature_rise_K": x[X_TC_MAX] - tc0,
        "sink_temperature_max_degC": x[X_TS_MAX] - 273.15, "voltage_min_V": x[X_V_MIN],
        "current_max_A": x[X_I_ABS], **energy_totals(q), "heat_generated_Wh": q[m.Q_HEAT] / 3600.0,
        "heat_to_ambient_Wh": q[m.Q_HEAT_AMBIENT] / 3600.0, "efficiency": round_trip_efficiency(q),
        "charge_throughput_Ah": q[m.Q_THROUGHPUT] / 3600.0, "soc_end": float(y[0]),
        "voltage_margin_min_V": x[X_VCELL_MIN] - problem.cell.voltage_min,
        "temperature_margin_K": problem.limits.cell_temperature_max - x[X_TC_MAX],
        "equivalent_time_at_reference_s": x[X_ARRHENIUS],
        "status": "ok", "message": "", "stop_reason": outcome.stop_reason[i],
    }
