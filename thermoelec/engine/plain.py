"""The right-hand side of a plain lumped mission: what the batched solver evaluates when a batch uses nothing more.

A plain mission is a lumped pack (one cell node) under current, power or
resistance demands and rests, with fixed conductances between the cell node,
the sink node and a constant ambient (which may step between segments), and
nothing else: no BMS derating, no limit tables of a pack specification, no
thermostat, fan, heater, pump or coolant, no convection or radiation
correlation, no ambient profile, no soak, no imposed voltage, no CC-CV.
:func:`is_plain` tells from a batch's parameter vectors and mission plans
whether it is one.

:func:`evaluate_plain` is :func:`thermoelec.engine.model.evaluate` with every
branch of the absent features taken out: the same physics functions in the
same order (so, on a plain mission, the same numbers to the last bit), and small
enough to compile into each stage of the batched solver's step. It writes the state derivatives and only the algebraic
outputs that change within a phase and that the root functions, the running
extremes and the batched solver's integrals read; the others are constant
within a phase and written by the full ``evaluate`` at the phase start.

This module imports the layout, the kernels' RC-pair rate, the derating's
demand outputs (here: no derating, so the demand is delivered) and the physics
functions; it must not import the mission plan, the batch or the drivers.
"""

from __future__ import annotations

import numpy as np

from thermoelec import jit
from thermoelec.engine import layout as L
from thermoelec.engine import limits as bms
from thermoelec.engine.model import rc_voltage_rate
from thermoelec.physics import cell as cellphys
from thermoelec.physics import thermal as thermphys
from thermoelec.physics.loads import LOAD_MODES, MODE_POWER, pack_current, power_deliverable_margin

__all__ = ["PLAIN_MODES", "evaluate_plain", "is_plain", "plain_offsets", "plain_offsets_size"]

#: Load modes a plain mission may demand (a rest is a zero current; an imposed voltage needs the
#: full start check).
PLAIN_MODES = frozenset(LOAD_MODES[name].code for name in ("current", "power", "resistance"))

#: Parameter slots that must read zero on a plain mission: each switches a feature on. (The pump flag
#: is 1 without a coolant, so the coolant is absent when it has no conductance, flow, mass or pump power.)
_ABSENT = (L.H_CELLS, L.H_DERATE, L.H_AMBIENT_TABLE, L.H_FORCED, L.H_NATURAL, L.H_EMISSIVITY, L.H_COOL_C,
           L.H_COOL_UA, L.H_COOL_G, L.H_COOL_MCP, L.H_PUMP_POWER, L.H_FAN_ON, L.H_HEATER_ON)

_inline = jit.njit(cache=True, nogil=True, error_model="numpy", inline="always")


def is_plain(params: np.ndarray, plans: list, switches: np.ndarray, soaked: bool) -> bool:
    """Whether a batch is a plain mission (:mod:`thermoelec.engine.plain`): then it takes the lean right-hand side.

    Parameters
    ----------
    params : float64 array, shape (n_scenarios, n_parameters)
        The scenarios' parameter vectors (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    plans : list of MissionPlan
        The batch's mission plans (:func:`thermoelec.engine.mission.plan_mission`) [SI, per field].
    switches : array, shape (n_scenarios, ...)
        The thermostats' switch settings (:func:`thermoelec.engine.mission.thermostat_switches`); all zero
        when no scenario has a thermostat [K].
    soaked : bool
        Whether any scenario starts with a soak [-].

    Returns
    -------
    bool
        True when no scenario uses a feature :func:`evaluate_plain` leaves out.
    """
    if soaked or np.any(switches != 0.0):
        return False
    if np.any(params[:, list(_ABSENT)] != 0.0) or np.any(params[:, L.H_LIMITS] == 1.0):
        return False
    for plan in plans:
        if np.any(plan.n_phases != 1):
            return False
        if not set(np.unique(plan.modes[:, 0]).astype(int).tolist()) <= PLAIN_MODES:
            return False
    return True


