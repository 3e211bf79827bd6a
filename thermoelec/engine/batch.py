"""Batched solving for sweeps: many scenarios in one compiled loop, an embedded Runge-Kutta pair per scenario.

Short segments make CVODE pay its restart (order 1, small first steps, a new
Jacobian) at every breakpoint. An explicit one-step method pays nothing to
restart: it keeps its step size across a breakpoint and only shortens the step
that would cross it. So scenarios are integrated here with the Bogacki-Shampine
3(2) pair (P. Bogacki, L. F. Shampine, Appl. Math. Lett. 2 (1989) 321; scipy's
``RK23`` uses the same pair), with per-scenario error control on the
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

A batch that is a plain lumped mission (:func:`thermoelec.engine.plain.is_plain`:
no feature beyond a lumped pack under current, power or resistance demands and
rests with fixed conductances) evaluates its stages with
:func:`thermoelec.engine.plain.evaluate_plain`, compiled into the step: the same
numbers to the last bit, 1.2-1.4 times faster on the 1 Hz benchmark mission. The
phase-start evaluations after the first stay the same lean one (the outputs it
leaves alone do not change between a plain mission's phases), and so do the
running extremes that read only those outputs (:func:`_observe`'s ``lean``).

A phase whose root functions have the set-up of the phase before (a 1 Hz
profile's segments mostly share one) keeps them as they are in the parameter
vector, its active events and the inactive ones' values; and a step cut short by
the segment's end, whose every error is under half its scale, is taken without
the error norm (:func:`_clearly_within`: its size would not read it). Both leave
every number as it was; with the table offsets of
:func:`thermoelec.engine.plain.plain_offsets` they made the 1 Hz benchmark
mission 1.1 times faster against the tight floor in the same run.

Only this module and the driver walk the mission plan. It imports the events,
the layout, the kernels (:mod:`thermoelec.engine.model`), the mission plan, the
options and the problem (and physics' ageing rate and load modes); it must not
import the back ends or the driver: the caller (the sweep) runs a ``fallback``
scenario on the driver itself.

References
----------
P. Bogacki, L. F. Shampine, "A 3(2) pair of Runge-Kutta formulas",
Appl. Math. Lett. 2 (1989) 321.
"""

from __future__ import annotations

import threading
from dataclasses import dataclass
from typing import Any

import numpy as np

