"""The coupled electro-thermal right-hand side, its Jacobian and event functions (numba kernels).

Equations: Thevenin cell ``V = U - sum v_k - I R0`` with
``U(z, T) = U_ref(z) + (T - T_ref) dU/dT(z)``; pack ``Ns x Np`` with
``E = Ns (U - sum v_k)``, ``R_tot = Ns R0 / Np + R_ic``; the pack current is
closed-form for each load mode (:func:`thermoelec.physics.loads.pack_current`);
Bernardi heat (:func:`thermoelec.physics.cell.bernardi_heat`); two lumped thermal
nodes and an optional coolant node; convection from correlations, radiation,
thermostatic fan, heater and pump (their on/off states are phase parameters,
switched at located events).

The quadratures integrate battery and load energy, heat generated, heat rejected
to ambient and charge throughput with the same integrator as the states. BDF is
a linear method, so the linear invariant ``heat generated = heat stored + heat
to ambient`` is kept to the Newton tolerance, not only to the error tolerance.

Every kernel reads the flat parameter vector of :mod:`thermoelec.engine.layout`
(states, quadratures, algebraic outputs and parameter slots are declared there).
Kernels write into buffers their caller owns (no allocation per call: the
right-hand side runs ~10^5 times a mission), so most return nothing.

This module imports nothing of the engine but the events and the layout (and
physics' cell, thermal and load-mode laws). It knows no integrator and no mission:
it imports neither scikits.odes nor scipy, nor the mission plan; :class:`Kernels`
only offers the call signatures the back ends want, and the back ends and the
batched solver call it.
"""

from __future__ import annotations

import numpy as np

from thermoelec import jit
from thermoelec.engine import limits as bms
from thermoelec.engine.events import (
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
    EV_SINK_TEMPERATURE,
    EV_SOC_EMPTY,
    EV_SOC_FULL,
    EV_TEMPERATURE,
    EV_VOLTAGE_MAX,
    EV_VOLTAGE_MIN,
    EVENT_PRIORITY,
    EVENT_RANK,
    EVENT_SCALES,
    N_EVENTS,
    ROOT_TOLERANCE,
)
from thermoelec.engine.layout import (
    A_AMBIENT,
    A_AUXILIARY,
    A_CELL_CHARGE_LIMIT,
    A_CELL_CURRENT_HIGH,
    A_CELL_CURRENT_LOW,
    A_CELL_DISCHARGE_LIMIT,
    A_CELL_LOW_VOLTAGE,
    A_CELL_SHARE,
    A_CELL_VOLTAGE,
    A_CELL_VOLTAGE_HIGH,
    A_COOLANT,
    A_COOLANT_OUTLET,
    A_CURRENT,
    A_CURRENT_ALLOWED,
    A_CURRENT_DEMANDED,
    A_CURRENT_SHARE,
    A_DELIVERABLE,
    A_EMF,
    A_ENTROPIC,
    A_HEAT,
    A_HEAT_AMBIENT,
    A_HEATER,
    A_HOLD_CHARGE,
    A_HOLD_DISCHARGE,
    A_MARGIN_CHARGE_CURRENT,
    A_MARGIN_CHARGE_POWER,
    A_MARGIN_DISCHARGE_CURRENT,
    A_MARGIN_DISCHARGE_POWER,
    A_OCV,
    A_POWER_MARGIN,
    A_R0,
    A_RADIATION,
    A_RAYLEIGH,
    A_RESISTANCE,
    A_REVERSIBLE,
    A_REYNOLDS,
    A_SINK_CONDUCTANCE,
    A_SOC,
    A_SOC_HIGH,
    A_SOC_LOW,
    A_TEMPERATURE_HIGH,
    A_TEMPERATURE_LOW,
    A_TEMPERATURE_MEAN,
    A_VOLTAGE,
    CELL_RC,
    CONTROL_FLAG_OF,
    H_ACTIVE,
    H_AIR_SPEED,
    H_AMBIENT,
    H_AMBIENT_TABLE,
    H_CAPACITY,
    H_CCELL,
    H_CELL_VOLTAGE_MAX,
    H_CELL_VOLTAGE_MIN,
    H_CELLS,
    H_CONV_AREA,
    H_CONV_LENGTH,
    H_COOL_C,
    H_COOL_G,
    H_COOL_INLET,
    H_COOL_MCP,
    H_COOL_UA,
    H_CSINK,
    H_CUTOFF,
    H_DERATE,
    H_EMISSIVITY,
    H_FAN_G,
    H_FAN_ON,
    H_FAN_POWER,
    H_FAN_SPEED,
    H_FORCED,
    H_GCA,
    H_GCS,
    H_GSA,
    H_HEATER_FROM_PACK,
    H_HEATER_ON,
    H_HEATER_POWER,
    H_HOLD,
    H_HOLD_HYSTERESIS,
    H_MODE,
    H_NATURAL,
    H_NCELLS,
    H_NP,
    H_NRC,
    H_NS,
    H_OCV,
    H_PUMP_ON,
    H_PUMP_POWER,
    H_R0,
    H_RAD_AREA,
    H_RC,
    H_RIC,
    H_SURROUNDINGS,
    H_THRESHOLD,
    H_TIME,
    H_VALUE,
    H_WORK,
    LAW_EA,
    LAW_NT,
    LAW_REFERENCE,
    N_ALGEBRAICS,
    OCV_REFERENCE,
    Q_BATTERY_CHARGE,
    Q_BATTERY_DISCHARGE,
    Q_COOLANT,
    Q_HEAT,
    Q_HEAT_AMBIENT,
    Q_HEATER,
    Q_LOAD_CHARGE,
    Q_LOAD_DISCHARGE,
    Q_RADIATION,
    Q_REVERSIBLE,
    Q_THROUGHPUT,
    RC_KIND,
    RC_LAW,
    RC_VALUE,
    W_CURRENT,
    WORK_WIDTH,
    ambient_at,
    law_value,
    ocv_at,
    rc_length,
)
from thermoelec.engine.resolved import evaluate_pack
from thermoelec.physics import cell as cellphys
from thermoelec.physics import correlations
from thermoelec.physics import thermal as thermphys
from thermoelec.physics.loads import (
    MODE_POWER,
    MODE_VOLTAGE,
    auxiliary_power,
    current_for_voltage,
    pack_current,
    power_deliverable_margin,
)

__all__ = ["Kernels", "evaluate", "evaluate_any", "evaluate_rows", "roots", "trajectory_algebraics"]

_jit = jit.njit(cache=True, nogil=True, error_model="numpy")
# Small pieces of the right-hand side are inlined into their callers: a call between two
# compiled functions is not inlined by numba.
_inline = jit.njit(cache=True, nogil=True, error_model="numpy", inline="always")
#: The decorator of the kernels the batched solver's step loop calls (here and in engine/batch.py):
#: compiled without numba's reference counting, they allocate nothing. Counting the arrays handed
#: between the inlined pieces (an atomic increment and decrement each) cost 87 against 60 ns of a
#: right-hand side evaluated alone, 5 % of the batched loop's instructions.
uncounted = jit.njit(cache=True, nogil=True, error_model="numpy", _nrt=False)

_ocv = cellphys.open_circuit_voltage
_power_margin = power_deliverable_margin
_bernardi = cellphys.bernardi_heat
_cell_rate = thermphys.cell_node_rate
_sink_rate = thermphys.sink_node_rate
_h_from_numbers = correlations.coefficient_from_numbers
_conv_numbers = correlations.convection_numbers
_radiation = thermphys.radiation_heat
_effectiveness = thermphys.coolant_effectiveness
_auxiliary = auxiliary_power
_for_voltage = current_for_voltage


