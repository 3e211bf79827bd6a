"""The limits of a pack specification and the BMS's derating, as the kernels compute them (inlined pieces).

Both pack models (:func:`thermoelec.engine.model.evaluate` for the lumped pack,
:func:`thermoelec.engine.resolved.evaluate_pack` for a resolved one) call these
functions, so a limit and a derating mean the same to both and to both drivers.
Each is compiled into its caller (``inline="always"``), and each reads what it
needs behind a flag of the parameter vector (``layout.H_LIMITS``,
``layout.H_DERATE``), so a scenario without limits or derating pays a branch.

- **Tables** (:func:`table_or`): a limit or an allowance over cell temperature and
  SoC is a resistance-law block without an activation energy, read in place.
- **The delivered current** (:func:`delivered_current`): the demand's current
  within the allowances, then held by the voltage limiter, then ramped
  (:mod:`thermoelec.physics.loads`: ``derated_current``, ``held_current``,
  ``ramped_current``); and the most the pack may deliver now (the
  ``nothing_deliverable`` root function reads it).
- **The demand** (:func:`demand_outputs`): what the demand asked, the demand and
  shortfall quadratures.
- **The margins** (:func:`limit_margins`, :func:`cell_current_margins`): limit minus
  value, > 0 inside, for the root functions of :data:`thermoelec.engine.events.LIMIT_EVENTS`.
- **A resolved pack's bounds** (:func:`pack_bounds`): per-cell allowances and the
  voltage limiter as bounds on the pack current, through each group's currents
  by Kirchhoff's laws.

This module imports nothing of the engine but the layout (and physics' load modes);
the kernels of :mod:`thermoelec.engine.model` and :mod:`thermoelec.engine.resolved` import it.
"""

from __future__ import annotations

import numpy as np

from thermoelec import jit
from thermoelec.engine import layout as L
from thermoelec.physics.loads import MODE_POWER, derated_current, held_current, ramped_current, terminal_power

__all__ = ["allowances", "cell_current_margins", "delivered_current", "demand_outputs", "limit_margins",
           "pack_bounds", "power_margins", "table_or"]

_inline = jit.njit(cache=True, nogil=True, error_model="numpy", inline="always")


@_inline
def table_or(p, slot, z, temperature, otherwise):
    """The table whose block offset is in header slot ``slot``, at ``z`` and ``temperature``.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    slot : int
        Header slot holding the table's offset, 0 for none (``H_LIMIT_*``, ``H_DERATE_*``) [-].
    z : float
        State of charge of the cell [-].
    temperature : float
        Temperature of the cell [K].
    otherwise : float
        The value without a table [A or W].

    Returns
    -------
    float
        The table's value, bilinear and held at its edges (:func:`thermoelec.engine.layout.law_value`),
        or ``otherwise`` [A or W].
    """
    off = int(p[slot])
    return L.law_value(p, off, z, temperature) if off > 0 else otherwise


@_inline
def allowances(p, z, temperature, share):
    """The derating's allowed pack discharge and charge currents and powers at one cell's state.

    The current tables are per cell: a lumped pack of ``Np`` cells in parallel allows ``Np`` times
    them. Without a table the allowance is ``inf``.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    z : float
        State of charge of the cell [-].
    temperature : float
        Temperature of the cell [K].
    share : float
        Cells sharing the pack current, ``Np`` [-].

    Returns
    -------
    discharge_current, charge_current : float
        Allowed pack currents, both >= 0 [A].
    discharge_power, charge_power : float
        Allowed pack powers, both >= 0 [W].
    """
    return (share * table_or(p, L.H_DERATE_DISCHARGE_CURRENT, z, temperature, np.inf),
            share * table_or(p, L.H_DERATE_CHARGE_CURRENT, z, temperature, np.inf),
            table_or(p, L.H_DERATE_DISCHARGE_POWER, z, temperature, np.inf),
            table_or(p, L.H_DERATE_CHARGE_POWER, z, temperature, np.inf))