from thermoelec import jit
from thermoelec.engine import layout as L
from thermoelec.engine import model as m
from thermoelec.engine.events import (
    ACTION_HOLD,
    ACTION_NEXT_PHASE,
    ACTION_STOP,
    ACTION_TOGGLE,
    EV_FAN,
    EVENT_ACTION,
    EVENT_HOLD,
    EVENT_SCALES,
    N_EVENTS,
    STOP_EVENTS,
)
from thermoelec.engine.mission import (
    IMPOSED_VOLTAGE_SLACK,
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
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.plain import evaluate_plain, is_plain, plain_offsets, plain_offsets_size
from thermoelec.engine.problem import Problem, pack_parameters
from thermoelec.physics.cell import arrhenius_ageing_rate
from thermoelec.physics.loads import MODE_VOLTAGE

__all__ = ["EXTREMES", "BatchOutcome", "solve_batch"]

# the step loop's kernels, without reference counting (model.uncounted says why): the caller hands
# them their work arrays
_uncounted = m.uncounted

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

# per-scenario running extremes and integrals written by the kernel (what the sweep metrics and verdict need)
X_TC_MAX, X_TS_MAX, X_V_MIN, X_VCELL_MIN, X_I_ABS, X_ARRHENIUS, X_VCELL_MAX, X_P_MAX, X_COLD_CHARGE = \
    0, 1, 2, 3, 4, 5, 6, 7, 8
X_SPREAD, X_SPREAD_TIME, X_SHARE, X_HOT_CELL, X_HOT_TIME, X_AUX, X_AUX_DISCHARGE = 9, 10, 11, 12, 13, 14, 15
(X_I_DISCHARGE, X_I_CHARGE, X_P_CHARGE, X_M_DISCHARGE_I, X_M_CHARGE_I, X_M_DISCHARGE_P, X_M_CHARGE_P,
 X_T_DISCHARGING, X_T_CHARGING, X_DERATED, X_SHORTFALL, N_EXTRA) = range(16, 28)
#: The names of the extremes, by index: highest cell and sink temperature [K], lowest pack and cell
#: voltage [V], largest current magnitude [A], Arrhenius-weighted time at the reference temperature [s]
#: (of the hottest cell), highest cell voltage [V], highest power to the load [W], time charging below
#: the charge temperature limit [s] (of the coldest cell; the crossing interpolated within a step, as over
#: the output rows of a solo run); the largest difference between the hottest and the coldest cell [K]
#: and when [s], the largest current share of a cell [-], the cell that reached the highest temperature
#: (from 0) [-] and when [s] (0, 0, 1, 0 and the time of the peak for a lumped pack); the energy the
#: auxiliaries drew at the terminals [J], and the part of it while the pack discharged [J]; against the
#: limits of the pack specification the largest cell discharge and charge currents [A], the largest charging
#: power [W], the least margins to the cell current limits [A] and the pack power limits [W], the coldest cell
#: while discharging and the hottest while charging [K]; the time derated [s] (the crossings interpolated within
#: a step) and the largest shortfall of the delivered power [W].
EXTREMES = ("cell_temperature_max", "sink_temperature_max", "voltage_min", "cell_voltage_min", "current_abs_max",
            "equivalent_time_at_reference", "cell_voltage_max", "power_max", "cold_charging_time",
            "cell_temperature_spread_max", "cell_temperature_spread_time", "current_share_max", "hottest_cell",
            "hottest_time", "auxiliary_energy", "auxiliary_energy_discharge", "cell_discharge_current_max",
            "cell_charge_current_max", "charge_power_max", "discharge_current_margin", "charge_current_margin",
            "discharge_power_margin", "charge_power_margin", "discharging_temperature_min",
            "charging_temperature_max", "derated_time", "shortfall_max")
#: Their values before the first observation.
_EXTRA_START = np.array([-np.inf, -np.inf, np.inf, np.inf, 0.0, 0.0, -np.inf, -np.inf, 0.0,
                         0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0,
                         0.0, 0.0, 0.0, np.inf, np.inf, np.inf, np.inf, np.inf, -np.inf, 0.0, 0.0])


@jit.njit(cache=True, error_model="numpy", inline="always")
def _stage(y, p, offsets, ydot, alg, plain):
    """One evaluation of the right-hand side: the plain mission's lean one (its tables at ``offsets``,
    :func:`thermoelec.engine.plain.plain_offsets`) or the engine's full one."""
    if plain:
        evaluate_plain(y, p, offsets, ydot, alg)
    else:
        m.evaluate_any(y, p, ydot, alg)


@_uncounted
def _rk_step(y, p, offsets, t, h, k, tmp, alg, out, err, n_dynamic, plain):
    """One Bogacki-Shampine step of size h from y at time t, with ``k[0] = f(t, y)`` given.

    The third-order solution goes to ``out`` and the error estimate to ``err``.
    The last stage is evaluated at ``out`` itself (first same as last), so
    afterwards ``k[3] = f(out)`` and ``alg`` holds the algebraic outputs at ``out``.
    Each stage writes its own time into ``p`` (the ambient profile reads it). The
    inner stages' arguments are formed for the first ``n_dynamic`` states only: no
    right-hand side reads a quadrature.
    ``plain``: the batch is a plain lumped mission, its stages the lean
    :func:`thermoelec.engine.plain.evaluate_plain` (the same numbers; compiled into
    each stage: called, it gains nothing).
    """
    n = y.size
    for i in range(n_dynamic):
        tmp[i] = y[i] + h * _A21 * k[0, i]
    p[L.H_TIME] = t + 0.5 * h
    _stage(tmp, p, offsets, k[1], alg, plain)
    for i in range(n_dynamic):
        tmp[i] = y[i] + h * _A32 * k[1, i]
    p[L.H_TIME] = t + 0.75 * h
    _stage(tmp, p, offsets, k[2], alg, plain)
    for i in range(n):
        out[i] = y[i] + h * (_B1 * k[0, i] + _B2 * k[1, i] + _B3 * k[2, i])
    p[L.H_TIME] = t + h
    _stage(out, p, offsets, k[3], alg, plain)
    for i in range(n):
        err[i] = h * (_E1 * k[0, i] + _E2 * k[1, i] + _E3 * k[2, i] + _E4 * k[3, i])


@_uncounted
def _error_norm(y, out, err, rtol, atol):
    total = 0.0
    for i in range(y.size):
        scale = atol[i] + rtol * max(abs(y[i]), abs(out[i]))
        total += (err[i] / scale) ** 2
    return np.sqrt(total / y.size)


@_uncounted
def _clearly_within(y, out, err, rtol, atol):
    """True when every error of the step is at most half its scale (then :func:`_error_norm` <= 0.5).

    Comparisons only: the norm's twenty divisions were a twentieth of a 1 Hz segment's cost.
    False for a NaN (its comparison fails), so such a step goes to the norm and is refused there.
    """
    for i in range(y.size):
        if not 2.0 * abs(err[i]) <= atol[i] + rtol * max(abs(y[i]), abs(out[i])):
            return False
    return True


@_uncounted
def _observe(y, alg, extra, t, ts_index, lean):
    """Running extremes from the state at time ``t`` and its algebraic outputs.

    ``lean``: the outputs come from :func:`thermoelec.engine.plain.evaluate_plain`, after a first
    observation of the full right-hand side's: the cells' spread (nil in a lumped pack), the current
    share and the margins to the pack specification's limits, which it leaves as they were, are skipped.
    """
    if alg[L.A_TEMPERATURE_HIGH] > extra[X_TC_MAX]:
        extra[X_TC_MAX] = alg[L.A_TEMPERATURE_HIGH]
        extra[X_HOT_CELL] = alg[L.A_CELL_HOT]
        extra[X_HOT_TIME] = t
    if not lean:
        spread = alg[L.A_TEMPERATURE_HIGH] - alg[L.A_TEMPERATURE_LOW]
        if spread > extra[X_SPREAD]:
            extra[X_SPREAD] = spread
            extra[X_SPREAD_TIME] = t
        extra[X_SHARE] = max(extra[X_SHARE], alg[L.A_CURRENT_SHARE])
        extra[X_M_DISCHARGE_I] = min(extra[X_M_DISCHARGE_I], alg[L.A_MARGIN_DISCHARGE_CURRENT])
        extra[X_M_CHARGE_I] = min(extra[X_M_CHARGE_I], alg[L.A_MARGIN_CHARGE_CURRENT])
        extra[X_M_DISCHARGE_P] = min(extra[X_M_DISCHARGE_P], alg[L.A_MARGIN_DISCHARGE_POWER])
        extra[X_M_CHARGE_P] = min(extra[X_M_CHARGE_P], alg[L.A_MARGIN_CHARGE_POWER])
    extra[X_TS_MAX] = max(extra[X_TS_MAX], y[ts_index])
    extra[X_V_MIN] = min(extra[X_V_MIN], alg[L.A_VOLTAGE])
    extra[X_VCELL_MIN] = min(extra[X_VCELL_MIN], alg[L.A_CELL_VOLTAGE])
    extra[X_I_ABS] = max(extra[X_I_ABS], abs(alg[L.A_CURRENT]))
    extra[X_VCELL_MAX] = max(extra[X_VCELL_MAX], alg[L.A_CELL_VOLTAGE_HIGH])
    power = alg[L.A_VOLTAGE] * alg[L.A_CURRENT]
    extra[X_P_MAX] = max(extra[X_P_MAX], power)
    # the limits of the pack specification and the derating
    extra[X_I_DISCHARGE] = max(extra[X_I_DISCHARGE], alg[L.A_CELL_CURRENT_HIGH])
    extra[X_I_CHARGE] = max(extra[X_I_CHARGE], -alg[L.A_CELL_CURRENT_LOW])
    extra[X_P_CHARGE] = max(extra[X_P_CHARGE], -power)
    if alg[L.A_CURRENT] > 0.0:
        extra[X_T_DISCHARGING] = min(extra[X_T_DISCHARGING], alg[L.A_TEMPERATURE_LOW])
    elif alg[L.A_CURRENT] < 0.0:
        extra[X_T_CHARGING] = max(extra[X_T_CHARGING], alg[L.A_TEMPERATURE_HIGH])
    extra[X_SHORTFALL] = max(extra[X_SHORTFALL], abs(alg[L.A_POWER_DEMANDED] - power))


@_uncounted
def _derated_time(deficit0, deficit1, h):
    """Time of a step of length h during which the delivered current differs from the demand's [s].

    ``deficit`` is ``|I_demanded - I|`` at the step's ends [A]; a crossing of zero is
    interpolated linearly within the step (the rule of
    :func:`thermoelec.analysis.diagnostics.time_above` over output rows).
    """
    if deficit0 > 0.0 and deficit1 > 0.0:
        return h
    if deficit0 > 0.0:
        return h * deficit0 / (deficit0 - deficit1)
    if deficit1 > 0.0:
        return h * deficit1 / (deficit1 - deficit0)
    return 0.0


@_uncounted
def _cold_charging(tc0, tc1, i0, i1, t_min, h):
    """Time of a step of length h spent charging below ``t_min`` [s].

    Charging when the step's mean current is negative; the time below the limit
    is the share of the step below it, the crossing interpolated linearly (the
    rule of :func:`thermoelec.analysis.diagnostics.time_above` over output rows).
    """
    if 0.5 * (i0 + i1) >= 0.0:
        return 0.0
    below0, below1 = tc0 < t_min, tc1 < t_min
    if below0 and below1:
        return h
    if not below0 and not below1:
        return 0.0
    share = (t_min - tc0) / (tc1 - tc0)
    return h * share if below0 else h * (1.0 - share)


@_uncounted
def _auxiliary_energy(extra, aux, i0, i1, h):
    """Energy the auxiliaries draw over a step of length h [J]: their power is constant within a phase
    (the thermostats switch at phase boundaries); discharging when the step's mean current is positive."""
    extra[X_AUX] += aux * h
    if 0.5 * (i0 + i1) > 0.0:
        extra[X_AUX_DISCHARGE] += aux * h


@_uncounted
def _any_fired(g, active, n_active):
    """True when an active root function (of ``active[:n_active]``) is non-positive."""
    for j in range(n_active):
        if g[active[j]] <= 0.0:
            return True
    return False


@_uncounted
def _near_zero(g, active, n_active):
    """True when an active root function is within its tolerance of zero (then the full start check runs)."""
    for j in range(n_active):
        e = active[j]
        if g[e] <= 1e-6 * EVENT_SCALES[e]:
            return True
    return False


#: Events a scenario may fire at one instant before it is handed to CVODE (a chattering thermostat).
MAX_EVENTS_PER_SEGMENT = 1000


@_uncounted
def _integrate_one(p, offsets, n_phases, modes, values, durations, ambients, setups, setup_index, switches, controls, y,
                   rtol, atol, ea, t_ref, t_charge_min, extra, hot0, cold0, ts_index, plain, stages, vectors, roots,
                   alg, active):
    """One scenario through the segments of its mission plan and their phases (a CC-CV segment has two).

    Events act by :data:`thermoelec.engine.events.EVENT_ACTION`, as in the CVODE
    driver: a limit stops the mission, the CC->CV switch starts the CV phase, a
    cutoff or an end condition ends the segment, a thermostat toggles and the
    phase goes on. Returns (status, event, time, cell): status 0 end of profile, 1
    stopped, 2 fallback; the cell at a stop's limit
    (:data:`thermoelec.engine.layout.EVENT_CELL_SLOT`, -1 for none). ``hot0`` and
    ``cold0`` are the hottest and the coldest cell's temperatures at the start [K]
    (the Arrhenius time is the hottest cell's, the time charging cold the coldest
    cell's). ``stages``, ``vectors``, ``roots``, ``alg`` and ``active`` are the work
    arrays of :func:`work_arrays`: the loop allocates nothing, so it is compiled
    without reference counting. About 100 lines in one compiled
    loop, on purpose: the step loop runs once per segment of every scenario, and as
    a separate function taking a dozen arrays its calls cost a fifth of the batch.
    """
    n = y.size
    k = stages
    tmp, out, err, trial, scratch, yy = vectors[0], vectors[1], vectors[2], vectors[3], vectors[4], vectors[5]
    g, g_ahead = roots[0], roots[1]
    n_dynamic = ts_index + 2  # the sink, the coolant, then the quadratures (no stage reads those)
    default_ambient = p[L.H_AMBIENT]
    default_table = p[L.H_AMBIENT_TABLE]
    h = 0.05
    rate_prev = arrhenius_ageing_rate(hot0, ea, t_ref)
    cold_prev = cold0  # the coldest cell at the last accepted point (cold charging counts it)
    current_prev = 0.0  # the current delivered at the last accepted point (a ramp starts from it)
    hold = 0.0  # the voltage limiter's hold state
    deficit_prev = 0.0  # |demanded - delivered| current at the last accepted point
    t = 0.0
    kept_row = -1  # the set-up row in p's root-function slots, unchanged since (configure_phase)
    n_active = 0
    for seg in range(durations.size):
        t_end = t + durations[seg]
        phase = 0
        events = 0
        while True:
            hold = configure_phase(p, seg, phase, modes, values, ambients, setups, setup_index, default_ambient,
                                   default_table, switches, controls, hold, current_prev, t, kept_row)
            p[L.H_TIME] = t
            if setup_index[seg, phase] != kept_row:  # else the same events are active, the others read 1
                kept_row = setup_index[seg, phase]
                n_active = m.active_events(p, active)
                for e in range(N_EVENTS):  # model.roots_from, reading only the active events' functions
                    g[e] = 1.0
            # the demand changed: a new first stage (the full right-hand side once, for the outputs
            # that a plain mission's stages leave as they are)
            _stage(y, p, offsets, k[0], alg, plain and seg > 0)
            m.roots_active(y, g, p, alg, active, n_active)
            code = -1
            # the engine's full check where a limit is reached or near, and always with the
            # terminal voltage imposed (the cell limits are checked only there)
            if _near_zero(g, active, n_active) or p[L.H_MODE] == MODE_VOLTAGE:
                code = m.start_check(y, p, alg, scratch, yy, g, g_ahead, START_PROBE, IMPOSED_VOLTAGE_SLACK)
                n_active = m.active_events(p, active)  # it switches off the events that sit at their zero
                kept_row = -1
                p[L.H_TIME] = t
                m.evaluate_any(y, p, k[0], alg)
            if code < 0 or EVENT_ACTION[code] != ACTION_HOLD:  # a hold at once: the instant before it is no state
                _observe(y, alg, extra, t, ts_index, plain and seg > 0)
            current_prev = alg[L.A_CURRENT]  # the demand jumps at a phase start
            deficit_prev = abs(alg[L.A_CURRENT_DEMANDED] - current_prev)
            if code < 0:
                if t_end - t <= MIN_PHASE:
                    break
                # steps to the phase end or to the first event (kept inline: a call per segment
                # with a dozen arrays costs a fifth of the batch in reference counting)
                steps = 0
                while t < t_end - 1e-12 * max(1.0, t_end):
                    steps += 1
                    if steps > MAX_STEPS_PER_SEGMENT or h < 1e-9:
                        return 2, -1, t, -1
                    h_try = min(h, t_end - t)
                    _rk_step(y, p, offsets, t, h_try, k, tmp, alg, out, err, n_dynamic, plain)
                    # a step cut short by the boundary, with every error under half its scale, is taken
                    # without the norm: only its size would read it, and it leaves h alone (below)
                    if h_try < h and 5.0 * h_try <= h and _clearly_within(y, out, err, rtol, atol):
                        norm = 0.0
                    else:
                        norm = _error_norm(y, out, err, rtol, atol)
                    if norm > 1.0 or not np.isfinite(norm):
                        h = h_try * max(0.2, 0.9 * norm ** _ORDER_EXPONENT) if np.isfinite(norm) else 0.25 * h_try
                        continue
                    m.roots_active(out, g, p, alg, active, n_active)
                    if _any_fired(g, active, n_active):
                        low, high = 0.0, h_try  # a root lies in (low, high]
                        while high - low > EVENT_TIME_TOLERANCE:
                            mid = 0.5 * (low + high)
                            _rk_step(y, p, offsets, t, mid, k, tmp, alg, trial, err, n_dynamic, plain)
                            m.roots_active(trial, g, p, alg, active, n_active)
                            if _any_fired(g, active, n_active):
                                high = mid
                            else:
                                low = mid
                        _rk_step(y, p, offsets, t, high, k, tmp, alg, trial, err, n_dynamic, plain)
                        m.roots_active(trial, g, p, alg, active, n_active)
                        code = m.fired_event(g, p)
                        rate_new = arrhenius_ageing_rate(alg[L.A_TEMPERATURE_HIGH], ea, t_ref)
                        extra[X_ARRHENIUS] += 0.5 * (rate_prev + rate_new) * high
                        rate_prev = rate_new
                        extra[X_COLD_CHARGE] += _cold_charging(cold_prev, alg[L.A_TEMPERATURE_LOW], current_prev,
                                                               alg[L.A_CURRENT], t_charge_min, high)
                        _auxiliary_energy(extra, alg[L.A_AUXILIARY], current_prev, alg[L.A_CURRENT], high)
                        deficit = abs(alg[L.A_CURRENT_DEMANDED] - alg[L.A_CURRENT])
                        extra[X_DERATED] += _derated_time(deficit_prev, deficit, high)
                        deficit_prev = deficit
                        current_prev = alg[L.A_CURRENT]
                        cold_prev = alg[L.A_TEMPERATURE_LOW]
                        for i in range(n):
                            y[i] = trial[i]
                        t += high
                        _observe(y, alg, extra, t, ts_index, plain and seg > 0)
                        break
                    rate_new = arrhenius_ageing_rate(alg[L.A_TEMPERATURE_HIGH], ea, t_ref)
                    extra[X_ARRHENIUS] += 0.5 * (rate_prev + rate_new) * h_try
                    rate_prev = rate_new
                    extra[X_COLD_CHARGE] += _cold_charging(cold_prev, alg[L.A_TEMPERATURE_LOW], current_prev,
                                                           alg[L.A_CURRENT], t_charge_min, h_try)
                    _auxiliary_energy(extra, alg[L.A_AUXILIARY], current_prev, alg[L.A_CURRENT], h_try)
                    deficit = abs(alg[L.A_CURRENT_DEMANDED] - alg[L.A_CURRENT])
                    extra[X_DERATED] += _derated_time(deficit_prev, deficit, h_try)
                    deficit_prev = deficit
                    current_prev = alg[L.A_CURRENT]
                    cold_prev = alg[L.A_TEMPERATURE_LOW]
                    t += h_try
                    for i in range(n):
                        y[i] = out[i]
                        k[0, i] = k[3, i]  # first same as last
                    _observe(y, alg, extra, t, ts_index, plain and seg > 0)
                    # a step cut short by the boundary says nothing about the next one: it may only
                    # lengthen h (and where 5 times it cannot, the power of the norm is not taken)
                    if h_try >= h or 5.0 * h_try > h:
                        factor = 5.0 if norm == 0.0 else min(5.0, max(0.2, 0.9 * norm ** _ORDER_EXPONENT))
                        h = h_try * factor if h_try >= h else max(h, h_try * factor)
                if code < 0:
                    t = t_end
                    break
            events += 1
            if events > MAX_EVENTS_PER_SEGMENT:
                return 2, -1, t, -1
            action = EVENT_ACTION[code]
            if action == ACTION_STOP:  # alg holds the outputs at the stop: which cell is at the limit
                slot = L.EVENT_CELL_SLOT[code]
                return 1, code, t, int(alg[slot]) if slot >= 0 else -1
            if action == ACTION_TOGGLE:
                controls[code - EV_FAN] = not controls[code - EV_FAN]
            elif action == ACTION_HOLD:
                hold = float(EVENT_HOLD[code])
            elif action == ACTION_NEXT_PHASE and phase + 1 < n_phases[seg]:
                phase += 1
            else:
                break  # a cutoff or an end condition ends the segment
    return 0, -1, t, -1


@jit.njit(cache=True, nogil=True, error_model="numpy")
def work_arrays(n):
    """The work arrays of :func:`_integrate_one`, made once per batch (the step loop allocates nothing).

    Parameters
    ----------
    n : int
        Number of states (:mod:`thermoelec.engine.layout`) [-].

    Returns
    -------
    tuple of arrays
        The four Runge-Kutta stages, shape (4, n) [unit of dy/dt]; the stage argument, the step's
        solution, its error, a trial step's solution, a scratch derivative and the start check's probe
        state, shape (6, n) [unit of y or dy/dt]; the root functions at a point and ahead of it, shape
        (2, N_EVENTS) [by event]; the algebraic outputs, shape (N_ALGEBRAICS,) [SI]; the phase's
        active events, int64, shape (N_EVENTS,) [-].
    """
    return (np.empty((4, n)), np.empty((6, n)), np.empty((2, N_EVENTS)), np.empty(L.N_ALGEBRAICS),
            np.empty(N_EVENTS, dtype=np.int64))


@jit.ahead_of_time("Tuple((f8[:, ::1], f8[:, ::1], i8[::1], i8[::1], f8[::1], i8[::1]))("
                   "f8[:, ::1], i8[::1], i8[:, ::1], f8[:, :, ::1], f8[:, :, ::1], f8[:, ::1], f8[:, ::1], "
                   "f8[:, :, ::1], i8[:, :, ::1], f8[:, :, ::1], b1[:, ::1], f8[:, ::1], f8, f8[:, ::1], "
                   "f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], i8, b1)")
@jit.njit(cache=True, nogil=True, error_model="numpy")  # without the GIL: the command feeds its workers meanwhile
def _integrate_many(params, profile, n_phases, modes, values, durations, ambients, setups, setup_index, switches,
                    controls, y0, rtol, atol, ea, t_ref, t_charge_min, hot0, cold0, ts_index, plain):
    """Every scenario of a batch; scenario ``s`` runs the segments of profile ``profile[s]``."""
    n_scen = params.shape[0]
    states = y0.copy()
    extras = np.empty((n_scen, N_EXTRA))
    status = np.empty(n_scen, dtype=np.int64)
    events = np.empty(n_scen, dtype=np.int64)
    cells = np.empty(n_scen, dtype=np.int64)
    times = np.empty(n_scen)
    stages, vectors, roots, alg, active = work_arrays(states.shape[1])
    offsets = np.zeros(plain_offsets_size(int(params[0, L.H_NRC])), dtype=np.int64)
    for s in range(n_scen):
        extras[s, :] = _EXTRA_START
        p = params[s].copy()
        if plain:
            plain_offsets(p, offsets)
        y = states[s]
        j = profile[s]
        st, ev, tt, cc = _integrate_one(p, offsets, n_phases[j], modes[j], values[j], durations[j], ambients[j],
                                        setups[j], setup_index[j], switches[s], controls[s].copy(), y, rtol, atol[s],
                                        ea[s], t_ref[s], t_charge_min[s], extras[s], hot0[s], cold0[s], ts_index,
                                        plain, stages, vectors, roots, alg, active)
        status[s], events[s], times[s], cells[s] = st, ev, tt, cc
    return states, extras, status, events, times, cells


@dataclass
class BatchOutcome:
    """Per scenario: status (``ok`` / ``fallback``), stop reason, end time and state, extremes.

    Attributes
    ----------
    status : list of str
        ``"ok"``, or ``"fallback"`` when the scenario (or its soak) must be run on CVODE.
    stop_reason : list of str
        One of :data:`thermoelec.engine.events.STOP_REASONS` (``"end_of_profile"`` for a fallback).
    duration : float64 array, shape (n,)
        Time at which each mission ended, or was handed back [s].
    states : float64 array, shape (n, n_states)
        State at the end (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    extras : float64 array, shape (n, len(EXTREMES))
        The running extremes of :data:`EXTREMES` [K, K, V, V, A, s, V, W, s, K, s, -, -, s, J, J, A, A, W, A, A,
        W, W, K, K, s, W].
    initial_states : float64 array, shape (n, n_states)
        Where each mission started, after its soak [-, V, K, J, C].
    stop_cell : int64 array, shape (n,)
        The cell at the limit that stopped each mission (from 0; for a voltage limit the
        first cell of the group at it), -1 for none [-].
    kernel : str
        The right-hand side the batch was solved with: ``"plain"`` (a plain lumped mission,
        :mod:`thermoelec.engine.plain`) or ``"general"``.
    """

    status: list[str]
    stop_reason: list[str]
    duration: np.ndarray
    states: np.ndarray
    extras: np.ndarray
    initial_states: np.ndarray  # where each mission started (after its soak)
    stop_cell: np.ndarray | None = None
    kernel: str = "general"


#: Mission plans made in this process, by the id of their segment tuple: (segments, limits, plan),
#: the segments held so that the id stays theirs; at most :data:`PLANS_KEPT`, the oldest dropped first.
_PLANS: dict[int, list[tuple[tuple, tuple, MissionPlan]]] = {}
#: Segment tuples whose plans are kept (a sweep's chunks come back to the same few profiles).
PLANS_KEPT = 64
_PLANS_LOCK = threading.Lock()


def _plans(problems: list[Problem]) -> tuple[list[MissionPlan], np.ndarray]:
    """The distinct mission plans of a batch, and which one each problem walks.

    The scenarios of a sweep mostly share one profile (one segment tuple, from the
    scenario family's cache): a plan is made once per segment tuple and the limits
    its set-ups read besides the segments (:func:`thermoelec.engine.mission.event_setup`, the CC-CV cap),
    and kept for the batches after (:data:`_PLANS`): on a 1 Hz one-hour mission a plan
    takes 12 ms to make, and a chunk of a sweep over ten demand scales needs ten.
    """
    plans: list[MissionPlan] = []
    which = np.empty(len(problems), dtype=np.int64)
    for i, problem in enumerate(problems):
        cell = problem.cell
        limits = (cell.voltage_min, cell.voltage_max, cell.capacity, problem.pack.series, problem.pack.parallel,
                  problem.limits, problem.derating, problem.resolved is None)
        plan = _kept_plan(problem, limits)  # the same object for the same segments and limits
        for j, known in enumerate(plans):
            if known is plan:
                which[i] = j
                break
        else:
            which[i] = len(plans)
            plans.append(plan)
    return plans, which


def _kept_plan(problem: Problem, limits: tuple) -> MissionPlan:
    """The plan of ``problem`` from :data:`_PLANS`, made and kept when it is not there (plans are not changed).

    Under a lock: a dask worker solves chunks in several threads.
    """
    with _PLANS_LOCK:
        for segments, known, plan in _PLANS.get(id(problem.segments), ()):
            if segments is problem.segments and known == limits:
                return plan
        plan = plan_mission(problem)
        for name in vars(plan):
            value = getattr(plan, name)
            if isinstance(value, np.ndarray):
                value.flags.writeable = False  # shared by every batch after: nobody may change it
        if len(_PLANS) >= PLANS_KEPT and id(problem.segments) not in _PLANS:
            del _PLANS[next(iter(_PLANS))]  # dicts keep insertion order: the oldest
        _PLANS.setdefault(id(problem.segments), []).append((problem.segments, limits, plan))
        return plan


def _stack(plans: list[MissionPlan]) -> tuple[np.ndarray, ...]:
    """The plans' arrays stacked along a first axis, padded: a one-phase segment of zero length does nothing."""
    n_seg = max(plan.n_segments for plan in plans)
    n_kinds = max(len(plan.setups) for plan in plans)

    def stack(name: str, shape: tuple, fill: Any, dtype: Any = float) -> np.ndarray:
        out = np.full((len(plans), *shape), fill, dtype=dtype)
        for i, plan in enumerate(plans):
            values = getattr(plan, name)
            out[i, :len(values)] = values
        return out

    return (stack("n_phases", (n_seg,), 1, np.int64), stack("modes", (n_seg, 2), 0.0),
            stack("values", (n_seg, 2), 0.0), stack("durations", (n_seg,), 0.0), stack("ambients", (n_seg,), np.nan),
            stack("setups", (n_kinds, 2 * N_EVENTS), 0.0), stack("setup_index", (n_seg, 2), 0, np.int64))


def solve_batch(problems: list[Problem], options: SolverOptions) -> BatchOutcome:
    """Integrate problems with the same state layout (same RC count, same number of cell blocks) together.

    As in the engine's driver, the soak segments of a problem run first, as a
    problem of their own (here: a batch of the soaks); its mission starts at
    t = 0 from the state they end in, with the integrals reset. Scenarios that
    share a profile (and the limits its plan reads) share one mission plan.

    Parameters
    ----------
    problems : list of Problem
        Scenarios with one state layout, in SI units [SI].
    options : SolverOptions
        Tolerances, one set for the batch [-, and per state -, V, K, J, C].

    Returns
    -------
    BatchOutcome
        Per scenario: ``ok`` or ``fallback`` (to be run on CVODE), stop reason,
        end time [s] and state [-, V, K, J, C], and the running extremes of
        :data:`EXTREMES` [K, K, V, V, A, s, V, W, s, K, s, -, -, s, J, J, A, A, W, A, A, W, W, K, K, s, W], the
        cell at a stop's limit [-].
    """
    n_rc, n_cells = problems[0].n_rc, problems[0].n_cells
    if any(p.n_rc != n_rc or p.n_cells != n_cells for p in problems):
        raise ValueError("a batch needs one state layout: the same number of RC pairs and of cells")
    y0 = np.array([p.initial_state() for p in problems])
    soaked = [i for i, p in enumerate(problems) if p.soak]
    soak_failed = set()
    if soaked:
        soaks = solve_batch([soak_problem(problems[i]) for i in soaked], options)
        for j, i in enumerate(soaked):
            if soaks.status[j] != "ok":
                soak_failed.add(i)
                continue
            y0[i] = start_after_soak(soaks.states[j], n_rc, n_cells)
    params_list = [pack_parameters(p) for p in problems]
    params = np.zeros((len(problems), max(len(p) for p in params_list)))
    for i, p in enumerate(params_list):
        params[i, :len(p)] = p
    plans, which = _plans(problems)
    n_phases, modes, values, durations, ambients, setups, index = _stack(plans)
    cell_temperatures = y0[:, L.cell_state_indices(n_rc, n_cells)[1]]
    hot0, cold0 = cell_temperatures.max(axis=1), cell_temperatures.min(axis=1)
    switches = np.array([thermostat_switches(p) for p in problems])
    controls = np.array([initial_controls(s, hot0[i], cold0[i]) for i, s in enumerate(switches)])
    atol = np.tile(options.atol_vector(n_rc, n_cells), (len(problems), 1))
    ea = np.array([p.stress.activation_energy for p in problems])
    t_ref = np.array([p.stress.reference_temperature for p in problems])
    t_charge_min = np.array([p.limits.charge_temperature_min for p in problems])
    plain = is_plain(params, plans, switches, bool(soaked))
    states, extras, status, events, times, cells = _integrate_many(
        params, which, n_phases, modes, values, durations, ambients, setups, index, switches, controls, y0,
        options.rtol, atol, ea, t_ref, t_charge_min, hot0, cold0, L.sink_temperature_index(n_rc, n_cells), plain)
    stop = [STOP_EVENTS.get(int(e), "end_of_profile") if s == 1 else "end_of_profile"
            for s, e in zip(status, events, strict=True)]
    names = ["fallback" if s == 2 or i in soak_failed else "ok" for i, s in enumerate(status)]
    return BatchOutcome(names, stop, times, states, extras, y0, cells, "plain" if plain else "general")