@_inline
def rc_voltage_rate(p, off, z, temperature, icell, v):
    """``dv/dt = I/C - v/(R C)`` [V/s] of the RC-pair block at ``off``, with fewest divisions.

    Given a time constant, ``C = tau / R(z, T_ref)``; when the law does not depend
    on temperature, ``R(z, T_ref) = R`` and the rate is ``(R I - v) / tau``.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the RC-pair block in ``p`` [-].
    z : float
        State of charge [-].
    temperature : float
        Cell temperature [K].
    icell : float
        Cell current [A], > 0 discharging.
    v : float
        Voltage across the pair [V].

    Returns
    -------
    float
        The rate of the pair's voltage [V/s].

    References
    ----------
    The Thevenin equivalent circuit's RC branch (circuit theory, common practice).
    """
    law = off + RC_LAW
    r = law_value(p, law, z, temperature)
    if p[off + RC_KIND] == 1.0:
        if p[law + LAW_NT] == 1.0 and p[law + LAW_EA] == 0.0:  # one temperature point, no Arrhenius factor
            return (r * icell - v) / p[off + RC_VALUE]
        r_ref = law_value(p, law, z, p[law + LAW_REFERENCE])
        return (icell - v / r) * r_ref / p[off + RC_VALUE]
    return (icell - v / r) / p[off + RC_VALUE]


@_inline
def _rc_pair(p, off, z, temperature):
    """Resistance [Ω] and capacitance [F] of the RC-pair block that starts at ``off``."""
    law = off + RC_LAW
    r = law_value(p, law, z, temperature)
    if p[off + RC_KIND] == 1.0:
        return r, p[off + RC_VALUE] / law_value(p, law, z, p[law + LAW_REFERENCE])  # C = tau / R(z, T_ref)
    return r, p[off + RC_VALUE]


@uncounted
def evaluate(y, p, ydot, alg):
    """Fill ``ydot`` (state derivatives) and ``alg`` (algebraic outputs) at state ``y``.

    One function of about 120 lines, on purpose: it runs ~10^5 times a mission
    (10^8 in a sweep), and split into helper functions (even ones numba inlines)
    it measured 30 % slower (200 against 148 ns a call on the benchmark mission).

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`): SoC [-], RC voltages [V], cell,
        sink and coolant temperatures [K], then the quadratures [J, C].
    p : float64 array
        Parameter vector with the phase written in (demand, ambient, time) [SI, unit per slot].
    ydot : float64 array, shape (n_states,)
        Written: ``dy/dt`` [1/s, V/s, K/s, W, A].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs ``A_*`` (current [A], voltages [V], heats [W], ...).
    """
    nrc = int(p[H_NRC])
    z = y[0]
    tc = y[1 + nrc]
    ts = y[2 + nrc]
    tf = y[3 + nrc]
    ta = p[H_AMBIENT]
    table = int(p[H_AMBIENT_TABLE])
    if table > 0:
        ta = ambient_at(p, table, p[H_TIME])
    ns = p[H_NS]
    npar = p[H_NP]
    ric = p[H_RIC]

    o = int(p[H_OCV])
    u_ref, dudt = ocv_at(p, o, z)
    u = _ocv(u_ref, dudt, tc, p[o + OCV_REFERENCE])

    r0 = law_value(p, int(p[H_R0]), z, tc)
    vsum = 0.0
    for k in range(nrc):
        vsum += y[1 + k]
    emf = ns * (u - vsum)
    rtot = ns * r0 / npar + ric

    mode = int(p[H_MODE])
    value = p[H_VALUE]
    heater = p[H_HEATER_POWER] if p[H_HEATER_ON] == 1.0 else 0.0
    # the running auxiliaries (fan, pump, a heater fed from the pack) are one constant-power
    # load on the terminals (in voltage mode the charger holding them feeds it: the cells do not see it)
    aux = _auxiliary(p[H_FAN_ON], p[H_FAN_POWER], p[H_PUMP_ON], p[H_PUMP_POWER], p[H_HEATER_ON],
                     p[H_HEATER_POWER], p[H_HEATER_FROM_PACK])
    demanded = pack_current(mode, value, emf, rtot, aux)
    current = allowed = demanded
    hold_dis = hold_ch = deliverable = np.inf
    if p[H_DERATE] == 1.0:  # the BMS's derating: allowances, voltage limiter, ramp
        i_dis, i_ch, p_dis, p_ch = bms.allowances(p, z, tc, npar)
        r_cells = rtot - ric
        hold_dis = _for_voltage(emf, r_cells, ns * p[H_CELL_VOLTAGE_MIN])
        hold_ch = _for_voltage(emf, r_cells, ns * p[H_CELL_VOLTAGE_MAX])
        current, allowed, deliverable = bms.delivered_current(p, demanded, emf, rtot, i_dis, i_ch, p_dis, p_ch,
                                                              hold_dis, hold_ch)

    icell = current / npar
    vcell = u - vsum - icell * r0
    voltage = emf - current * rtot

    ydot[0] = -icell / p[H_CAPACITY]
    off = int(p[H_RC])
    for k in range(nrc):
        ydot[1 + k] = rc_voltage_rate(p, off, z, tc, icell, y[1 + k])
        off += rc_length(p, off)

    q_cell = _bernardi(icell, u, vcell, tc, dudt)
    heat_cells = ns * npar * q_cell
    heat_ic = current * current * ric
    reversible = -ns * current * tc * dudt

    # sink to air: a fixed conductance or a correlation, plus a running fan
    g_sa = p[H_GSA]
    fan_on = p[H_FAN_ON] == 1.0
    reynolds = 0.0
    rayleigh = 0.0
    if p[H_FORCED] != 0.0 or p[H_NATURAL] != 0.0:
        speed = p[H_FAN_SPEED] if fan_on and p[H_FAN_SPEED] >= 0.0 else p[H_AIR_SPEED]
        reynolds, rayleigh, k_air, pr_air = _conv_numbers(p[H_CONV_LENGTH], speed, ts, ta)
        g_sa = _h_from_numbers(int(p[H_FORCED]), int(p[H_NATURAL]), p[H_CONV_LENGTH], speed > 0.0, ts >= ta,
                               reynolds, rayleigh, k_air, pr_air) * p[H_CONV_AREA]
    if fan_on:
        g_sa += p[H_FAN_G]
    radiated = 0.0
    if p[H_EMISSIVITY] > 0.0:
        surroundings = p[H_SURROUNDINGS] if p[H_SURROUNDINGS] > 0.0 else ta
        radiated = _radiation(p[H_EMISSIVITY], p[H_RAD_AREA], ts, surroundings)
    # sink to coolant: a well-mixed coolant node, or a massless channel (effectiveness)
    inlet = p[H_COOL_INLET]
    flow = p[H_COOL_MCP] if p[H_PUMP_ON] == 1.0 else 0.0
    if p[H_COOL_C] > 0.0:
        to_coolant_node = p[H_COOL_UA] * (ts - tf)
        carried = flow * (tf - inlet)
        ydot[3 + nrc] = (to_coolant_node - carried) / p[H_COOL_C]
        outlet = tf
    else:
        g_cool = _effectiveness(p[H_COOL_UA], flow) * flow
        if p[H_PUMP_ON] == 1.0:
            g_cool += p[H_COOL_G]
        to_coolant_node = g_cool * (ts - inlet) if inlet > 0.0 else 0.0
        carried = to_coolant_node
        ydot[3 + nrc] = 0.0
        outlet = inlet + to_coolant_node / flow if flow > 0.0 else inlet
    to_ambient = p[H_GCA] * (tc - ta) + g_sa * (ts - ta) + radiated
    ydot[1 + nrc] = _cell_rate(heat_cells + heater, tc, ts, ta, p[H_CCELL], p[H_GCS], p[H_GCA])
    ydot[2 + nrc] = _sink_rate(heat_ic - radiated - to_coolant_node, tc, ts, ta, p[H_CSINK], p[H_GCS], g_sa)

    q = 4 + nrc
    e_ocv = ns * u
    i_pos = current if current > 0.0 else 0.0
    i_neg = current - i_pos
    ydot[q + Q_BATTERY_DISCHARGE] = e_ocv * i_pos
    ydot[q + Q_BATTERY_CHARGE] = e_ocv * i_neg
    ydot[q + Q_LOAD_DISCHARGE] = voltage * i_pos
    ydot[q + Q_LOAD_CHARGE] = voltage * i_neg
    ydot[q + Q_HEAT] = heat_cells + heat_ic
    ydot[q + Q_REVERSIBLE] = reversible
    ydot[q + Q_HEAT_AMBIENT] = to_ambient
    ydot[q + Q_THROUGHPUT] = abs(current)
    ydot[q + Q_HEATER] = heater
    ydot[q + Q_COOLANT] = carried
    ydot[q + Q_RADIATION] = radiated
    bms.demand_outputs(ydot, alg, q, mode, value, aux, emf, rtot, demanded, current, voltage)

    alg[A_CURRENT] = current
    alg[A_VOLTAGE] = voltage
    alg[A_CELL_VOLTAGE] = vcell
    alg[A_OCV] = u
    alg[A_EMF] = emf
    alg[A_RESISTANCE] = rtot
    alg[A_HEAT] = heat_cells + heat_ic
    alg[A_REVERSIBLE] = reversible
    alg[A_HEAT_AMBIENT] = to_ambient
    alg[A_ENTROPIC] = dudt
    alg[A_R0] = r0
    alg[A_POWER_MARGIN] = _power_margin(emf, rtot, value + aux) if mode == MODE_POWER else 1.0
    if mode == MODE_POWER and current != demanded:  # derated: the margin of the power delivered, (E - 2 R I)^2
        alg[A_POWER_MARGIN] = (emf - 2.0 * rtot * current) ** 2
    alg[A_AMBIENT] = ta
    alg[A_HEATER] = heater
    alg[A_COOLANT] = carried
    alg[A_RADIATION] = radiated
    alg[A_SINK_CONDUCTANCE] = g_sa
    alg[A_COOLANT_OUTLET] = outlet
    alg[A_REYNOLDS] = reynolds
    alg[A_RAYLEIGH] = rayleigh
    alg[A_AUXILIARY] = 0.0 if mode == MODE_VOLTAGE else aux
    alg[A_CURRENT_ALLOWED] = allowed
    alg[A_HOLD_DISCHARGE] = hold_dis
    alg[A_HOLD_CHARGE] = hold_ch
    alg[A_DELIVERABLE] = deliverable
    alg[A_CELL_CURRENT_HIGH] = icell
    alg[A_CELL_CURRENT_LOW] = icell
    bms.limit_margins(p, z, tc, icell, icell, voltage * current, alg)
    # the extremes over the cells the root functions read: the one cell's values
    alg[A_CELL_VOLTAGE_HIGH] = vcell
    alg[A_TEMPERATURE_HIGH] = tc
    alg[A_TEMPERATURE_LOW] = tc
    alg[A_TEMPERATURE_MEAN] = tc
    alg[A_SOC] = z
    alg[A_SOC_LOW] = z
    alg[A_SOC_HIGH] = z
    alg[A_CURRENT_SHARE] = 1.0
    for k in range(A_CELL_LOW_VOLTAGE, A_CELL_SHARE + 1):
        alg[k] = 0.0
    alg[A_CELL_DISCHARGE_LIMIT] = 0.0
    alg[A_CELL_CHARGE_LIMIT] = 0.0


