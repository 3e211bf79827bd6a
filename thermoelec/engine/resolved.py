"""The right-hand side of a resolved pack: every cell its own SoC, RC voltages and temperature (a numba kernel).

Electrical: ``series`` groups of ``parallel`` cells; cell ``i`` is a Thevenin
source ``E_i = U_i - sum v_ik`` behind ``R_i = f_i R0(z_i, T_i) + R_tab,i``. At
every evaluation each group is reduced to its Thevenin source and resistance
(:func:`thermoelec.physics.pack.group_thevenin`), the pack to their series sum
plus the interconnect, and the pack current follows from the demand in closed
form (:func:`thermoelec.physics.loads.pack_current`, the maximum-power margin
included); then each group's voltage and each cell's current by Kirchhoff's laws
(:func:`~thermoelec.physics.pack.group_voltage`, :func:`~thermoelec.physics.pack.branch_current`).

Thermal: each cell is a lumped node with its own heat capacity and paths: to the
sink node, to ambient, to its neighbours (the neighbour list) and, along the
coolant path, to a coolant that warms from cell to cell
(:func:`~thermoelec.physics.pack.coolant_segment_heat`); without a path the
coolant cools the sink node as in the lumped pack. The sink node, convection
correlations, radiation, fan, heater (shared by heat capacity) and pump are
those of the lumped kernel (:func:`thermoelec.engine.model.evaluate`).

The kernel has the lumped kernel's signature and outputs: ``alg`` holds the pack
values and the extremes over the cells the root functions read (the lowest and
highest cell voltage, the hottest and coldest cell, the emptiest and fullest
cell, and which cell each is). The per-cell values of the evaluation (current,
heat, group voltage, coolant temperature) go to the work block of ``p``
(:mod:`thermoelec.engine.layout`); :func:`cell_values` reads them row by row.

With identical cells and paths it computes the lumped kernel's equations term by
term (the consistency test of ``tests/engine/test_resolved_pack.py`` holds the two
to 1e-9). This module imports nothing of the engine but the layout (and physics'
cell, pack, thermal, correlation and load-mode laws); :mod:`thermoelec.engine.model`
dispatches to it.
"""

from __future__ import annotations

import numpy as np

from thermoelec import jit
from thermoelec.engine import layout as L
from thermoelec.engine import limits as bms
from thermoelec.physics import cell as cellphys
from thermoelec.physics import correlations
from thermoelec.physics import pack as packphys
from thermoelec.physics import thermal as thermphys
from thermoelec.physics.constants import SECONDS_PER_HOUR
from thermoelec.physics.loads import MODE_POWER, MODE_VOLTAGE, auxiliary_power, pack_current, power_deliverable_margin

__all__ = ["CELL_VALUES", "N_CELL_VALUES", "evaluate_pack", "pack_cell_values", "trajectory_cell_values"]

_jit = jit.njit(cache=True, nogil=True, error_model="numpy")
_inline = jit.njit(cache=True, nogil=True, error_model="numpy", inline="always")

_ocv = cellphys.open_circuit_voltage
_bernardi = cellphys.bernardi_heat
_sink_rate = thermphys.sink_node_rate
_effectiveness = thermphys.coolant_effectiveness
_group_thevenin = packphys.group_thevenin
_group_voltage = packphys.group_voltage
_branch = packphys.branch_current
_segment = packphys.coolant_segment_heat
_SHARE_RATE = packphys.SHARE_MIN_C_RATE / SECONDS_PER_HOUR


@_inline
def _rc_rate_scaled(p, off, z, temperature, icell, v, factor):
    """``dv/dt`` [V/s] of an RC pair whose resistance is ``factor`` times the block's law.

    The capacitance stays the nominal cell's (given, or ``tau / R(z, T_ref)`` of the
    nominal law), so the pair's time constant scales with ``factor``; with
    ``factor = 1`` this is the lumped kernel's expression, operation for operation.
    """
    law = off + L.RC_LAW
    r = L.law_value(p, law, z, temperature) * factor
    if p[off + L.RC_KIND] == 1.0:
        if p[law + L.LAW_NT] == 1.0 and p[law + L.LAW_EA] == 0.0:
            return (r * icell - v) / (factor * p[off + L.RC_VALUE])
        r_ref = L.law_value(p, law, z, p[law + L.LAW_REFERENCE])
        return (icell - v / r) * r_ref / p[off + L.RC_VALUE]
    return (icell - v / r) / p[off + L.RC_VALUE]


