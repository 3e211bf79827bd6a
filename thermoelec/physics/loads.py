"""Load modes: how a demand on the pack terminals sets the pack current, and the registry of modes.

A phase of a mission holds one demand on the pack: a current, a power, a load
resistance or a terminal voltage. Behind the terminals the pack is a source
``E`` (the open-circuit voltage behind the RC pairs) in series with ``R``; each
mode's current is closed-form in ``E`` and ``R`` (circuit theory, common
practice; see the functions below), which the engine evaluates at every
right-hand-side call (:func:`pack_current`).

:data:`LOAD_MODES` is the one list of modes: the scenario schema, the CSV
column names, the engine's mode codes, the event set-up and the figure labels
all derive from it. Adding a mode means a pure function here, an entry in
:data:`LOAD_MODES` and a branch in :func:`pack_current` (plus its tests).

Sign convention: a current ``I > 0`` discharges; a power ``P > 0`` flows to the load.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from thermoelec.jit import register_jitable

__all__ = [
    "COMPOSITE_MODES",
    "LOAD_MODES",
    "SEGMENT_MODES",
    "LoadMode",
    "auxiliary_power",
    "current_for_power",
    "current_for_resistance",
    "current_for_voltage",
    "derated_current",
    "held_current",
    "maximum_power",
    "pack_current",
    "power_deliverable_margin",
    "ramped_current",
    "terminal_power",
    "terminal_voltage_with_auxiliary_load",
    "voltage_limited_power",
]


@dataclass(frozen=True)
class LoadMode:
    """One way a demand is put on the pack terminals.

    Attributes
    ----------
    name : str
        The mode's name in scenario files and outputs (``mode = "power"``).
    code : int
        Its code in the engine's kernels (:func:`pack_current`).
    unit : str
        Unit of the demand value (pack level, SI).
    label : str
        Words for figures and tables.
    positive : bool
        The demand must be > 0 (a load resistance, a terminal voltage).
    power_limited : bool
        A demand can exceed what the pack can deliver (the maximum-power point),
        which then stops the mission (event ``power_limit``) instead of giving no solution.
    imposes_voltage : bool
        The mode holds the terminal voltage, so the cell voltage limits are checked
        at the phase start instead of by root functions.
    """

    name: str
    code: int
    unit: str
    label: str
    positive: bool = False
    power_limited: bool = False
    imposes_voltage: bool = False

    @property
    def csv_column(self) -> str:
        """The column of a profile CSV that holds this demand (``power_W``)."""
        return f"{self.name}_{self.unit}"


#: The load modes by name, in the order of their codes.
LOAD_MODES: dict[str, LoadMode] = {mode.name: mode for mode in (
    LoadMode("current", 0, "A", "current"),
    LoadMode("power", 1, "W", "power", power_limited=True),
    LoadMode("resistance", 2, "ohm", "load resistance", positive=True),
    LoadMode("voltage", 3, "V", "terminal voltage", positive=True, imposes_voltage=True),
)}
#: Segment modes made of load-mode phases: a rest is zero current, a CC-CV charge a current
#: then a voltage phase, a soak a rest before the mission at its own ambient.
COMPOSITE_MODES: dict[str, str] = {
    "rest": "no current",
    "cccv": "CC-CV charge: constant current to the voltage limit, then constant voltage to the cutoff current",
    "soak": "rest before the mission, at its own ambient",
}
#: Every segment mode of the scenario format.
SEGMENT_MODES: tuple[str, ...] = (*LOAD_MODES, *COMPOSITE_MODES)

MODE_CURRENT = LOAD_MODES["current"].code
MODE_POWER = LOAD_MODES["power"].code
MODE_RESISTANCE = LOAD_MODES["resistance"].code
MODE_VOLTAGE = LOAD_MODES["voltage"].code

@register_jitable
def current_for_power(emf: float, resistance: float, power: float) -> float:
    """Current that delivers ``power`` to the load from a source ``emf`` behind ``resistance``.

    Solves ``R I^2 - E I + P = 0`` for the lower root (the stable, efficient
    branch) in the cancellation-free form ``I = 2P / (E + sqrt(E^2 - 4 R P))``,
    which also serves regeneration (``P < 0``). Where ``P > E^2 / (4R)`` no real
    solution exists; the discriminant is clamped at zero here and the caller
    must stop on :func:`power_deliverable_margin` instead.

    Parameters
    ----------
    emf : float
        Source voltage behind the resistance [V], > 0.
    resistance : float
        Total series resistance [Ω], > 0.
    power : float
        Power to the load [W]; negative charges.

    Returns
    -------
    float
        Current [A], > 0 for discharge.

    References
    ----------
    Circuit theory (common practice); the cancellation-free root as in
    W. H. Press et al., *Numerical Recipes*, 3rd ed., §5.6.
    """
    discriminant = emf * emf - 4.0 * resistance * power
    if discriminant < 0.0:
        discriminant = 0.0
    return 2.0 * power / (emf + np.sqrt(discriminant))


@register_jitable
def power_deliverable_margin(emf: float, resistance: float, power: float) -> float:
    """``E^2 - 4 R P``: positive while the power can be delivered [V²].

    Parameters
    ----------
    emf : float
        Source voltage behind the resistance [V].
    resistance : float
        Total series resistance [Ω].
    power : float
        Power demanded by the load [W].

    Returns
    -------
    float
        The discriminant of the constant-power equation [V²]; it crosses zero at
        the maximum-power point (half the short-circuit current).
    """
    return emf * emf - 4.0 * resistance * power


@register_jitable
def current_for_resistance(emf: float, resistance: float, load_resistance: float) -> float:
    """Current into a resistive load: ``I = E / (R + R_load)``.

    Parameters
    ----------
    emf : float
        Source voltage [V].
    resistance : float
        Internal series resistance [Ω].
    load_resistance : float
        Load resistance [Ω], > 0.

    Returns
    -------
    float
        Current [A].
    """
    return emf / (resistance + load_resistance)


@register_jitable
def current_for_voltage(emf: float, resistance: float, terminal_voltage: float) -> float:
    """Current that holds the terminal voltage: ``I = (E - V) / R``.

    Parameters
    ----------
    emf : float
        Source voltage [V].
    resistance : float
        Internal series resistance [Ω], > 0.
    terminal_voltage : float
        Imposed terminal voltage [V].

    Returns
    -------
    float
        Current [A]; negative (charging) when ``V > E``.
    """
    return (emf - terminal_voltage) / resistance


@register_jitable
def terminal_power(emf: float, resistance: float, current: float) -> float:
    """Power at the terminals of a source behind a resistance: ``P = (E - R I) I`` [W].

    Positive while discharging (``I > 0``, power to the load); negative while charging
    (the power taken in is ``-P``).

    Parameters
    ----------
    emf : float
        Source voltage [V].
    resistance : float
        Series resistance [Ω].
    current : float
        Current [A], > 0 discharging.

    Returns
    -------
    float
        Power at the terminals [W], > 0 to the load.

    References
    ----------
    Ohm's law for a source behind a series resistance (Thevenin equivalent); common practice.

    Examples
    --------
    35 A from 3.7 V behind 20 mohm: (3.7 - 0.7) 35 = 105 W:

    >>> round(float(terminal_power(3.7, 0.02, 35.0)), 9)
    105.0
    """
    return (emf - resistance * current) * current


@register_jitable
def maximum_power(emf: float, resistance: float) -> float:
    """Maximum power transferable to a load: ``E^2 / (4 R)`` at ``I = E / (2R)`` [W].

    Parameters
    ----------
    emf : float
        Source voltage [V].
    resistance : float
        Series resistance [Ω], > 0.

    Returns
    -------
    float
        Power [W]; at this point load and internal losses are equal (50 % efficiency).

    References
    ----------
    Maximum power transfer theorem (M. H. Jacobi, 1840); common practice.
    """
    return emf * emf / (4.0 * resistance)


@register_jitable
def voltage_limited_power(emf: float, resistance: float, voltage_min: float) -> float:
    """Power at the minimum terminal voltage: ``V_min (E - V_min) / R`` [W].

    Valid for ``V_min >= E / 2``; below that the maximum power point is reached first.

    Parameters
    ----------
    emf : float
        Source voltage [V].
    resistance : float
        Series resistance [Ω].
    voltage_min : float
        Lowest allowed terminal voltage [V].

    Returns
    -------
    float
        Power [W].
    """
    return voltage_min * (emf - voltage_min) / resistance


@register_jitable
def terminal_voltage_with_auxiliary_load(conductance_factor: float, source: float, resistance: float,
                                         auxiliary_power: float) -> float:
    """Terminal voltage when a constant-power auxiliary load shares the terminals.

    The terminal voltage solves ``a V² - b V + R P_aux = 0``: the higher root
    ``V = (b + sqrt(b² - 4 a R P_aux)) / (2a)``, the one that tends to the
    no-auxiliary voltage ``b / a`` as ``P_aux -> 0``. For a current demand
    ``I_d``: ``a = 1``, ``b = E - R I_d``; for a load resistance ``R_L``:
    ``a = 1 + R / R_L``, ``b = E``. Past the point where no solution exists
    (discriminant < 0) the maximum-power voltage ``b / (2a)`` is returned.

    Parameters
    ----------
    conductance_factor : float
        ``a`` [-], >= 1.
    source : float
        ``b`` [V].
    resistance : float
        Series resistance ``R`` [Ω].
    auxiliary_power : float
        ``P_aux`` [W], >= 0.

    Returns
    -------
    float
        Terminal voltage [V].

    References
    ----------
    Kirchhoff's laws with a constant-power load (circuit theory, common practice);
    derived here.
    """
    disc = source * source - 4.0 * conductance_factor * resistance * auxiliary_power
    if disc < 0.0:
        disc = 0.0
    return (source + np.sqrt(disc)) / (2.0 * conductance_factor)


@register_jitable
def auxiliary_power(fan_on: float, fan_power: float, pump_on: float, pump_power: float, heater_on: float,
                    heater_power: float, heater_from_pack: float) -> float:
    """Electrical power the running auxiliaries draw from the pack terminals [W].

    ``P_aux = [fan on] P_fan + [pump on] P_pump + [heater on and fed from the pack] P_heater``:
    each auxiliary is a constant-power load while it runs, and together they are
    one constant-power load on the terminals (:func:`pack_current`).

    Parameters
    ----------
    fan_on : float
        1 while the fan runs, else 0 [-].
    fan_power : float
        Electrical power of the fan while on [W], >= 0.
    pump_on : float
        1 while the coolant flows, else 0 [-].
    pump_power : float
        Electrical power of the pump while on [W], >= 0.
    heater_on : float
        1 while the heater heats, else 0 [-].
    heater_power : float
        Heater power [W], >= 0.
    heater_from_pack : float
        1 when the pack feeds the heater, 0 for an external supply [-].

    Returns
    -------
    float
        The sum [W], >= 0.

    References
    ----------
    Kirchhoff's current law: loads in parallel on the terminals add their powers (circuit
    theory, common practice).

    Examples
    --------
    A 5 W fan running and a 80 W pack-fed heater off:

    >>> auxiliary_power(1.0, 5.0, 0.0, 8.0, 0.0, 80.0, 1.0)
    5.0
    """
    total = 0.0
    if fan_on == 1.0:
        total += fan_power
    if pump_on == 1.0:
        total += pump_power
    if heater_on == 1.0 and heater_from_pack == 1.0:
        total += heater_power
    return total


@register_jitable
def pack_current(mode: int, value: float, emf: float, resistance: float, auxiliary_power: float) -> float:
    """Pack current [A] for a demand, from the source ``emf`` behind ``resistance``.

    A constant-power auxiliary load on the terminals (the running fans, pumps and
    a heater fed from the pack: :func:`auxiliary_power`) adds its current; with an
    imposed terminal voltage the source holding the terminals feeds the auxiliary
    load, so the cells do not see it.

    Parameters
    ----------
    mode : int
        Code of a :data:`LOAD_MODES` entry [-].
    value : float
        The demand in the mode's unit: current [A], power [W], load resistance [Ω]
        or terminal voltage [V].
    emf : float
        Source voltage behind the pack resistance [V].
    resistance : float
        Pack series resistance [Ω], > 0.
    auxiliary_power : float
        Power of an auxiliary load on the terminals [W], >= 0.

    Returns
    -------
    float
        Pack current [A], > 0 discharging.

    References
    ----------
    Kirchhoff's laws (circuit theory, common practice); the closed forms are the
    functions of this module.

    Examples
    --------
    A 20 W load on 3.7 V behind 50 mΩ (the lower root of ``R I² - E I + P = 0``):

    >>> round(float(pack_current(MODE_POWER, 20.0, 3.7, 0.05, 0.0)), 6)
    5.871235
    """
    if mode == MODE_CURRENT:
        if auxiliary_power > 0.0:
            return value + auxiliary_power / terminal_voltage_with_auxiliary_load(
                1.0, emf - resistance * value, resistance, auxiliary_power)
        return value
    if mode == MODE_POWER:
        return current_for_power(emf, resistance, value + auxiliary_power)
    if mode == MODE_RESISTANCE:
        if auxiliary_power > 0.0:
            v_aux = terminal_voltage_with_auxiliary_load(1.0 + resistance / value, emf, resistance, auxiliary_power)
            return v_aux / value + auxiliary_power / v_aux
        return current_for_resistance(emf, resistance, value)
    return current_for_voltage(emf, resistance, value)


@register_jitable
def derated_current(current: float, emf: float, resistance: float, discharge_current: float,
                    charge_current: float, discharge_power: float, charge_power: float) -> float:
    """The demand's pack current held within a BMS's current and power allowances.

    A discharge (``I > 0``) is limited to ``I_d`` and, where its power
    ``P(I) = E I - R I²`` would pass ``P_d``, to the current that delivers ``P_d``
    (the lower root of ``R I² - E I + P_d = 0``, :func:`current_for_power`); a charge
    (``I < 0``) likewise to ``-I_c`` and to the current that takes ``P_c`` in.
    The sign of the demand is kept; no allowance gives more than the demand. Give
    ``inf`` for an allowance the BMS does not set.

    Parameters
    ----------
    current : float
        The demand's pack current [A], > 0 discharging.
    emf : float
        Source voltage behind the pack resistance [V].
    resistance : float
        Pack series resistance [Ω], > 0.
    discharge_current : float
        Allowed discharge current of the pack [A], >= 0.
    charge_current : float
        Allowed charge current of the pack, a magnitude [A], >= 0.
    discharge_power : float
        Allowed power to the load [W], >= 0.
    charge_power : float
        Allowed power into the terminals while charging, a magnitude [W], >= 0.

    Returns
    -------
    float
        The delivered pack current [A]: between 0 and the demand.

    References
    ----------
    Circuit theory (common practice): a constant-power load on a source behind a resistance,
    as in :func:`current_for_power`; the allowances as a battery management system sets them
    (G. L. Plett, *Battery Management Systems*, Vol. II, Artech House (2016), ch. 7, from memory).

    Examples
    --------
    A 40 A demand on 3.7 V behind 20 mohm, allowed 35 A and 100 W: the power allowance binds
    (35 A would give 105 W), so the current is the lower root for 100 W:

    >>> round(float(derated_current(40.0, 3.7, 0.02, 35.0, 10.0, 100.0, 50.0)), 6)
    32.865698
    """
    if current > 0.0:
        if current > discharge_current:
            current = discharge_current
        if terminal_power(emf, resistance, current) > discharge_power:
            current = current_for_power(emf, resistance, discharge_power)
    elif current < 0.0:
        if current < -charge_current:
            current = -charge_current
        if -terminal_power(emf, resistance, current) > charge_power:
            current = current_for_power(emf, resistance, -charge_power)
    return current


@register_jitable
def held_current(current: float, hold: float, hold_discharge: float, hold_charge: float) -> float:
    """The pack current under a voltage limiter that holds the cells at their voltage limit.

    Held at the minimum voltage (``hold = 1``) the pack delivers at most the
    current that keeps its lowest cell there, ``I = min(I_demand, I_hold,min)``; held at the
    maximum (``hold = -1``) it takes at most the charge that keeps its highest cell
    there, ``I = max(I_demand, I_hold,max)``; free (``hold = 0``) the demand's current.
    The sign of the demand is kept: where holding the limit would take a current the
    other way (the cells already past their limit at no current), the pack delivers none.
    With the cells' source ``E`` behind ``R``, the current that holds them at ``V_lim``
    is ``(E - V_lim) / R`` (:func:`current_for_voltage`).

    Parameters
    ----------
    current : float
        The demand's pack current (after any allowance) [A], > 0 discharging.
    hold : float
        Hold state: 0 free, 1 held at the minimum voltage, -1 at the maximum [-].
    hold_discharge : float
        Pack current that holds the lowest cell at its minimum voltage [A].
    hold_charge : float
        Pack current that holds the highest cell at its maximum voltage [A] (< 0 to charge).

    Returns
    -------
    float
        The delivered pack current [A].

    References
    ----------
    Kirchhoff's laws (circuit theory, common practice); the voltage limit held by the battery
    management system instead of a cutoff, as a constant-voltage charger holds its limit.

    Examples
    --------
    Held at the minimum voltage: a 40 A demand gets the 35 A that holds the cells there:

    >>> held_current(40.0, 1.0, 35.0, -60.0)
    35.0
    """
    if hold == 1.0 and current > hold_discharge:
        return hold_discharge if hold_discharge > 0.0 else 0.0
    if hold == -1.0 and current < hold_charge:
        return hold_charge if hold_charge < 0.0 else 0.0
    return current


@register_jitable
def ramped_current(current: float, start_current: float, rate: float, elapsed: float) -> float:
    """The pack current with its rises limited to a ramp rate since ``start_current``.

    The magnitude of the current rises at most at ``rate`` from where it was
    (``start_current``, counted from zero when its sign differs): a discharge is at
    most ``max(I_0, 0) + r t``, a charge at least ``min(I_0, 0) - r t``; a fall of
    the magnitude is never delayed. ``rate = 0`` means no ramp.

    Parameters
    ----------
    current : float
        The current otherwise delivered [A], > 0 discharging.
    start_current : float
        The delivered current where the ramp starts [A].
    rate : float
        Fastest rise of the magnitude [A/s], >= 0; 0 for none.
    elapsed : float
        Time since the ramp started [s], >= 0.

    Returns
    -------
    float
        The delivered current [A].

    References
    ----------
    A slew-rate limit, as battery management systems and motor drives apply to current steps
    (common practice).

    Examples
    --------
    A step from 10 A to 40 A ramped at 5 A/s, 2 s after the step:

    >>> ramped_current(40.0, 10.0, 5.0, 2.0)
    20.0
    """
    if rate <= 0.0:
        return current
    if current > 0.0:
        ceiling = (start_current if start_current > 0.0 else 0.0) + rate * elapsed
        return current if current < ceiling else ceiling
    if current < 0.0:
        floor = (start_current if start_current < 0.0 else 0.0) - rate * elapsed
        return current if current > floor else floor
    return current