# the slots of a scenario's table offsets (plain_offsets): the OCV block's SoC grid and size, its
# reference temperature's slot; the R0 law block and its grid sizes; then three per RC pair: its block,
# whether it is a constant resistance with a time constant, the slot of that resistance
O_OCV_SOC, O_OCV_N, O_OCV_REFERENCE, O_R0, O_R0_NZ, O_R0_NT, O_RC = 0, 1, 2, 3, 4, 5, 6
_RC_WIDTH = 3


@_inline
def plain_offsets_size(n_rc):
    """Length of the offsets array :func:`plain_offsets` writes.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs [-], >= 0.

    Returns
    -------
    int
        Its length [-]: the fixed slots and three per RC pair (room for one when there is none).
    """
    return O_RC + _RC_WIDTH * max(n_rc, 1)


@_inline
def plain_offsets(p, offsets):
    """Write the offsets and sizes of the tables :func:`evaluate_plain` reads into ``offsets`` (int64).

    Read once per scenario, as integers: read from the parameter vector at each
    evaluation, the float-to-integer conversions and the walk over the RC blocks
    made the plain right-hand side 1.2 times slower, timed alone (95 against 78 ns an
    evaluation; the same numbers either way).
    An RC pair given by a time constant whose resistance is one value with no
    Arrhenius factor is marked constant: its rate is ``(R I - v) / tau``
    (:func:`thermoelec.engine.model.rc_voltage_rate`'s first branch).

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    offsets : int64 array, shape (plain_offsets_size(n_rc),)
        Written [-].
    """
    o = int(p[L.H_OCV])
    offsets[O_OCV_SOC] = o + L.OCV_SOC
    offsets[O_OCV_N] = int(p[o + L.OCV_N])
    offsets[O_OCV_REFERENCE] = o + L.OCV_REFERENCE
    r0 = int(p[L.H_R0])
    offsets[O_R0] = r0
    offsets[O_R0_NZ] = int(p[r0 + L.LAW_NZ])
    offsets[O_R0_NT] = int(p[r0 + L.LAW_NT])
    off = int(p[L.H_RC])
    for k in range(int(p[L.H_NRC])):
        law = off + L.RC_LAW
        constant = (p[off + L.RC_KIND] == 1.0 and p[law + L.LAW_NZ] == 1.0 and p[law + L.LAW_NT] == 1.0
                    and p[law + L.LAW_EA] == 0.0)
        offsets[O_RC + _RC_WIDTH * k] = off
        offsets[O_RC + _RC_WIDTH * k + 1] = 1 if constant else 0
        offsets[O_RC + _RC_WIDTH * k + 2] = law + L.LAW_SOC + 2  # a 1 x 1 table's value (L.law_value_sized)
        off += L.rc_length(p, off)