@_inline
def _sink_to_air(p, ts, ta):
    """Sink-to-air conductance [W/K], Reynolds and Rayleigh numbers [-] and net radiation [W].

    The lumped kernel's terms (a fixed conductance or a correlation, a running fan,
    grey radiation); written out there inline, as that kernel stays one function.
    """
    g_sa = p[L.H_GSA]
    fan_on = p[L.H_FAN_ON] == 1.0
    reynolds = 0.0
    rayleigh = 0.0
    if p[L.H_FORCED] != 0.0 or p[L.H_NATURAL] != 0.0:
        speed = p[L.H_FAN_SPEED] if fan_on and p[L.H_FAN_SPEED] >= 0.0 else p[L.H_AIR_SPEED]
        reynolds, rayleigh, k_air, pr_air = correlations.convection_numbers(p[L.H_CONV_LENGTH], speed, ts, ta)
        g_sa = correlations.coefficient_from_numbers(
            int(p[L.H_FORCED]), int(p[L.H_NATURAL]), p[L.H_CONV_LENGTH], speed > 0.0, ts >= ta, reynolds, rayleigh,
            k_air, pr_air) * p[L.H_CONV_AREA]
    if fan_on:
        g_sa += p[L.H_FAN_G]
    radiated = 0.0
    if p[L.H_EMISSIVITY] > 0.0:
        surroundings = p[L.H_SURROUNDINGS] if p[L.H_SURROUNDINGS] > 0.0 else ta
        radiated = thermphys.radiation_heat(p[L.H_EMISSIVITY], p[L.H_RAD_AREA], ts, surroundings)
    return g_sa, reynolds, rayleigh, radiated


@_inline
def _group_sums(y, p, n, nrc, table, width, work, groups):
    """First pass over the cells: each cell's source, resistance, OCV and entropic coefficient into the
    work block, and each group's ``sum E_i / R_i`` and ``sum 1 / R_i``."""
    nb = 2 + nrc
    o = int(p[L.H_OCV])
    t_ref = p[o + L.OCV_REFERENCE]
    r0_law = int(p[L.H_R0])
    for g in range(int(p[L.H_NS])):
        p[groups + g * L.GROUP_WIDTH + L.GROUP_WEIGHTED] = 0.0
        p[groups + g * L.GROUP_WIDTH + L.GROUP_CONDUCTANCE] = 0.0
    for c in range(n):
        b = c * nb
        rec = table + c * width
        w = work + c * L.WORK_WIDTH
        z = y[b]
        tc = y[b + 1 + nrc]
        u_ref, dudt = L.ocv_at(p, o, z)
        u = _ocv(u_ref, dudt, tc, t_ref)
        r = L.law_value(p, r0_law, z, tc) * p[rec + L.CELL_R0_FACTOR] + p[rec + L.CELL_TAB]
        vsum = 0.0
        for k in range(nrc):
            vsum += y[b + 1 + k]
        e = u - vsum
        p[w + L.W_EMF] = e
        p[w + L.W_RESISTANCE] = r
        p[w + L.W_OCV] = u
        p[w + L.W_ENTROPIC] = dudt
        gi = groups + int(p[rec + L.CELL_GROUP]) * L.GROUP_WIDTH
        p[gi + L.GROUP_WEIGHTED] += e / r
        p[gi + L.GROUP_CONDUCTANCE] += 1.0 / r