@_inline
def evaluate_any(y, p, ydot, alg):
    """:func:`evaluate` for a lumped pack, :func:`thermoelec.engine.resolved.evaluate_pack` for a resolved one.

    Inlined into every kernel that evaluates the right-hand side; the branch reads
    the cell-table slot of ``p`` (0 for a lumped pack).

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    ydot : float64 array, shape (n_states,)
        Written: ``dy/dt`` [1/s, V/s, K/s, W, A].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs ``A_*`` [A, V, Ω, W, K, ... unit per slot].
    """
    if p[H_CELLS] != 0.0:
        evaluate_pack(y, p, ydot, alg)
    else:
        evaluate(y, p, ydot, alg)


@jit.ahead_of_time("void(f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def rhs(y, ydot, p, alg):
    """Right-hand side ``dy/dt`` written into ``ydot`` (autonomous within a phase).

    :func:`evaluate` in the argument order of the solver-facing callers; time enters
    only through the time slot of ``p`` (an ambient profile reads it).

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    ydot : float64 array, shape (n_states,)
        Written: ``dy/dt`` [1/s, V/s, K/s, W, A].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs at ``y`` [A, V, Ω, W, K, ... unit per slot].
    """
    evaluate_any(y, p, ydot, alg)


@jit.ahead_of_time("void(f8[::1], f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def roots(y, g, p, alg, scratch):
    """Event functions ``g_k`` written into ``g``; each is positive while all is well.

    Evaluates the right-hand side at ``y`` for its algebraic outputs, then :func:`roots_from`.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    g : float64 array, shape (N_EVENTS,)
        Written: the root functions in :data:`~thermoelec.engine.events.EVENTS` order
        [V, V², K, - or A, by event]; inactive ones read 1.
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs at ``y`` [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    """
    evaluate_any(y, p, scratch, alg)
    roots_from(y, g, p, alg)


@uncounted
def roots_from(y, g, p, alg):
    """Event functions from the algebraic outputs ``alg`` already evaluated at ``y``.

    Each active function is the signed distance to its threshold, positive on the
    safe side: ``V_cell - V_min`` for ``voltage_min``, ``T_max - T_c`` for
    ``temperature_max``, the margin ``E² - 4 R P`` for the power limit, ``|I| - I_cutoff``
    for the CV cutoff. The cell limits read the extremes over the cells (of the
    one cell of a lumped pack): the lowest and highest cell voltage, the hottest
    cell, the emptiest and fullest cell; a segment's SoC end conditions read the
    pack's SoC. An inactive one reads 1, so it never fires. A thermostat's
    function measures the distance to the threshold it switches at next, in the
    direction it waits for: the heater senses the coldest cell, the fan and the
    pump the hottest.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    g : float64 array, shape (N_EVENTS,)
        Written: the root functions in :data:`~thermoelec.engine.events.EVENTS` order
        [V, V², K, - or A, by event].
    p : float64 array
        Parameter vector with the phase written in (activity flags, thresholds) [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        The algebraic outputs at ``y``, read [A, V, Ω, W, K, ... unit per slot].
    """
    for k in range(N_EVENTS):
        g[k] = 1.0 if p[H_ACTIVE + k] == 0.0 else root_function(k, y, p, alg)


@_inline
def roots_active(y, g, p, alg, active, n_active):
    """The active event functions only (:func:`roots_from`), those of ``active[:n_active]``.

    The others keep what they read (1 for an inactive one, as :func:`roots_from` writes: it never fires).
    The batched solver calls it after every step: a phase has a handful of active events
    out of :data:`~thermoelec.engine.events.N_EVENTS`.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    g : float64 array, shape (N_EVENTS,)
        Written at the active events [V, V², K, - or A, by event].
    p : float64 array
        Parameter vector with the phase written in (activity flags, thresholds) [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        The algebraic outputs at ``y``, read [A, V, Ω, W, K, ... unit per slot].
    active : int64 array
        The active events' indices, from :func:`active_events` [-].
    n_active : int
        How many there are [-].
    """
    for j in range(n_active):
        k = active[j]
        g[k] = root_function(k, y, p, alg)


@_inline
def active_events(p, active):
    """Write the indices of the phase's active events into ``active``; return how many there are.

    Parameters
    ----------
    p : float64 array
        Parameter vector with the phase written in (activity flags) [SI, unit per slot].
    active : int64 array, shape (N_EVENTS,)
        Written: the active events' indices, in :data:`~thermoelec.engine.events.EVENTS` order [-].

    Returns
    -------
    int
        The number of active events [-].
    """
    n_active = 0
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] != 0.0:
            active[n_active] = k
            n_active += 1
    return n_active


@_inline
def root_function(k, y, p, alg):
    """The value of active event function ``k`` at ``y`` (:func:`roots_from` says what each measures).

    Parameters
    ----------
    k : int
        Event index (:data:`~thermoelec.engine.events.EVENTS`) [-].
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in (thresholds) [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        The algebraic outputs at ``y``, read [A, V, Ω, W, K, ... unit per slot].

    Returns
    -------
    float
        The root function, positive on the safe side [V, V², K, - or A, by event].
    """
    z = alg[A_SOC]
    voltage = alg[A_VOLTAGE]
    thr = p[H_THRESHOLD + k]
    if k == EV_VOLTAGE_MIN:
        return alg[A_CELL_VOLTAGE] - thr
    elif k == EV_VOLTAGE_MAX:
        return thr - alg[A_CELL_VOLTAGE_HIGH]
    elif k == EV_POWER:
        return alg[A_POWER_MARGIN]
    elif k == EV_TEMPERATURE:
        return thr - alg[A_TEMPERATURE_HIGH]
    elif k == EV_SOC_EMPTY:
        return alg[A_SOC_LOW] - thr
    elif k == EV_SOC_FULL:
        return thr - alg[A_SOC_HIGH]
    elif k == EV_CV_SWITCH:
        return thr - voltage
    elif k == EV_CV_CUTOFF:
        return abs(alg[A_CURRENT]) - thr
    elif k == EV_END_VOLTAGE_BELOW:
        return voltage - thr
    elif k == EV_END_VOLTAGE_ABOVE:
        return thr - voltage
    elif k == EV_END_SOC_BELOW:
        return z - thr
    elif k == EV_END_SOC_ABOVE:
        return thr - z
    elif k == EV_DISCHARGE_CURRENT:
        return alg[A_MARGIN_DISCHARGE_CURRENT]
    elif k == EV_CHARGE_CURRENT:
        return alg[A_MARGIN_CHARGE_CURRENT]
    elif k == EV_DISCHARGE_POWER:
        return alg[A_MARGIN_DISCHARGE_POWER]
    elif k == EV_CHARGE_POWER:
        return alg[A_MARGIN_CHARGE_POWER]
    elif k == EV_DISCHARGE_TEMPERATURE:
        return alg[A_TEMPERATURE_LOW] - thr
    elif k == EV_CHARGE_TEMPERATURE:
        return thr - alg[A_TEMPERATURE_HIGH]
    elif k == EV_SINK_TEMPERATURE:
        return thr - y[int(p[H_NCELLS]) * (2 + int(p[H_NRC]))]  # layout.sink_temperature_index
    elif k == EV_HOLD_MIN:
        # only while the pack discharges: at no current (a ramp's start) or charging, the limiter holds nothing
        # (a rested cell's OCV may sit past a limit, e.g. full and cold with its entropic shift)
        return alg[A_CELL_VOLTAGE] - thr if p[H_HOLD] == 0.0 and alg[A_CURRENT] > 0.0 else 1.0
    elif k == EV_HOLD_MAX:
        return thr - alg[A_CELL_VOLTAGE_HIGH] if p[H_HOLD] == 0.0 and alg[A_CURRENT] < 0.0 else 1.0
    elif k == EV_HOLD_RELEASE:
        # held: the demand (within the allowances) falls below the held current by the hysteresis
        if p[H_HOLD] == 1.0:
            return alg[A_CURRENT_ALLOWED] + p[H_HOLD_HYSTERESIS] - alg[A_HOLD_DISCHARGE]
        elif p[H_HOLD] == -1.0:
            return alg[A_HOLD_CHARGE] - alg[A_CURRENT_ALLOWED] + p[H_HOLD_HYSTERESIS]
        else:
            return 1.0
    elif k == EV_NOTHING_DELIVERABLE:
        asked = alg[A_CURRENT_DEMANDED] if alg[A_CURRENT_DEMANDED] > 0.0 else 0.0
        return alg[A_DELIVERABLE] - (asked if asked < p[H_CUTOFF] else p[H_CUTOFF])
    else:
        # a thermostat: the threshold is the one it switches at next; a cooling
        # switch (fan, pump) that is off and a heater that is on wait for the
        # temperature to rise to it, the others for it to fall
        # (the heater senses the coldest cell, the fan and the pump the hottest)
        rising = (p[CONTROL_FLAG_OF[k - EV_FAN]] == 1.0) == (k == EV_HEATER)
        sensed = alg[A_TEMPERATURE_LOW] if k == EV_HEATER else alg[A_TEMPERATURE_HIGH]
        return thr - sensed if rising else sensed - thr


@jit.ahead_of_time("void(f8[::1], f8[:, ::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def jacobian(y, jac, p, alg, f0, f1, yy):
    """Forward-difference Jacobian ``df/dy`` into ``jac`` (dense, row = equation).

    The quadrature columns are zero (nothing depends on a running integral), so
    only the dynamic columns (:func:`thermoelec.engine.layout.n_dynamic`) are differenced. Step
    ``sqrt(eps) * max(|y_j|, 1)``, with ``eps`` the float64 machine epsilon, as in
    Dennis & Schnabel §5.4: it balances the truncation error of the difference
    against the rounding error of ``f``.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    jac : float64 array, shape (n_states, n_states)
        Written: ``jac[i, j] = df_i/dy_j`` [unit of dy_i/dt per unit of y_j].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Work array for the algebraic outputs [A, V, Ω, W, K, ... unit per slot].
    f0 : float64 array, shape (n_states,)
        Written: ``f(y)`` [1/s, V/s, K/s, W, A].
    f1 : float64 array, shape (n_states,)
        Work array for ``f(y + h e_j)`` [1/s, V/s, K/s, W, A].
    yy : float64 array, shape (n_states,)
        Work array for the perturbed state [-, V, K, J, C].

    References
    ----------
    J. E. Dennis, R. B. Schnabel, *Numerical Methods for Unconstrained Optimization
    and Nonlinear Equations*, Prentice-Hall (1983), §5.4.
    """
    n = y.shape[0]
    ndyn = int(p[H_NCELLS]) * (2 + int(p[H_NRC])) + 2  # layout.n_dynamic
    evaluate_any(y, p, f0, alg)
    for i in range(n):
        yy[i] = y[i]
    for j in range(n):
        for i in range(n):
            jac[i, j] = 0.0
    for j in range(ndyn):
        h = 1.4901161193847656e-08 * max(abs(y[j]), 1.0)
        yy[j] = y[j] + h
        evaluate_any(yy, p, f1, alg)
        yy[j] = y[j]
        for i in range(n):
            jac[i, j] = (f1[i] - f0[i]) / h


@jit.ahead_of_time("f8(f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[:, ::1], f8)")
@_jit
def diagonal_newton_contraction(y, p, alg, f0, f1, yy, jac, gamma):
    """Bound on the contraction factor of Newton's iteration when only the Jacobian's diagonal is used.

    An implicit step solves ``(I - gamma J) dy = r``; iterating with the diagonal
    ``D`` of ``J`` alone converges with the rate of ``E = (I - gamma D)^-1 gamma O``
    (``O`` the off-diagonal part), the Jacobi splitting of ``I - gamma J``. Its
    spectral radius is at most its row-sum norm, as for any induced norm (Horn &
    Johnson). The diagonal Newton matrix is CVODE's CVDIAG module (Hindmarsh et
    al.). Taken over the dynamic states; the quadratures only receive and do not
    change the rate. Where the diagonal entries are negative (decaying states),
    each row's bound grows with ``gamma``, so the bound for the longest step of a
    phase holds for its shorter steps too (at the state where it is taken).

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State at which the Jacobian is taken (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Work array for the algebraic outputs [A, V, Ω, W, K, ... unit per slot].
    f0 : float64 array, shape (n_states,)
        Work array for ``f(y)`` [1/s, V/s, K/s, W, A].
    f1 : float64 array, shape (n_states,)
        Work array for the differenced ``f`` [1/s, V/s, K/s, W, A].
    yy : float64 array, shape (n_states,)
        Work array for the perturbed state [-, V, K, J, C].
    jac : float64 array, shape (n_states, n_states)
        Work array for the Jacobian [unit of dy_i/dt per unit of y_j].
    gamma : float
        The ``gamma`` of the Newton matrix ``I - gamma J``, a step size times the
        method's leading coefficient; the CVODE back end passes the phase length [s].

    Returns
    -------
    float
        The largest row sum of ``|E|`` over the dynamic states [-]; below 1 the
        diagonal iteration converges.

    References
    ----------
    R. A. Horn, C. R. Johnson, *Matrix Analysis*, Cambridge University Press (1985),
    Thm. 5.6.9 (theorem number from memory).

    A. C. Hindmarsh et al., "SUNDIALS: Suite of nonlinear and differential/algebraic
    equation solvers", ACM TOMS 31 (2005) 363.
    """
    jacobian(y, jac, p, alg, f0, f1, yy)
    ndyn = int(p[H_NCELLS]) * (2 + int(p[H_NRC])) + 2  # layout.n_dynamic
    worst = 0.0
    for i in range(ndyn):
        off = 0.0
        for j in range(ndyn):
            if j != i:
                off += abs(jac[i, j])
        rate = gamma * off / max(abs(1.0 - gamma * jac[i, i]), 1e-300)
        if rate > worst:
            worst = rate
    return worst


# ---- RC voltages relative to their exact zero-order-hold response --------------
# Within a phase the current of a cell changes little, and an RC voltage then follows
#     b_k(t) = v_inf + (v_0 - v_inf) exp(-(t - t_0) / tau_k),  v_inf = R_k I_cell(t_0),
# the exact zero-order-hold response of the pair (the discrete-time equivalent-circuit
# form of Plett, *Battery Management Systems*, Vol. I, Artech House 2015). The CVODE
# back end integrates w_k = v_k - b_k(t) instead of v_k: an exact change of variables
# (the idea of Lawson's integrating factor, SIAM J. Numer. Anal. 4 (1967) 372), so every
# equation and root function is unchanged, but w_k starts at zero with zero slope and
# stays small and smooth. After a restart the integrator no longer creeps up the fast
# exponential from a tiny first step; its step is set by the slow states.
# Base vector: [t_0, (state index, v_0, v_inf, tau) per pair of every cell].


def rc_base_size(n_rc: int, n_cells: int = 1) -> int:
    """Length of the RC base vector ``[t_0, (index, v_0, v_inf, tau) per pair of every cell]``.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    int
        ``1 + 4 n_rc n_cells`` [-].
    """
    return 1 + 4 * n_rc * n_cells


@_jit
def rc_base_setup(y, p, alg, scratch, t0, base):
    """Fill ``base`` with the zero-order-hold response of each RC pair from state ``y`` at ``t0``.

    With the cell current held at its value at ``y``, pair ``k`` relaxes exactly as
    ``b_k(t) = v_inf + (v_0 - v_inf) exp(-(t - t_0) / tau_k)`` from ``v_0 = v_k``
    towards ``v_inf = R_k I_cell``, ``tau_k = R_k C_k`` (the zero-order-hold response
    of Plett's discrete-time form). Where ``tau`` is not positive and finite, or the
    current not finite, the pair gets ``tau = 0``: ``b(t) = v_0``, a constant shift,
    still exact. In a resolved pack each cell's pairs take its own current (from
    the work block) and resistance factor.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State at the phase start (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs at ``y`` [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    t0 : float
        Time of the phase start [s].
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        Written: ``[t_0, (index, v_0, v_inf, tau) per pair]`` [s, then -, V, V, s per pair].

    References
    ----------
    G. L. Plett, *Battery Management Systems*, Vol. I, Artech House (2015).
    """
    evaluate_any(y, p, scratch, alg)
    nrc = int(p[H_NRC])
    n = int(p[H_NCELLS])
    table = int(p[H_CELLS])
    work = int(p[H_WORK])
    base[0] = t0
    for c in range(n):
        b = c * (2 + nrc)
        if table == 0:
            icell = alg[A_CURRENT] / p[H_NP]
        else:
            icell = p[work + c * WORK_WIDTH + W_CURRENT]
        z = y[b]
        tc = y[b + 1 + nrc]
        off = int(p[H_RC])
        for k in range(nrc):
            r, cap = _rc_pair(p, off, z, tc)
            if table != 0:
                r *= p[table + c * (CELL_RC + nrc) + CELL_RC + k]
            tau = r * cap
            ok = tau > 0.0 and np.isfinite(tau) and np.isfinite(icell)
            at = 1 + 4 * (c * nrc + k)
            base[at] = b + 1 + k
            base[at + 1] = y[b + 1 + k]
            base[at + 2] = r * icell if ok else y[b + 1 + k]
            base[at + 3] = tau if ok else 0.0
            off += rc_length(p, off)


@jit.ahead_of_time("void(f8[::1], f8[::1], f8[::1], f8, f8)")
@_jit
def rc_base_add(w, y, base, t, sign):
    """``y = w + sign * b(t)`` on the RC slots, ``y = w`` elsewhere; returns nothing.

    ``sign = 1`` gives the state from the shifted variables, ``sign = -1`` the
    shifted variables from the state.

    Parameters
    ----------
    w : float64 array, shape (n_states,)
        The vector to shift, read [-, V, K, J, C].
    y : float64 array, shape (n_states,)
        Written: the shifted vector [-, V, K, J, C].
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        RC base vector of :func:`rc_base_setup` [s, then -, V, V, s per pair].
    t : float
        Time at which ``b`` is taken [s].
    sign : float
        +1.0 or -1.0 [-].
    """
    for i in range(w.shape[0]):
        y[i] = w[i]
    s = t - base[0]
    for k in range((base.shape[0] - 1) // 4):
        at = 1 + 4 * k
        i, v0, v_inf, tau = int(base[at]), base[at + 1], base[at + 2], base[at + 3]
        b = v0 if tau == 0.0 else v_inf + (v0 - v_inf) * np.exp(-s / tau)
        y[i] = w[i] + sign * b


@jit.ahead_of_time("f8(f8[::1], f8[::1], f8[::1], f8[::1], f8, f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], "
                   "f8[:, ::1], f8)")
@_jit
def shift_phase_start(y0, p, alg, scratch, t0, base, w0, f0, f1, yy, jac, gamma):
    """Start a CVODE phase at ``(t0, y0)``.

    Writes ``t0`` into the time slot of ``p``, sets the RC base there
    (:func:`rc_base_setup`), writes ``w0 = y0 - b(t0)`` and returns
    :func:`diagonal_newton_contraction` for steps up to ``gamma`` (0 when ``gamma``
    is 0: not wanted). One kernel call instead of three, at every restart.

    Parameters
    ----------
    y0 : float64 array, shape (n_states,)
        State at the phase start (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Work array for the algebraic outputs [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    t0 : float
        Time of the phase start [s].
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        Written: the RC base vector [s, then -, V, V, s per pair].
    w0 : float64 array, shape (n_states,)
        Written: the shifted initial state ``y0 - b(t0)`` [-, V, K, J, C].
    f0 : float64 array, shape (n_states,)
        Work array for ``f(y)`` [1/s, V/s, K/s, W, A].
    f1 : float64 array, shape (n_states,)
        Work array for the differenced ``f`` [1/s, V/s, K/s, W, A].
    yy : float64 array, shape (n_states,)
        Work array for the perturbed state [-, V, K, J, C].
    jac : float64 array, shape (n_states, n_states)
        Work array for the Jacobian [unit of dy_i/dt per unit of y_j].
    gamma : float
        Longest ``gamma`` of the phase's Newton matrices, 0 for no contraction bound [s].

    Returns
    -------
    float
        The contraction bound of :func:`diagonal_newton_contraction`, 0 when not wanted [-].
    """
    p[H_TIME] = t0
    rc_base_setup(y0, p, alg, scratch, t0, base)
    rc_base_add(y0, w0, base, t0, -1.0)
    if gamma == 0.0:
        return 0.0
    return diagonal_newton_contraction(y0, p, alg, f0, f1, yy, jac, gamma)


@jit.ahead_of_time("void(f8, f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def shifted_rhs(t, w, wdot, p, alg, base, y):
    """Right-hand side in the shifted variables: ``dw/dt = f(w + b(t)) - b'(t)``; sets the time in ``p``.

    An exact change of variables (Lawson's integrating-factor idea): the equations
    are those of :func:`evaluate`, but the fast RC exponentials are taken out.

    Parameters
    ----------
    t : float
        Time [s].
    w : float64 array, shape (n_states,)
        Shifted state, ``y - b(t)`` on the RC slots [-, V, K, J, C].
    wdot : float64 array, shape (n_states,)
        Written: ``dw/dt`` [1/s, V/s, K/s, W, A].
    p : float64 array
        Parameter vector with the phase written in; its time slot is written [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs at ``w + b(t)`` [A, V, Ω, W, K, ... unit per slot].
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        RC base vector of :func:`rc_base_setup` [s, then -, V, V, s per pair].
    y : float64 array, shape (n_states,)
        Written: the state ``w + b(t)`` [-, V, K, J, C].

    References
    ----------
    J. D. Lawson, SIAM J. Numer. Anal. 4 (1967) 372.
    """
    p[H_TIME] = t
    rc_base_add(w, y, base, t, 1.0)
    evaluate_any(y, p, wdot, alg)
    s = t - base[0]
    for k in range((base.shape[0] - 1) // 4):
        at = 1 + 4 * k
        i, v0, v_inf, tau = int(base[at]), base[at + 1], base[at + 2], base[at + 3]
        if tau != 0.0:
            wdot[i] -= (v_inf - v0) / tau * np.exp(-s / tau)


@jit.ahead_of_time("void(f8, f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def shifted_roots(t, w, g, p, alg, scratch, base, y):
    """Event functions at ``w + b(t)`` (the caller writes the time into ``p``).

    Parameters
    ----------
    t : float
        Time [s].
    w : float64 array, shape (n_states,)
        Shifted state, ``y - b(t)`` on the RC slots [-, V, K, J, C].
    g : float64 array, shape (N_EVENTS,)
        Written: the root functions [V, V², K, - or A, by event]; inactive ones read 1.
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs at ``w + b(t)`` [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        RC base vector of :func:`rc_base_setup` [s, then -, V, V, s per pair].
    y : float64 array, shape (n_states,)
        Written: the state ``w + b(t)`` [-, V, K, J, C].
    """
    rc_base_add(w, y, base, t, 1.0)
    roots(y, g, p, alg, scratch)


@jit.ahead_of_time("void(f8, f8[::1], f8[:, ::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def shifted_jacobian(t, w, jac, p, alg, f0, f1, yy, base, y):
    """Jacobian of the shifted system: ``b`` does not depend on ``w``, so it is ``df/dy`` at ``w + b(t)``.

    The caller writes the time into ``p``.

    Parameters
    ----------
    t : float
        Time [s].
    w : float64 array, shape (n_states,)
        Shifted state, ``y - b(t)`` on the RC slots [-, V, K, J, C].
    jac : float64 array, shape (n_states, n_states)
        Written: ``df_i/dy_j`` at ``w + b(t)`` [unit of dy_i/dt per unit of y_j].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Work array for the algebraic outputs [A, V, Ω, W, K, ... unit per slot].
    f0 : float64 array, shape (n_states,)
        Work array for ``f(y)`` [1/s, V/s, K/s, W, A].
    f1 : float64 array, shape (n_states,)
        Work array for the differenced ``f`` [1/s, V/s, K/s, W, A].
    yy : float64 array, shape (n_states,)
        Work array for the perturbed state [-, V, K, J, C].
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        RC base vector of :func:`rc_base_setup` [s, then -, V, V, s per pair].
    y : float64 array, shape (n_states,)
        Written: the state ``w + b(t)`` [-, V, K, J, C].
    """
    rc_base_add(w, y, base, t, 1.0)
    jacobian(y, jac, p, alg, f0, f1, yy)


@uncounted
def start_check(y, p, alg, scratch, yy, g, g_ahead, probe, slack):
    """Events already true at a phase start, and the reach of the others.

    Root finding cannot see a root function that is already non-positive when a
    phase starts (a jump of the demand can put the voltage below its minimum at
    once), so this is checked here. A function at zero that is not heading down
    (a full cell at rest) is switched off for the phase, in ``p``. With an imposed
    terminal voltage the cell voltage limits are checked here, with a relative
    ``slack``. The probe is a first-order (Euler) step along ``dy/dt`` at ``y``,
    with the time slot of ``p`` left as it is.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State at the phase start (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in; activity flags may be cleared [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Work array for the algebraic outputs [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    yy : float64 array, shape (n_states,)
        Work array for the probe's state (the check allocates nothing) [-, V, K, J, C].
    g : float64 array, shape (N_EVENTS,)
        Written: the root functions at the start [V, V², K, - or A, by event].
    g_ahead : float64 array, shape (N_EVENTS,)
        Written: the root functions ``probe`` seconds along the initial slope [V, V², K, - or A, by event].
    probe : float
        Length of the probe step [s].
    slack : float
        Relative slack on the cell voltage limits under an imposed terminal voltage [-].

    Returns
    -------
    int
        Code of the event that fired (the first by :data:`EVENT_PRIORITY`: the power
        limit, then by code), or -1 for none [-].
    """
    n = y.shape[0]
    evaluate_any(y, p, scratch, alg)
    roots_from(y, g, p, alg)
    for i in range(n):
        yy[i] = y[i] + probe * scratch[i]
    evaluate_any(yy, p, scratch, alg)
    roots_from(yy, g_ahead, p, alg)
    fired = -1
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] == 0.0:
            continue
        tol = ROOT_TOLERANCE * EVENT_SCALES[k]
        if g[k] < -tol or (g[k] <= tol and g_ahead[k] < g[k]):
            if fired < 0 or EVENT_RANK[k] < EVENT_RANK[fired]:
                fired = k
    if fired >= 0:
        return fired
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] != 0.0 and g[k] <= ROOT_TOLERANCE * EVENT_SCALES[k]:
            p[H_ACTIVE + k] = 0.0
    if int(p[H_MODE]) == MODE_VOLTAGE:
        evaluate_any(y, p, scratch, alg)
        if alg[A_CELL_VOLTAGE_HIGH] > p[H_THRESHOLD + EV_VOLTAGE_MAX] * (1.0 + slack):
            return EV_VOLTAGE_MAX
        if alg[A_CELL_VOLTAGE] < p[H_THRESHOLD + EV_VOLTAGE_MIN] * (1.0 - slack):
            return EV_VOLTAGE_MIN
    return -1


@_jit
def beyond_reach(g, g_ahead, p, probe, duration, factor):
    """True when every active root function stays clear of zero over the phase.

    "Clear" means ``g(t0) > factor * |g'(t0)| * duration``: beyond ``factor``
    times the first-order reach, with ``g'`` from the probe. Such a phase can be
    integrated without root finding (checked at its end by the driver).

    Parameters
    ----------
    g : float64 array, shape (N_EVENTS,)
        Root functions at the phase start [V, V², K, - or A, by event].
    g_ahead : float64 array, shape (N_EVENTS,)
        Root functions ``probe`` seconds along the initial slope [V, V², K, - or A, by event].
    p : float64 array
        Parameter vector with the phase written in (activity flags) [SI, unit per slot].
    probe : float
        Length of the probe step [s].
    duration : float
        Length of the phase [s].
    factor : float
        Safety factor on the first-order reach [-].

    Returns
    -------
    bool
        True when no active root function can reach zero within the phase at
        ``factor`` times its initial rate [-].
    """
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] == 0.0:
            continue
        slope = abs(g_ahead[k] - g[k]) / probe
        if g[k] <= factor * slope * duration:
            return False
    return True


@jit.ahead_of_time("i8(f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8[::1], f8, f8, f8, f8)")
@_jit
def phase_start(y, p, alg, scratch, g, g_ahead, probe, slack, duration, factor):
    """:func:`start_check`, then :func:`beyond_reach` over ``duration``, in one call.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State at the phase start (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in; activity flags may be cleared [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Work array for the algebraic outputs [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    g : float64 array, shape (N_EVENTS,)
        Written: the root functions at the start [V, V², K, - or A, by event].
    g_ahead : float64 array, shape (N_EVENTS,)
        Written: the root functions ``probe`` seconds along the initial slope [V, V², K, - or A, by event].
    probe : float
        Length of the probe step [s].
    slack : float
        Relative slack on the cell voltage limits under an imposed terminal voltage [-].
    duration : float
        Length of the phase [s].
    factor : float
        Safety factor on the first-order reach [-].

    Returns
    -------
    int
        The event that fired (>= 0), -1 when the phase needs root finding, or -2
        when every root function stays beyond reach [-].
    """
    fired = start_check(y, p, alg, scratch, np.empty(y.shape[0]), g, g_ahead, probe, slack)
    if fired >= 0:
        return fired
    return -2 if beyond_reach(g, g_ahead, p, probe, duration, factor) else -1


@jit.ahead_of_time("i8(f8[::1], f8[::1])")
@_jit
def fired_event(g, p):
    """The event that fired at a located root, given the root-function values ``g``.

    Among the active functions within :data:`ROOT_TOLERANCE` of their scale of
    zero (or below) the first by :data:`EVENT_PRIORITY` wins; should none be that
    close, the nearest to zero (relative to its scale) does.

    Parameters
    ----------
    g : float64 array, shape (N_EVENTS,)
        Root functions at the located root [V, V², K, - or A, by event].
    p : float64 array
        Parameter vector with the phase written in (activity flags) [SI, unit per slot].

    Returns
    -------
    int
        Event code (:data:`~thermoelec.engine.events.EVENTS` order) [-].
    """
    for k in EVENT_PRIORITY:
        if p[H_ACTIVE + k] != 0.0 and g[k] <= ROOT_TOLERANCE * EVENT_SCALES[k]:
            return k
    best, event = np.inf, 0
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] != 0.0 and g[k] / EVENT_SCALES[k] < best:
            best, event = g[k] / EVENT_SCALES[k], k
    return event


@jit.ahead_of_time("b1(f8[::1], f8[::1], f8[::1], f8[::1], f8[::1])")
@_jit
def all_positive(y, p, alg, scratch, g):
    """True when every active root function is positive at ``y``.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs at ``y`` [A, V, Ω, W, K, ... unit per slot].
    scratch : float64 array, shape (n_states,)
        Work array for ``dy/dt`` [1/s, V/s, K/s, W, A].
    g : float64 array, shape (N_EVENTS,)
        Written: the root functions at ``y`` [V, V², K, - or A, by event].

    Returns
    -------
    bool
        No active root function is zero or below [-].
    """
    roots(y, g, p, alg, scratch)
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] != 0.0 and g[k] <= 0.0:
            return False
    return True


@_jit
def evaluate_rows(states, params, algebraics):
    """Algebraic outputs for many rows, each with its own parameter vector.

    Parameters
    ----------
    states : float64 array, shape (n, n_states)
        State rows (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    params : float64 array, shape (n, len(p))
        The parameter vector of each row, its time slot set [SI, unit per slot].
    algebraics : float64 array, shape (n, N_ALGEBRAICS)
        Written: the algebraic outputs of each row [A, V, Ω, W, K, ... unit per slot].
    """
    n = states.shape[1]
    scratch = np.empty(n)
    alg = np.empty(N_ALGEBRAICS)
    for r in range(states.shape[0]):
        evaluate_any(states[r], params[r], scratch, alg)
        for k in range(N_ALGEBRAICS):
            algebraics[r, k] = alg[k]


class Kernels:
    """Python-callable closures over one parameter vector, in the signatures solvers want.

    The vector ``p`` is shared and mutated between phases (mode, demand, ambient,
    active events), so the closures never need rebuilding. Work buffers are
    allocated once here and reused at every call.

    Parameters
    ----------
    p : float64 array
        The parameter vector (:mod:`thermoelec.engine.layout`), kept by reference [SI, unit per slot].
    size : int
        Number of states, :func:`thermoelec.engine.layout.n_states` [-].

    Attributes
    ----------
    base : float64 array, shape (1 + 4 n_rc n_cells,)
        RC base vector of the current phase (:func:`rc_base_setup`) [s, then -, V, V, s per pair].
    error : BaseException or None
        An exception raised inside a solver callback, kept for the back end to report.
    g, g_ahead : float64 array, shape (N_EVENTS,)
        Root functions at the last phase start and at its probe [V, V², K, - or A, by event].
    cvode_rhs : callable
        ``cvode_rhs(t, w, wdot) -> int``, the shifted right-hand side for CVODE.
    """

    def __init__(self, p: np.ndarray, size: int):
        self.p = p
        self.size = size
        self._alg = np.empty(N_ALGEBRAICS)
        self._scratch = np.empty(size)
        self._f0 = np.empty(size)
        self._f1 = np.empty(size)
        self._yy = np.empty(size)
        self._shifted = np.empty(size)
        self._jac = np.empty((size, size))
        # no shift until shift_from: tau = 0 reads b(t) = v_0 = 0
        self.base = np.zeros(rc_base_size(int(p[H_NRC]), int(p[H_NCELLS])))
        self.error: BaseException | None = None
        self.g = np.empty(N_EVENTS)
        self.g_ahead = np.empty(N_EVENTS)
        self._g_end = np.empty(N_EVENTS)
        self.cvode_rhs = self._cvode_rhs()

    # scikits.odes signatures: write into the given buffers, return 0 or a negative flag.
    # CVODE sees the shifted variables w = y - b(t) of :func:`rc_base_setup`; see
    # :meth:`shift_from` and :meth:`unshift`.
    def shift_from(self, t0: float, y0: np.ndarray, gamma: float = 0.0) -> tuple[np.ndarray, float]:
        """Start a phase at ``(t0, y0)``: see :func:`shift_phase_start`.

        Parameters
        ----------
        t0 : float
            Time of the phase start [s].
        y0 : float64 array, shape (n_states,)
            State at the phase start (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        gamma : float
            Longest ``gamma`` of the phase's Newton matrices, 0 for no contraction bound [s].

        Returns
        -------
        w0 : float64 array, shape (n_states,)
            Shifted initial state for CVODE, ``y0 - b(t0)`` [-, V, K, J, C].
        contraction : float
            Bound of :func:`diagonal_newton_contraction`, 0 when not wanted [-].
        """
        w0 = np.empty(self.size)
        contraction = shift_phase_start(y0, self.p, self._alg, self._scratch, t0, self.base, w0, self._f0,
                                        self._f1, self._yy, self._jac, gamma)
        return w0, contraction

    def unshift(self, t: float, w: np.ndarray) -> np.ndarray:
        """The state ``y = w + b(t)`` (a new array; ``w`` a float64 vector).

        Parameters
        ----------
        t : float
            Time [s].
        w : float64 array, shape (n_states,)
            Shifted state from CVODE [-, V, K, J, C].

        Returns
        -------
        float64 array, shape (n_states,)
            The state (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        """
        y = np.empty(self.size)
        rc_base_add(w, y, self.base, t, 1.0)
        return y

    def _cvode_rhs(self):
        """The right-hand side for CVODE, a closure over the buffers: CVODE calls it ~10^4 times a mission."""
        p, alg, base, shifted = self.p, self._alg, self.base, self._shifted

        def cvode_rhs(t: float, y: np.ndarray, ydot: np.ndarray) -> int:
            try:
                shifted_rhs(t, y, ydot, p, alg, base, shifted)
            except BaseException as exc:  # an exception must not cross the C boundary
                self.error = exc
                return -1
            return 0

        return cvode_rhs

    def cvode_roots(self, t: float, y: np.ndarray, g: np.ndarray) -> int:
        """Root functions for CVODE (scikits.odes ``rootfn``), at the shifted state ``y``.

        Writes ``t`` into the time slot of ``p``. An exception is kept in
        :attr:`error` and reported as -1: it must not cross the C boundary.

        Parameters
        ----------
        t : float
            Time [s].
        y : float64 array, shape (n_states,)
            CVODE's state: the shifted variables ``w = y - b(t)`` [-, V, K, J, C].
        g : float64 array, shape (N_EVENTS,)
            Written: the root functions at ``w + b(t)`` [V, V², K, - or A, by event].

        Returns
        -------
        int
            0, or -1 when a kernel raised [-].
        """
        self.p[H_TIME] = t
        try:
            shifted_roots(t, y, g, self.p, self._alg, self._scratch, self.base, self._shifted)
        except BaseException as exc:
            self.error = exc
            return -1
        return 0

    def cvode_jacobian(self, t: float, y: np.ndarray, fy: np.ndarray, jac: np.ndarray) -> int:
        """Dense Jacobian for CVODE (scikits.odes ``jacfn``), at the shifted state ``y``.

        Writes ``t`` into the time slot of ``p``. An exception is kept in
        :attr:`error` and reported as -1.

        Parameters
        ----------
        t : float
            Time [s].
        y : float64 array, shape (n_states,)
            CVODE's state: the shifted variables ``w = y - b(t)`` [-, V, K, J, C].
        fy : float64 array, shape (n_states,)
            CVODE's ``f(t, y)``, not used: the difference quotient evaluates its own [1/s, V/s, K/s, W, A].
        jac : float64 array, shape (n_states, n_states)
            Written: ``df_i/dy_j`` [unit of dy_i/dt per unit of y_j].

        Returns
        -------
        int
            0, or -1 when a kernel raised [-].
        """
        self.p[H_TIME] = t
        try:
            shifted_jacobian(t, y, jac, self.p, self._alg, self._f0, self._f1, self._yy, self.base,
                             self._shifted)
        except BaseException as exc:
            self.error = exc
            return -1
        return 0

    # scipy signatures: return new arrays
    def scipy_rhs(self, t: float, y: np.ndarray) -> np.ndarray:
        """Right-hand side for ``solve_ivp`` (unshifted): writes ``t`` into ``p``, returns a new array.

        Parameters
        ----------
        t : float
            Time [s].
        y : float64 array, shape (n_states,)
            State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].

        Returns
        -------
        float64 array, shape (n_states,)
            ``dy/dt`` [1/s, V/s, K/s, W, A].
        """
        self.p[H_TIME] = t
        ydot = np.empty(self.size)
        rhs(y, ydot, self.p, self._alg)
        return ydot

    def event_values(self, y: np.ndarray) -> np.ndarray:
        """All root functions at ``y`` (inactive ones read 1).

        Taken at the time last written into ``p`` (an ambient profile reads it): the
        call has no time argument.

        Parameters
        ----------
        y : array of float, shape (n_states,)
            State (:mod:`thermoelec.engine.layout`), converted to contiguous float64 [-, V, K, J, C].

        Returns
        -------
        float64 array, shape (N_EVENTS,)
            The root functions in :data:`~thermoelec.engine.events.EVENTS` order [V, V², K, - or A, by event].
        """
        g = np.empty(N_EVENTS)
        roots(np.ascontiguousarray(y, dtype=float), g, self.p, self._alg, self._scratch)
        return g

    def scipy_jacobian(self, t: float, y: np.ndarray) -> np.ndarray:
        """Dense Jacobian for ``solve_ivp`` (unshifted): writes ``t`` into ``p``, returns a new array.

        Parameters
        ----------
        t : float
            Time [s].
        y : array of float, shape (n_states,)
            State (:mod:`thermoelec.engine.layout`), converted to contiguous float64 [-, V, K, J, C].

        Returns
        -------
        float64 array, shape (n_states, n_states)
            ``df_i/dy_j`` [unit of dy_i/dt per unit of y_j].
        """
        self.p[H_TIME] = t
        jac = np.empty((self.size, self.size))
        jacobian(np.ascontiguousarray(y, dtype=float), jac, self.p, self._alg, self._f0, self._f1, self._yy)
        return jac

    def phase_start(self, y: np.ndarray, probe: float, slack: float, duration: float, factor: float) -> int:
        """See :func:`phase_start`; fills ``self.g`` and ``self.g_ahead``.

        Parameters
        ----------
        y : float64 array, shape (n_states,)
            State at the phase start (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        probe : float
            Length of the probe step [s].
        slack : float
            Relative slack on the cell voltage limits under an imposed terminal voltage [-].
        duration : float
            Length of the phase [s].
        factor : float
            Safety factor on the first-order reach [-].

        Returns
        -------
        int
            The event that fired (>= 0), -1 when the phase needs root finding, or -2
            when every root function stays beyond reach [-].
        """
        return phase_start(y, self.p, self._alg, self._scratch, self.g, self.g_ahead, probe, slack, duration, factor)

    def diagonal_newton_contraction(self, y: np.ndarray, gamma: float) -> float:
        """See :func:`diagonal_newton_contraction`.

        Parameters
        ----------
        y : float64 array, shape (n_states,)
            State at which the Jacobian is taken (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
        gamma : float
            The ``gamma`` of the Newton matrix ``I - gamma J`` [s].

        Returns
        -------
        float
            Bound on the contraction factor of the diagonal Newton iteration [-].
        """
        return diagonal_newton_contraction(y, self.p, self._alg, self._f0, self._f1, self._yy, self._jac, gamma)

    def algebraics(self, y: np.ndarray) -> np.ndarray:
        """The algebraic outputs at ``y`` (a new array), at the time last written into ``p``.

        Parameters
        ----------
        y : array of float, shape (n_states,)
            State (:mod:`thermoelec.engine.layout`), converted to contiguous float64 [-, V, K, J, C].

        Returns
        -------
        float64 array, shape (N_ALGEBRAICS,)
            Current [A], voltages [V], heats [W], ... in the order of
            :data:`thermoelec.engine.layout.ALGEBRAICS`.
        """
        rhs(np.ascontiguousarray(y, dtype=float), self._scratch, self.p, self._alg)
        return self._alg.copy()

    def all_positive(self, y: np.ndarray) -> bool:
        """See :func:`all_positive`.

        Parameters
        ----------
        y : float64 array, shape (n_states,)
            State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].

        Returns
        -------
        bool
            No active root function is zero or below [-].
        """
        return all_positive(y, self.p, self._alg, self._scratch, self._g_end)


@jit.ahead_of_time("void(f8[:, ::1], f8[::1], f8[:, ::1], i8[::1], f8[::1], f8[:, ::1])")
@_jit
def evaluate_phase_rows(states, times, headers, phase_index, p, algebraics):
    """Algebraic outputs of many rows, each in its phase: the phase's header written into ``p`` first.

    The blocks after the header (tables, laws, a resolved pack's cell table) do not
    change between phases, so a trajectory keeps one parameter vector and the
    header of each phase (a resolved pack's vector is tens of kilobytes).

    Parameters
    ----------
    states : float64 array, shape (n, n_states)
        State rows (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    times : float64 array, shape (n,)
        Row times [s].
    headers : float64 array, shape (n_phases, HEADER)
        The header of the parameter vector of each phase [SI, unit per slot].
    phase_index : int64 array, shape (n,)
        The phase of each row [-].
    p : float64 array
        A parameter vector of the scenario, overwritten (header, time, work block) [SI, unit per slot].
    algebraics : float64 array, shape (n, N_ALGEBRAICS)
        Written: the algebraic outputs of each row [A, V, Ω, W, K, ... unit per slot].
    """
    scratch = np.empty(states.shape[1])
    alg = np.empty(N_ALGEBRAICS)
    for r in range(states.shape[0]):
        for k in range(headers.shape[1]):
            p[k] = headers[phase_index[r], k]
        p[H_TIME] = times[r]
        evaluate_any(states[r], p, scratch, alg)
        for k in range(N_ALGEBRAICS):
            algebraics[r, k] = alg[k]


def trajectory_algebraics(times: np.ndarray, states: np.ndarray, phase_params: np.ndarray,
                          phase_index: np.ndarray, parameters: np.ndarray) -> np.ndarray:
    """Algebraic outputs (:data:`thermoelec.engine.layout.ALGEBRAICS`) of every row of a trajectory.

    Parameters
    ----------
    times : float64 array, shape (n,)
        Row times [s] (an ambient profile is a function of time).
    states : float64 array, shape (n, n_states)
        State rows (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    phase_params : float64 array, shape (n_phases, HEADER)
        The header of the parameter vector of each phase [SI, unit per slot].
    phase_index : int array, shape (n,)
        The phase of each row [-].
    parameters : float64 array
        The scenario's parameter vector (its blocks; the header is each phase's), not changed [SI, unit per slot].

    Returns
    -------
    float64 array, shape (n, N_ALGEBRAICS)
        Current [A], voltages [V], heats [W], ... in the declared order.
    """
    algebraics = np.empty((len(states), N_ALGEBRAICS))
    evaluate_phase_rows(np.ascontiguousarray(states), np.ascontiguousarray(times, dtype=float),
                        np.ascontiguousarray(phase_params), np.ascontiguousarray(phase_index, dtype=np.int64),
                        np.array(parameters, dtype=float), algebraics)
    return algebraics