@_inline
def delivered_current(p, demanded, emf, resistance, discharge_current, charge_current, discharge_power,
                      charge_power, hold_discharge, hold_charge):
    """The pack current the BMS delivers for a demand, the demand within the allowances, and what it may deliver.

    The allowances (:func:`thermoelec.physics.loads.derated_current`), then the voltage
    limiter's hold of the phase (:func:`~thermoelec.physics.loads.held_current`, state
    ``H_HOLD``), then the ramp from the phase's anchor (:func:`~thermoelec.physics.loads.ramped_current`).
    The most the pack may deliver is the allowances' and the hold's current for a demand at the
    maximum-power current ``E / (2R)``; the ramp, a transient, is not counted in it.

    Parameters
    ----------
    p : float64 array
        Parameter vector with the phase written in (hold state, ramp anchor, time) [SI, unit per slot].
    demanded : float
        The demand's pack current [A], > 0 discharging.
    emf : float
        Source voltage behind the pack resistance [V].
    resistance : float
        Pack series resistance [Ω].
    discharge_current, charge_current : float
        Allowed pack currents [A] (``inf``: none).
    discharge_power, charge_power : float
        Allowed pack powers [W] (``inf``: none).
    hold_discharge : float
        Pack current that holds the lowest cell at voltage_min [A].
    hold_charge : float
        Pack current that holds the highest cell at voltage_max [A].

    Returns
    -------
    current : float
        Delivered pack current [A].
    allowed : float
        The demand's current within the allowances (before the hold and the ramp) [A].
    deliverable : float
        The most the pack may deliver now [A].
    """
    allowed = derated_current(demanded, emf, resistance, discharge_current, charge_current, discharge_power,
                              charge_power)
    current = held_current(allowed, p[L.H_HOLD], hold_discharge, hold_charge)
    current = ramped_current(current, p[L.H_RAMP_CURRENT], p[L.H_RAMP_RATE], p[L.H_TIME] - p[L.H_RAMP_TIME])
    deliverable = held_current(derated_current(0.5 * emf / resistance, emf, resistance, discharge_current,
                                               charge_current, discharge_power, charge_power),
                               p[L.H_HOLD], hold_discharge, hold_charge)
    return current, allowed, deliverable


@_inline
def demand_outputs(ydot, alg, q, mode, value, auxiliary, emf, resistance, demanded, current, voltage):
    """The demand's algebraic outputs and its quadratures: demanded power, and the shortfall.

    The demanded power is what the demand asks at the terminals: the delivered power
    ``V I`` where the current is the demand's (so the shortfall is exactly zero there),
    else the power demand itself (with the auxiliary load) or the power at the demanded
    current, ``(E - R I_d) I_d``. A demand that discharges integrates into the discharge
    quadratures, one that charges into the charge ones.

    Parameters
    ----------
    ydot : float64 array, shape (n_states,)
        Written: the rates of the demand and shortfall quadratures [W].
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: ``A_CURRENT_DEMANDED`` [A], ``A_POWER_DEMANDED`` [W].
    q : int
        Index of the first quadrature in the state vector [-].
    mode : int
        Load-mode code of the phase [-].
    value : float
        Demand of the phase in its mode's unit [A, W, Ω or V].
    auxiliary : float
        Power of an auxiliary load on the terminals [W].
    emf : float
        Source voltage behind the pack resistance [V].
    resistance : float
        Pack series resistance [Ω].
    demanded : float
        The demand's pack current [A].
    current : float
        Delivered pack current [A].
    voltage : float
        Pack terminal voltage [V].
    """
    power = voltage * current
    asked = power
    if current != demanded:
        asked = value + auxiliary if mode == MODE_POWER else terminal_power(emf, resistance, demanded)
    alg[L.A_CURRENT_DEMANDED] = demanded
    alg[L.A_POWER_DEMANDED] = asked
    if demanded > 0.0:
        ydot[q + L.Q_DEMAND_DISCHARGE] = asked
        ydot[q + L.Q_DEMAND_CHARGE] = 0.0
        ydot[q + L.Q_SHORTFALL_DISCHARGE] = asked - power
        ydot[q + L.Q_SHORTFALL_CHARGE] = 0.0
    else:
        ydot[q + L.Q_DEMAND_DISCHARGE] = 0.0
        ydot[q + L.Q_DEMAND_CHARGE] = asked
        ydot[q + L.Q_SHORTFALL_DISCHARGE] = 0.0
        ydot[q + L.Q_SHORTFALL_CHARGE] = power - asked