@_inline
def _conduction_and_coolant(y, p, ydot, n, nrc, table, width, work):
    """Heat between neighbours and into the coolant along its path, added to the cells' temperature slots
    of ``ydot`` (which hold heat flows [W] here); returns the heat the coolant carries [W] and its outlet [K]."""
    nb = 2 + nrc
    edges = int(p[L.H_EDGES])
    for e in range(int(p[edges + L.EDGE_N])):
        at = edges + L.EDGE_FIRST + L.EDGE_WIDTH * e
        i = int(p[at])
        j = int(p[at + 1])
        flow = p[at + 2] * (y[i * nb + 1 + nrc] - y[j * nb + 1 + nrc])
        ydot[i * nb + 1 + nrc] -= flow
        ydot[j * nb + 1 + nrc] += flow
    inlet = p[L.H_COOL_INLET]
    path = int(p[L.H_PATH])
    carried = 0.0
    coolant = inlet
    if path > 0:
        rate = p[L.H_COOL_MCP] if p[L.H_PUMP_ON] == 1.0 else 0.0
        for k in range(int(p[path + L.PATH_N])):
            c = int(p[path + L.PATH_FIRST + k])
            w = work + c * L.WORK_WIDTH
            q = _segment(p[table + c * width + L.CELL_PLATE], rate, y[c * nb + 1 + nrc], coolant) if rate > 0.0 \
                else 0.0
            p[w + L.W_COOLANT] = coolant
            p[w + L.W_TO_COOLANT] = q
            ydot[c * nb + 1 + nrc] -= q
            carried += q
            if rate > 0.0:
                coolant += q / rate
    return carried, coolant