@_inline
def evaluate_plain(y, p, offsets, ydot, alg):
    """Fill ``ydot`` and the phase-varying algebraic outputs of a plain lumped mission at state ``y``.

    The physics of :func:`thermoelec.engine.model.evaluate`, restricted to a plain
    mission (:mod:`thermoelec.engine.plain`): Thevenin cell with its RC pairs,
    OCV with the entropic shift, Bernardi heat (Bernardi, Pawlikowski & Newman,
    J. Electrochem. Soc. 132 (1985) 5), cell and sink nodes with fixed
    conductances to a constant ambient.

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector with the phase written in [SI, unit per slot].
    offsets : int64 array
        The scenario's table offsets (:func:`plain_offsets`) [-].
    ydot : float64 array, shape (n_states,)
        Written: ``dy/dt`` [1/s, V/s, K/s, W, A].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: the outputs that vary within a phase (current, voltages, power margin,
        the cell's temperature and SoC as the extremes over the cells, the demand) [SI].
    """
    nrc = int(p[L.H_NRC])
    z = y[0]
    tc = y[1 + nrc]
    ts = y[2 + nrc]
    ta = p[L.H_AMBIENT]
    ns = p[L.H_NS]
    npar = p[L.H_NP]
    ric = p[L.H_RIC]
    u_ref, dudt = L.ocv_read(p, offsets[O_OCV_SOC], offsets[O_OCV_N], z)
    u = cellphys.open_circuit_voltage(u_ref, dudt, tc, p[offsets[O_OCV_REFERENCE]])
    r0 = L.law_value_sized(p, offsets[O_R0], offsets[O_R0_NZ], offsets[O_R0_NT], z, tc)
    vsum = 0.0
    for k in range(nrc):
        vsum += y[1 + k]
    emf = ns * (u - vsum)
    rtot = ns * r0 / npar + ric
    mode = int(p[L.H_MODE])
    value = p[L.H_VALUE]
    current = pack_current(mode, value, emf, rtot, 0.0)
    icell = current / npar
    vcell = u - vsum - icell * r0
    voltage = emf - current * rtot

    ydot[0] = -icell / p[L.H_CAPACITY]
    for k in range(nrc):
        pair = O_RC + _RC_WIDTH * k
        if offsets[pair + 1] == 1:  # rc_voltage_rate's first branch, its law a 1 x 1 table
            ydot[1 + k] = (p[offsets[pair + 2]] * icell - y[1 + k]) / p[offsets[pair] + L.RC_VALUE]
        else:
            ydot[1 + k] = rc_voltage_rate(p, offsets[pair], z, tc, icell, y[1 + k])
    heat_cells = ns * npar * cellphys.bernardi_heat(icell, u, vcell, tc, dudt)
    heat_ic = current * current * ric
    g_sa = p[L.H_GSA]
    to_ambient = p[L.H_GCA] * (tc - ta) + g_sa * (ts - ta)
    ydot[1 + nrc] = thermphys.cell_node_rate(heat_cells, tc, ts, ta, p[L.H_CCELL], p[L.H_GCS], p[L.H_GCA])
    ydot[2 + nrc] = thermphys.sink_node_rate(heat_ic, tc, ts, ta, p[L.H_CSINK], p[L.H_GCS], g_sa)
    ydot[3 + nrc] = 0.0

    q = 4 + nrc
    e_ocv = ns * u
    i_pos = current if current > 0.0 else 0.0
    i_neg = current - i_pos
    ydot[q + L.Q_BATTERY_DISCHARGE] = e_ocv * i_pos
    ydot[q + L.Q_BATTERY_CHARGE] = e_ocv * i_neg
    ydot[q + L.Q_LOAD_DISCHARGE] = voltage * i_pos
    ydot[q + L.Q_LOAD_CHARGE] = voltage * i_neg
    ydot[q + L.Q_HEAT] = heat_cells + heat_ic
    ydot[q + L.Q_REVERSIBLE] = -ns * current * tc * dudt
    ydot[q + L.Q_HEAT_AMBIENT] = to_ambient
    ydot[q + L.Q_THROUGHPUT] = abs(current)
    ydot[q + L.Q_HEATER] = 0.0
    ydot[q + L.Q_COOLANT] = 0.0
    ydot[q + L.Q_RADIATION] = 0.0
    bms.demand_outputs(ydot, alg, q, mode, value, 0.0, emf, rtot, current, current, voltage)

    alg[L.A_CURRENT] = current
    alg[L.A_VOLTAGE] = voltage
    alg[L.A_CELL_VOLTAGE] = vcell
    alg[L.A_CELL_VOLTAGE_HIGH] = vcell
    alg[L.A_POWER_MARGIN] = power_deliverable_margin(emf, rtot, value) if mode == MODE_POWER else 1.0
    alg[L.A_CURRENT_ALLOWED] = current
    alg[L.A_CELL_CURRENT_HIGH] = icell
    alg[L.A_CELL_CURRENT_LOW] = icell
    alg[L.A_TEMPERATURE_HIGH] = tc
    alg[L.A_TEMPERATURE_LOW] = tc
    alg[L.A_TEMPERATURE_MEAN] = tc
    alg[L.A_SOC] = z
    alg[L.A_SOC_LOW] = z
    alg[L.A_SOC_HIGH] = z