@_inline
def limit_margins(p, z, temperature, current_high, current_low, power, alg):
    """The margins to the current and power limits at one cell's state (the lumped pack's cell).

    Limit minus the cell's discharge current, limit plus its (negative) charge current, and
    likewise for the pack power; ``inf`` where no limit is set (all four without any: the
    ``H_LIMITS`` flag spares the table reads).

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    z : float
        State of charge of the cell [-].
    temperature : float
        Temperature of the cell [K].
    current_high : float
        The cell current that meets the discharge limit [A].
    current_low : float
        The cell current that meets the charge limit [A].
    power : float
        Pack power to the load [W], > 0 discharging.
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: ``A_MARGIN_*`` [A, A, W, W].
    """
    if p[L.H_LIMITS] != 1.0:
        alg[L.A_MARGIN_DISCHARGE_CURRENT] = alg[L.A_MARGIN_CHARGE_CURRENT] = np.inf
        alg[L.A_MARGIN_DISCHARGE_POWER] = alg[L.A_MARGIN_CHARGE_POWER] = np.inf
        return
    alg[L.A_MARGIN_DISCHARGE_CURRENT] = table_or(p, L.H_LIMIT_DISCHARGE_CURRENT, z, temperature, np.inf) \
        - current_high
    alg[L.A_MARGIN_CHARGE_CURRENT] = table_or(p, L.H_LIMIT_CHARGE_CURRENT, z, temperature, np.inf) + current_low
    alg[L.A_MARGIN_DISCHARGE_POWER] = table_or(p, L.H_LIMIT_DISCHARGE_POWER, z, temperature, np.inf) - power
    alg[L.A_MARGIN_CHARGE_POWER] = table_or(p, L.H_LIMIT_CHARGE_POWER, z, temperature, np.inf) + power


@_inline
def cell_current_margins(p, z, temperature, current):
    """One cell's margins to the current limits and its readings of the power limits.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    z : float
        State of charge of the cell [-].
    temperature : float
        Temperature of the cell [K].
    current : float
        The cell's current [A], > 0 discharging.

    Returns
    -------
    discharge, charge : float
        Discharge limit minus the current, charge limit plus the current [A] (``inf``: none).
    discharge_power, charge_power : float
        The pack power limits read at this cell [W] (``inf``: none).
    """
    return (table_or(p, L.H_LIMIT_DISCHARGE_CURRENT, z, temperature, np.inf) - current,
            table_or(p, L.H_LIMIT_CHARGE_CURRENT, z, temperature, np.inf) + current,
            table_or(p, L.H_LIMIT_DISCHARGE_POWER, z, temperature, np.inf),
            table_or(p, L.H_LIMIT_CHARGE_POWER, z, temperature, np.inf))


@_inline
def power_margins(discharge_power, charge_power, power, alg):
    """The margins to the pack power limits, from the least limit over the cells.

    Parameters
    ----------
    discharge_power, charge_power : float
        The least discharge and charge power limits read at the cells [W] (``inf``: none).
    power : float
        Pack power to the load [W], > 0 discharging.
    alg : float64 array, shape (N_ALGEBRAICS,)
        Written: ``A_MARGIN_DISCHARGE_POWER``, ``A_MARGIN_CHARGE_POWER`` [W].
    """
    alg[L.A_MARGIN_DISCHARGE_POWER] = discharge_power - power
    alg[L.A_MARGIN_CHARGE_POWER] = charge_power + power