@_jit
def evaluate_pack(y, p, ydot, alg):
    """Fill ``ydot`` and ``alg`` at state ``y`` for a resolved pack; per-cell values go to the work block of ``p``.

    About 160 lines in one function with inlined passes (group sums, the
    derating's bounds, conduction and coolant, the sink), on purpose: it runs ~10^5 times a mission
    for every cell, and the cell loop carries a dozen running sums and extremes
    that a further split would pass back and forth.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`): per cell its SoC [-], RC voltages [V]
        and temperature [K]; sink and coolant temperatures [K]; the quadratures [J, C].
    p : float64 array
        Parameter vector of a resolved pack with the phase written in; its work
        block is written [SI, unit per slot].
    ydot : float64 array, shape (n_states,)
        Written: ``dy/dt`` [1/s, V/s, K/s, W, A].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the algebraic outputs ``A_*`` (pack current [A], voltages [V], heats [W],
        the extremes over the cells and which cell holds each [-]).

    References
    ----------
    Kirchhoff's laws and Millman's theorem (:mod:`thermoelec.physics.pack`); Bernardi,
    Pawlikowski & Newman, J. Electrochem. Soc. 132 (1985) 5; Incropera et al.,
    *Fundamentals of Heat and Mass Transfer*, 6th ed., ch. 5 and Eq. 8.42b.
    """
    nrc = int(p[L.H_NRC])
    n = int(p[L.H_NCELLS])
    nb = 2 + nrc
    table = int(p[L.H_CELLS])
    width = L.CELL_RC + nrc
    work = int(p[L.H_WORK])
    groups = work + n * L.WORK_WIDTH
    ns = int(p[L.H_NS])
    npar = p[L.H_NP]
    ric = p[L.H_RIC]
    ts = y[n * nb]
    tf = y[n * nb + 1]
    ta = p[L.H_AMBIENT]
    if int(p[L.H_AMBIENT_TABLE]) > 0:
        ta = L.ambient_at(p, int(p[L.H_AMBIENT_TABLE]), p[L.H_TIME])

    _group_sums(y, p, n, nrc, table, width, work, groups)
    emf = 0.0
    rtot = ric
    for g in range(ns):
        gi = groups + g * L.GROUP_WIDTH
        e_g, r_g = _group_thevenin(p[gi + L.GROUP_WEIGHTED], p[gi + L.GROUP_CONDUCTANCE])
        emf += e_g
        rtot += r_g
    mode = int(p[L.H_MODE])
    value = p[L.H_VALUE]
    heater = p[L.H_HEATER_POWER] if p[L.H_HEATER_ON] == 1.0 else 0.0
    # the running auxiliaries (fan, pump, a pack-fed heater): one constant-power load on the terminals
    aux = auxiliary_power(p[L.H_FAN_ON], p[L.H_FAN_POWER], p[L.H_PUMP_ON], p[L.H_PUMP_POWER], p[L.H_HEATER_ON],
                          heater if p[L.H_HEATER_ON] == 1.0 else 0.0, p[L.H_HEATER_FROM_PACK])
    demanded = pack_current(mode, value, emf, rtot, aux)
    current = allowed = demanded
    hold_dis = hold_ch = deliverable = np.inf
    if p[L.H_DERATE] == 1.0:  # the BMS's derating: each cell's allowances, the voltage limiter, the ramp
        i_dis, i_ch, p_dis, p_ch, hold_dis, hold_ch = bms.pack_bounds(y, p, n, nrc, table, width, work, groups)
        current, allowed, deliverable = bms.delivered_current(p, demanded, emf, rtot, i_dis, i_ch, p_dis, p_ch,
                                                              hold_dis, hold_ch)
    voltage = emf - current * rtot
    v_low, v_high, g_low, g_high = np.inf, -np.inf, 0, 0
    for g in range(ns):
        gi = groups + g * L.GROUP_WIDTH
        v_g = _group_voltage(p[gi + L.GROUP_WEIGHTED], p[gi + L.GROUP_CONDUCTANCE], current)
        p[gi + L.GROUP_VOLTAGE] = v_g
        if v_g < v_low:
            v_low, g_low = v_g, g
        if v_g > v_high:
            v_high, g_high = v_g, g

    counted = abs(current) >= _SHARE_RATE * p[L.H_CAPACITY] * npar
    heat_cells = reversible = battery = to_sink = to_ambient = 0.0
    charge = capacity = u_sum = r_sum = dudt_sum = t_sum = 0.0
    t_high, t_low, z_low, z_high, share = -np.inf, np.inf, np.inf, -np.inf, 0.0
    c_hot = c_cold = c_low = c_high = c_share = 0
    limits = p[L.H_LIMITS] == 1.0
    i_high, i_low, m_dis, m_ch, lim_dis, lim_ch = -np.inf, np.inf, np.inf, np.inf, np.inf, np.inf
    c_dis = c_ch = 0
    for c in range(n):
        b = c * nb
        rec = table + c * width
        w = work + c * L.WORK_WIDTH
        z = y[b]
        tc = y[b + 1 + nrc]
        e, r, u, dudt = p[w + L.W_EMF], p[w + L.W_RESISTANCE], p[w + L.W_OCV], p[w + L.W_ENTROPIC]
        v_g = p[groups + int(p[rec + L.CELL_GROUP]) * L.GROUP_WIDTH + L.GROUP_VOLTAGE]
        icell = _branch(e, r, v_g)
        ydot[b] = -icell / p[rec + L.CELL_CAPACITY]
        off = int(p[L.H_RC])
        for k in range(nrc):
            ydot[b + 1 + k] = _rc_rate_scaled(p, off, z, tc, icell, y[b + 1 + k], p[rec + L.CELL_RC + k])
            off += L.rc_length(p, off)
        q = _bernardi(icell, u, v_g, tc, dudt)
        g_s = p[rec + L.CELL_SINK] * (tc - ts)
        g_a = p[rec + L.CELL_AMBIENT] * (tc - ta)
        ydot[b + 1 + nrc] = q + heater * p[rec + L.CELL_HEATER] - g_s - g_a  # heat flows [W] until divided
        p[w + L.W_CURRENT] = icell
        p[w + L.W_HEAT] = q
        p[w + L.W_VOLTAGE] = v_g
        p[w + L.W_COOLANT] = p[L.H_COOL_INLET]
        p[w + L.W_TO_COOLANT] = 0.0
        heat_cells += q
        reversible -= icell * tc * dudt
        battery += u * icell
        to_sink += g_s
        to_ambient += g_a
        charge += p[rec + L.CELL_CAPACITY] * z
        capacity += p[rec + L.CELL_CAPACITY]
        u_sum += u
        r_sum += r
        dudt_sum += dudt
        t_sum += tc
        if tc > t_high:
            t_high, c_hot = tc, c
        if tc < t_low:
            t_low, c_cold = tc, c
        if z < z_low:
            z_low, c_low = z, c
        if z > z_high:
            z_high, c_high = z, c
        if counted and icell * npar / current > share:
            share, c_share = icell * npar / current, c
        i_high = max(i_high, icell)
        i_low = min(i_low, icell)
        if limits:  # the pack specification's limits, each cell at its own state
            d_i, c_i, d_p, c_p = bms.cell_current_margins(p, z, tc, icell)
            if d_i < m_dis:
                m_dis, c_dis = d_i, c
            if c_i < m_ch:
                m_ch, c_ch = c_i, c
            lim_dis = min(lim_dis, d_p)
            lim_ch = min(lim_ch, c_p)

    carried, outlet = _conduction_and_coolant(y, p, ydot, n, nrc, table, width, work)
    for c in range(n):
        ydot[c * nb + 1 + nrc] /= p[table + c * width + L.CELL_HEAT_CAPACITY]

    heat_ic = current * current * ric
    g_sa, reynolds, rayleigh, radiated = _sink_to_air(p, ts, ta)
    to_coolant_node = 0.0
    ydot[n * nb + 1] = 0.0
    if p[L.H_PATH] == 0.0:  # the coolant cools the sink node, as in the lumped pack
        inlet = p[L.H_COOL_INLET]
        flow = p[L.H_COOL_MCP] if p[L.H_PUMP_ON] == 1.0 else 0.0
        if p[L.H_COOL_C] > 0.0:
            to_coolant_node = p[L.H_COOL_UA] * (ts - tf)
            carried = flow * (tf - inlet)
            ydot[n * nb + 1] = (to_coolant_node - carried) / p[L.H_COOL_C]
            outlet = tf
        else:
            g_cool = _effectiveness(p[L.H_COOL_UA], flow) * flow
            if p[L.H_PUMP_ON] == 1.0:
                g_cool += p[L.H_COOL_G]
            to_coolant_node = g_cool * (ts - inlet) if inlet > 0.0 else 0.0
            carried = to_coolant_node
            outlet = inlet + to_coolant_node / flow if flow > 0.0 else inlet
    to_ambient += g_sa * (ts - ta) + radiated
    # the sink node's balance with the cells' total heat flow into it (sink_node_rate's form)
    ydot[n * nb] = (heat_ic - radiated - to_coolant_node + to_sink - g_sa * (ts - ta)) / p[L.H_CSINK]

    q0 = n * nb + 2
    ydot[q0 + L.Q_BATTERY_DISCHARGE] = battery if current >= 0.0 else 0.0
    ydot[q0 + L.Q_BATTERY_CHARGE] = battery if current < 0.0 else 0.0
    ydot[q0 + L.Q_LOAD_DISCHARGE] = voltage * current if current > 0.0 else 0.0
    ydot[q0 + L.Q_LOAD_CHARGE] = voltage * current if current < 0.0 else 0.0
    ydot[q0 + L.Q_HEAT] = heat_cells + heat_ic
    ydot[q0 + L.Q_REVERSIBLE] = reversible
    ydot[q0 + L.Q_HEAT_AMBIENT] = to_ambient
    ydot[q0 + L.Q_THROUGHPUT] = abs(current)
    ydot[q0 + L.Q_HEATER] = heater
    ydot[q0 + L.Q_COOLANT] = carried
    ydot[q0 + L.Q_RADIATION] = radiated
    bms.demand_outputs(ydot, alg, q0, mode, value, aux, emf, rtot, demanded, current, voltage)

    alg[L.A_CURRENT] = current
    alg[L.A_VOLTAGE] = voltage
    alg[L.A_CELL_VOLTAGE] = v_low
    alg[L.A_OCV] = u_sum / n
    alg[L.A_EMF] = emf
    alg[L.A_RESISTANCE] = rtot
    alg[L.A_HEAT] = heat_cells + heat_ic
    alg[L.A_REVERSIBLE] = reversible
    alg[L.A_HEAT_AMBIENT] = to_ambient
    alg[L.A_ENTROPIC] = dudt_sum / n
    alg[L.A_R0] = r_sum / n
    alg[L.A_POWER_MARGIN] = power_deliverable_margin(emf, rtot, value + aux) if mode == MODE_POWER else 1.0
    if mode == MODE_POWER and current != demanded:  # derated: the margin of the power delivered, (E - 2 R I)^2
        alg[L.A_POWER_MARGIN] = (emf - 2.0 * rtot * current) ** 2
    alg[L.A_AMBIENT] = ta
    alg[L.A_HEATER] = heater
    alg[L.A_COOLANT] = carried
    alg[L.A_RADIATION] = radiated
    alg[L.A_SINK_CONDUCTANCE] = g_sa
    alg[L.A_COOLANT_OUTLET] = outlet
    alg[L.A_REYNOLDS] = reynolds
    alg[L.A_RAYLEIGH] = rayleigh
    alg[L.A_AUXILIARY] = 0.0 if mode == MODE_VOLTAGE else aux
    alg[L.A_CELL_VOLTAGE_HIGH] = v_high
    alg[L.A_TEMPERATURE_HIGH] = t_high
    alg[L.A_TEMPERATURE_LOW] = t_low
    alg[L.A_TEMPERATURE_MEAN] = t_sum / n
    alg[L.A_SOC] = charge / capacity
    alg[L.A_SOC_LOW] = z_low
    alg[L.A_SOC_HIGH] = z_high
    alg[L.A_CURRENT_SHARE] = share
    alg[L.A_CELL_LOW_VOLTAGE] = g_low * npar
    alg[L.A_CELL_HIGH_VOLTAGE] = g_high * npar
    alg[L.A_CELL_HOT] = c_hot
    alg[L.A_CELL_COLD] = c_cold
    alg[L.A_CELL_SOC_LOW] = c_low
    alg[L.A_CELL_SOC_HIGH] = c_high
    alg[L.A_CELL_SHARE] = c_share
    alg[L.A_CURRENT_ALLOWED] = allowed
    alg[L.A_HOLD_DISCHARGE] = hold_dis
    alg[L.A_HOLD_CHARGE] = hold_ch
    alg[L.A_DELIVERABLE] = deliverable
    alg[L.A_CELL_CURRENT_HIGH] = i_high
    alg[L.A_CELL_CURRENT_LOW] = i_low
    alg[L.A_MARGIN_DISCHARGE_CURRENT] = m_dis
    alg[L.A_MARGIN_CHARGE_CURRENT] = m_ch
    bms.power_margins(lim_dis, lim_ch, voltage * current, alg)
    alg[L.A_CELL_DISCHARGE_LIMIT] = c_dis
    alg[L.A_CELL_CHARGE_LIMIT] = c_ch