@_inline
def pack_bounds(y, p, n, nrc, table, width, work, groups):
    """A resolved pack's allowances and voltage limiter as bounds on the pack current, by Kirchhoff's laws.

    In a group of source sum ``W = Σ E_i / R_i`` and conductance ``G = Σ 1 / R_i`` carrying
    the pack current ``I``, cell ``i`` takes ``I_i = (E_i - V_g) / R_i`` with
    ``V_g = (W - I) / G``; so ``I_i <= a_i`` holds for ``I <= W - G (E_i - a_i R_i)``,
    ``I_i >= -c_i`` for ``I >= W - G (E_i + c_i R_i)``, and ``V_g >= V_min`` for
    ``I <= W - G V_min``. The pack's bounds are the tightest over the cells and groups; the
    power allowances the least a cell's state reads. Reads each cell's source and resistance
    from the work block and the group sums after them (written by the first pass of
    :func:`thermoelec.engine.resolved.evaluate_pack`).

    Parameters
    ----------
    y : float64 array, shape (n_states,)
        State (:mod:`thermoelec.engine.layout`) [-, V, K, J, C].
    p : float64 array
        Parameter vector of a resolved pack, its work block written [SI, unit per slot].
    n : int
        Number of cells [-].
    nrc : int
        Number of RC pairs of a cell [-].
    table : int
        Offset of the cell table [-].
    width : int
        Length of a record of the cell table [-].
    work : int
        Offset of the work block [-].
    groups : int
        Offset of the group sums in the work block [-].

    Returns
    -------
    discharge_current, charge_current : float
        Pack current bounds from the cells' allowed currents [A]: at most the first, at least minus the second.
    discharge_power, charge_power : float
        The least allowed pack powers over the cells [W].
    hold_discharge, hold_charge : float
        Pack currents that hold the lowest group at voltage_min, the highest at voltage_max [A].

    References
    ----------
    Kirchhoff's laws and Millman's theorem (:mod:`thermoelec.physics.pack`).
    """
    nb = 2 + nrc
    i_dis = i_ch = p_dis = p_ch = np.inf
    for c in range(n):
        z = y[c * nb]
        tc = y[c * nb + 1 + nrc]
        w = work + c * L.WORK_WIDTH
        gi = groups + int(p[table + c * width + L.CELL_GROUP]) * L.GROUP_WIDTH
        e, r = p[w + L.W_EMF], p[w + L.W_RESISTANCE]
        sums, conductance = p[gi + L.GROUP_WEIGHTED], p[gi + L.GROUP_CONDUCTANCE]
        a = table_or(p, L.H_DERATE_DISCHARGE_CURRENT, z, tc, np.inf)
        if a < np.inf:
            i_dis = min(i_dis, sums - conductance * (e - a * r))
        b = table_or(p, L.H_DERATE_CHARGE_CURRENT, z, tc, np.inf)
        if b < np.inf:
            i_ch = min(i_ch, conductance * (e + b * r) - sums)
        p_dis = min(p_dis, table_or(p, L.H_DERATE_DISCHARGE_POWER, z, tc, np.inf))
        p_ch = min(p_ch, table_or(p, L.H_DERATE_CHARGE_POWER, z, tc, np.inf))
    hold_dis = np.inf
    hold_ch = -np.inf
    for g in range(int(p[L.H_NS])):
        gi = groups + g * L.GROUP_WIDTH
        sums, conductance = p[gi + L.GROUP_WEIGHTED], p[gi + L.GROUP_CONDUCTANCE]
        hold_dis = min(hold_dis, sums - conductance * p[L.H_CELL_VOLTAGE_MIN])
        hold_ch = max(hold_ch, sums - conductance * p[L.H_CELL_VOLTAGE_MAX])
    return max(i_dis, 0.0), max(i_ch, 0.0), p_dis, p_ch, hold_dis, hold_ch