#: Per-cell values :func:`pack_cell_values` returns, in order: current [A], heat [W], group voltage [V],
#: OCV [V], series resistance [Ω], coolant temperature entering its segment [K], heat to the coolant [W].
CELL_VALUES = (L.W_CURRENT, L.W_HEAT, L.W_VOLTAGE, L.W_OCV, L.W_RESISTANCE, L.W_COOLANT, L.W_TO_COOLANT)
N_CELL_VALUES = len(CELL_VALUES)
_CELL_VALUES = np.array(CELL_VALUES, dtype=np.int64)


@jit.ahead_of_time("void(f8[:, ::1], f8[::1], f8[:, ::1], i8[::1], f8[::1], f8[:, :, ::1])")
@_jit
def pack_cell_values(states, times, headers, phase_index, p, out):
    """Per-cell values of many rows of a resolved pack, each row in its phase (its header written into ``p``).

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
        The scenario's parameter vector, overwritten (header, time, work block) [SI, unit per slot].
    out : float64 array, shape (n, n_cells, N_CELL_VALUES)
        Written: the values of :data:`CELL_VALUES` for each row and cell [A, W, V, V, Ω, K, W].
    """
    scratch = np.empty(states.shape[1])
    alg = np.empty(L.N_ALGEBRAICS)
    n = out.shape[1]
    work = int(p[L.H_WORK])
    for r in range(states.shape[0]):
        for k in range(headers.shape[1]):
            p[k] = headers[phase_index[r], k]
        p[L.H_TIME] = times[r]
        evaluate_pack(states[r], p, scratch, alg)
        for c in range(n):
            for k in range(_CELL_VALUES.size):
                out[r, c, k] = p[work + c * L.WORK_WIDTH + _CELL_VALUES[k]]


def trajectory_cell_values(times: np.ndarray, states: np.ndarray, phase_params: np.ndarray,
                           phase_index: np.ndarray, parameters: np.ndarray) -> np.ndarray:
    """Per-cell values (:data:`CELL_VALUES`) of every row of a resolved pack's trajectory.

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
        The resolved pack's parameter vector (its blocks), not changed [SI, unit per slot].

    Returns
    -------
    float64 array, shape (n, n_cells, N_CELL_VALUES)
        Current [A], heat [W], group voltage [V], OCV [V], series resistance [Ω],
        coolant temperature entering the cell's segment [K], heat to the coolant [W].
    """
    out = np.empty((len(states), int(parameters[L.H_NCELLS]), N_CELL_VALUES))
    pack_cell_values(np.ascontiguousarray(states), np.ascontiguousarray(times, dtype=float),
                     np.ascontiguousarray(phase_params), np.ascontiguousarray(phase_index, dtype=np.int64),
                     np.array(parameters, dtype=float), out)
    return out
