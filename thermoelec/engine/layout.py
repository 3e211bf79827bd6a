"""The layouts of the engine's vectors, declared once: states, quadratures, algebraic outputs, parameters.

The kernels of :mod:`thermoelec.engine.model` read one flat float64 parameter
vector ``p`` (a numba call with one array argument costs a fraction of one with
twenty, and the right-hand side runs ~10^5 times a mission). Its layout is
declared here, in order, and every index constant is generated from the
declaration (no hand-numbered slot): a header of scalar slots, then blocks (the
OCV table, resistance laws, RC pairs, the ambient profile) whose offsets the
header holds. :func:`describe` prints a vector by name. The block formats have
their writers (``*_block``) and their in-place readers (jitted, used by the
kernels) side by side, so a format is defined in one place.

State vector of one scenario (SI units): ``n_cells`` cell blocks of
``b = 2 + n_rc`` states, then the sink and coolant nodes and the quadratures::

    y[c b]                     z      state of charge of cell c [-]
    y[c b + 1 : c b + 1 + n_rc] v_k   its RC-pair voltages [V]
    y[c b + 1 + n_rc]          Tc     its temperature [K]
    y[n_cells b]               Ts     heat-sink node temperature [K]
    y[n_cells b + 1]           Tf     coolant node temperature [K] (constant without a coolant mass)
    y[n_cells b + 2 : ...]     the running integrals of :data:`QUADRATURES` [J, C]

A lumped pack (identical cells in one node, the default) is one cell block:
``z, v_1 .. v_n, Tc, Ts, Tf``. A resolved pack (every cell its own states,
:class:`thermoelec.physics.pack.ResolvedPack`) has one block per cell, numbered
group by group, and its parameter vector carries a cell table (one record of
:data:`CELL_FIELDS` plus ``n_rc`` RC factors per cell), the neighbour list, the
coolant path and a work block the resolved kernel writes its per-cell
intermediate values into (currents, heats, group voltages: the per-cell outputs
of the last evaluation).

This module imports nothing of the engine but the event registry (for the number,
names and thermostat codes of the root functions), and of physics only the table
readers and the Arrhenius factor; it must not import the problem, the mission, the
kernels, the back ends or the drivers, which all read it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from thermoelec import jit
from thermoelec.engine.events import (
    CONTROL_EVENTS,
    EV_CHARGE_CURRENT,
    EV_CHARGE_TEMPERATURE,
    EV_DISCHARGE_CURRENT,
    EV_DISCHARGE_TEMPERATURE,
    EV_FAN,
    EV_HEATER,
    EV_HOLD_MAX,
    EV_HOLD_MIN,
    EV_PUMP,
    EV_SOC_EMPTY,
    EV_SOC_FULL,
    EV_TEMPERATURE,
    EV_VOLTAGE_MAX,
    EV_VOLTAGE_MIN,
    EVENT_NAMES,
    N_EVENTS,
)
from thermoelec.physics.cell import arrhenius_factor
from thermoelec.physics.tables import bilinear_at, bracket_at

__all__ = ["ALGEBRAICS", "ALGEBRAIC_NAMES", "CELL_FIELDS", "CELL_OF_EVENT", "HEADER_SLOTS", "QUADRATURES",
           "WORK_FIELDS", "Slot", "cell_block_size", "cell_record_width", "cell_state_indices",
           "cell_temperature_index", "coolant_temperature_index", "describe", "law_block", "n_dynamic", "n_states",
           "quadrature_index", "sink_temperature_index", "soc_index", "work_size"]

# The block readers are inlined into the kernels that call them (a call between compiled
# functions is not inlined by numba, and a right-hand side reads six blocks).
_jit = jit.njit(cache=True, nogil=True, error_model="numpy", inline="always")
# the 2-D table read as well: a call with ten arguments cost as much as its body (the batched
# solver ran 1.26 times faster on the 1 Hz benchmark mission with it inlined)
_bilinear_at = _jit(bilinear_at)


@dataclass(frozen=True)
class Slot:
    """One named entry of a vector layout: its index, size, unit and meaning."""

    name: str
    index: int
    size: int
    unit: str
    description: str


class _Declaration:
    """An ordered declaration of slots: each call takes the next index."""

    def __init__(self) -> None:
        self.slots: list[Slot] = []

    @property
    def size(self) -> int:
        return sum(slot.size for slot in self.slots)

    def slot(self, name: str, unit: str, description: str, size: int = 1) -> int:
        index = self.size
        self.slots.append(Slot(name, index, size, unit, description))
        return index


# ---- states ---------------------------------------------------------------------------------

def cell_block_size(n_rc: int) -> int:
    """Number of states of one cell block: its SoC, ``n_rc`` RC voltages and its temperature.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].

    Returns
    -------
    int
        ``2 + n_rc`` [-].
    """
    return 2 + n_rc


def n_dynamic(n_rc: int, n_cells: int = 1) -> int:
    """Number of dynamic (non-quadrature) states for ``n_rc`` RC pairs and ``n_cells`` cell blocks.

    The cell blocks (SoC, the ``n_rc`` RC voltages and the temperature of each),
    then the sink and coolant temperatures.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    int
        ``n_cells (2 + n_rc) + 2``, ``4 + n_rc`` for a lumped pack [-].
    """
    return n_cells * cell_block_size(n_rc) + 2


def n_states(n_rc: int, n_cells: int = 1) -> int:
    """Number of states for ``n_rc`` RC pairs and ``n_cells`` cell blocks: dynamic states plus quadratures.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    int
        :func:`n_dynamic` plus the number of :data:`QUADRATURES` [-].
    """
    return n_dynamic(n_rc, n_cells) + N_QUADRATURES


def soc_index(n_rc: int, cell: int = 0) -> int:
    """Index of a cell's state of charge in the state vector.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    cell : int
        The cell block, from 0 [-].

    Returns
    -------
    int
        ``cell (2 + n_rc)`` [-].
    """
    return cell * cell_block_size(n_rc)


def cell_temperature_index(n_rc: int, cell: int = 0) -> int:
    """Index of a cell's temperature in the state vector (the lumped cell temperature for ``cell = 0``).

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    cell : int
        The cell block, from 0 [-].

    Returns
    -------
    int
        ``cell (2 + n_rc) + 1 + n_rc`` [-].
    """
    return cell * cell_block_size(n_rc) + 1 + n_rc


def sink_temperature_index(n_rc: int, n_cells: int = 1) -> int:
    """Index of the sink temperature in the state vector.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    int
        ``n_cells (2 + n_rc)``, ``2 + n_rc`` for a lumped pack [-].
    """
    return n_cells * cell_block_size(n_rc)


def coolant_temperature_index(n_rc: int, n_cells: int = 1) -> int:
    """Index of the coolant node temperature in the state vector.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    int
        ``n_cells (2 + n_rc) + 1``, ``3 + n_rc`` for a lumped pack [-].
    """
    return n_cells * cell_block_size(n_rc) + 1


def quadrature_index(n_rc: int, n_cells: int = 1) -> int:
    """Index of the first quadrature in the state vector.

    The quadratures follow in the order of :data:`QUADRATURES` (offsets ``Q_*``).

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks: 1 for a lumped pack [-].

    Returns
    -------
    int
        ``n_cells (2 + n_rc) + 2``, ``4 + n_rc`` for a lumped pack [-].
    """
    return n_cells * cell_block_size(n_rc) + 2


def cell_state_indices(n_rc: int, n_cells: int) -> tuple[np.ndarray, np.ndarray]:
    """Indices of every cell's SoC and temperature in the state vector.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].
    n_cells : int
        Number of cell blocks [-].

    Returns
    -------
    soc : int64 array, shape (n_cells,)
        Index of each cell's SoC [-].
    temperature : int64 array, shape (n_cells,)
        Index of each cell's temperature [-].
    """
    soc = np.arange(n_cells, dtype=np.int64) * cell_block_size(n_rc)
    return soc, soc + 1 + n_rc


# ---- quadratures: running integrals, offsets after the dynamic states ----------------------------
# Integrated with the same integrator as the states, so they are as accurate as the
# states and independent of the output interval.
_quadratures = _Declaration()
Q_BATTERY_DISCHARGE = _quadratures.slot("battery_discharge", "J", "∫ Ns U I dt while discharging (I > 0)")
Q_BATTERY_CHARGE = _quadratures.slot("battery_charge", "J", "∫ Ns U I dt while charging (negative)")
Q_LOAD_DISCHARGE = _quadratures.slot("load_discharge", "J", "∫ V I dt while discharging")
Q_LOAD_CHARGE = _quadratures.slot("load_charge", "J", "∫ V I dt while charging (negative)")
Q_HEAT = _quadratures.slot("heat", "J", "∫ heat generated in cells and interconnect dt")
Q_REVERSIBLE = _quadratures.slot("reversible_heat", "J", "∫ reversible (entropic) heat dt")
Q_HEAT_AMBIENT = _quadratures.slot("heat_to_ambient", "J", "∫ heat rejected to ambient dt (radiation included)")
Q_THROUGHPUT = _quadratures.slot("throughput", "C", "∫ |I| dt")
Q_HEATER = _quadratures.slot("heater", "J", "∫ heater power dt")
Q_COOLANT = _quadratures.slot("heat_to_coolant", "J", "∫ heat carried away by the coolant dt")
Q_RADIATION = _quadratures.slot("radiation", "J", "∫ net radiation from the sink dt (part of heat_to_ambient)")
# what the demand asked at the terminals and what the BMS's derating withheld (0 without derating)
Q_DEMAND_DISCHARGE = _quadratures.slot("demand_discharge", "J", "∫ demanded power dt while the demand discharges")
Q_DEMAND_CHARGE = _quadratures.slot("demand_charge", "J", "∫ demanded power dt while the demand charges (negative)")
Q_SHORTFALL_DISCHARGE = _quadratures.slot("shortfall_discharge", "J",
                                          "∫ (demanded - delivered) power dt while the demand discharges")
Q_SHORTFALL_CHARGE = _quadratures.slot("shortfall_charge", "J",
                                       "∫ (delivered - demanded) power dt while the demand charges (charge refused)")
N_QUADRATURES = _quadratures.size
QUADRATURES: tuple[Slot, ...] = tuple(_quadratures.slots)

# ---- algebraic outputs of one right-hand-side evaluation ------------------------------------------
_algebraics = _Declaration()
A_CURRENT = _algebraics.slot("current", "A", "pack current, > 0 discharging")
A_VOLTAGE = _algebraics.slot("voltage", "V", "pack terminal voltage")
A_CELL_VOLTAGE = _algebraics.slot("cell_voltage", "V", "terminal voltage of one cell")
A_OCV = _algebraics.slot("ocv", "V", "open-circuit voltage of one cell")
A_EMF = _algebraics.slot("emf", "V", "pack source voltage behind the series resistance, Ns (U - sum v_k)")
A_RESISTANCE = _algebraics.slot("resistance", "ohm", "pack series resistance Ns R0 / Np + R_ic")
A_HEAT = _algebraics.slot("heat", "W", "heat generated in cells and interconnect")
A_REVERSIBLE = _algebraics.slot("reversible_heat", "W", "reversible (entropic) part of the heat")
A_HEAT_AMBIENT = _algebraics.slot("heat_to_ambient", "W", "heat rejected to ambient")
A_ENTROPIC = _algebraics.slot("entropic", "V/K", "entropic coefficient dU/dT")
A_R0 = _algebraics.slot("r0", "ohm", "series resistance of one cell")
A_POWER_MARGIN = _algebraics.slot("power_margin", "V^2", "E² - 4 R P in a power phase (1 otherwise)")
A_AMBIENT = _algebraics.slot("ambient", "K", "ambient temperature")
A_HEATER = _algebraics.slot("heater", "W", "heater power on the cells")
A_COOLANT = _algebraics.slot("coolant", "W", "heat carried away by the coolant")
A_RADIATION = _algebraics.slot("radiation", "W", "net radiation from the sink")
A_SINK_CONDUCTANCE = _algebraics.slot("sink_conductance", "W/K", "sink-to-air convective conductance")
A_COOLANT_OUTLET = _algebraics.slot("coolant_outlet", "K", "coolant temperature leaving the plate")
A_REYNOLDS = _algebraics.slot("reynolds", "1", "Reynolds number of the air flow over the sink")
A_RAYLEIGH = _algebraics.slot("rayleigh", "1", "Rayleigh number of free convection at the sink")
A_AUXILIARY = _algebraics.slot("auxiliary", "W", "power the running auxiliaries draw at the pack terminals (0 while "
                               "a held terminal voltage feeds them)")
# the extremes over the cells (of the one cell of a lumped pack): the root functions read these
A_CELL_VOLTAGE_HIGH = _algebraics.slot("cell_voltage_high", "V", "highest cell terminal voltage")
A_TEMPERATURE_HIGH = _algebraics.slot("cell_temperature_high", "K", "temperature of the hottest cell")
A_TEMPERATURE_LOW = _algebraics.slot("cell_temperature_low", "K", "temperature of the coldest cell")
A_TEMPERATURE_MEAN = _algebraics.slot("cell_temperature_mean", "K", "mean cell temperature")
A_SOC = _algebraics.slot("soc", "1", "state of charge of the pack (capacity-weighted mean over the cells)")
A_SOC_LOW = _algebraics.slot("soc_low", "1", "lowest cell state of charge")
A_SOC_HIGH = _algebraics.slot("soc_high", "1", "highest cell state of charge")
A_CURRENT_SHARE = _algebraics.slot("current_share", "1",
                                   "largest cell current over its group's mean, I_i Np / I (1 when lumped)")
# which cell holds each extreme (numbered from 0; 0 for a lumped pack)
A_CELL_LOW_VOLTAGE = _algebraics.slot("cell_low_voltage", "-", "a cell of the group with the lowest voltage")
A_CELL_HIGH_VOLTAGE = _algebraics.slot("cell_high_voltage", "-", "a cell of the group with the highest voltage")
A_CELL_HOT = _algebraics.slot("cell_hot", "-", "the hottest cell")
A_CELL_COLD = _algebraics.slot("cell_cold", "-", "the coldest cell")
A_CELL_SOC_LOW = _algebraics.slot("cell_soc_low", "-", "the cell with the lowest SoC")
A_CELL_SOC_HIGH = _algebraics.slot("cell_soc_high", "-", "the cell with the highest SoC")
A_CELL_SHARE = _algebraics.slot("cell_share", "-", "the cell with the largest current share")
# the demand and the BMS's derating ([derating]); without derating the delivered current is the demand's
A_CURRENT_DEMANDED = _algebraics.slot("current_demanded", "A", "pack current the demand asks, before derating")
A_POWER_DEMANDED = _algebraics.slot("power_demanded", "W",
                                    "power the demand asks at the terminals (the delivered power where not derated)")
A_CURRENT_ALLOWED = _algebraics.slot("current_allowed", "A", "the demand's current within the allowance tables")
A_HOLD_DISCHARGE = _algebraics.slot("hold_discharge", "A", "pack current that holds the lowest cell at voltage_min")
A_HOLD_CHARGE = _algebraics.slot("hold_charge", "A", "pack current that holds the highest cell at voltage_max")
A_DELIVERABLE = _algebraics.slot("deliverable", "A", "most pack current the derating allows now (tables, hold)")
# the limits of the pack specification ([limits]): margins, > 0 inside (the smallest over the cells)
A_CELL_CURRENT_HIGH = _algebraics.slot("cell_current_high", "A", "largest cell current (discharge)")
A_CELL_CURRENT_LOW = _algebraics.slot("cell_current_low", "A", "smallest cell current (most charge)")
A_MARGIN_DISCHARGE_CURRENT = _algebraics.slot("margin_discharge_current", "A",
                                              "discharge current limit minus the cell current, least over the cells")
A_MARGIN_CHARGE_CURRENT = _algebraics.slot("margin_charge_current", "A",
                                           "charge current limit minus the cell charge current, least over the cells")
A_MARGIN_DISCHARGE_POWER = _algebraics.slot("margin_discharge_power", "W", "discharge power limit minus the power")
A_MARGIN_CHARGE_POWER = _algebraics.slot("margin_charge_power", "W", "charge power limit minus the charging power")
A_CELL_DISCHARGE_LIMIT = _algebraics.slot("cell_discharge_limit", "-", "the cell nearest its discharge current limit")
A_CELL_CHARGE_LIMIT = _algebraics.slot("cell_charge_limit", "-", "the cell nearest its charge current limit")
N_ALGEBRAICS = _algebraics.size
ALGEBRAICS: tuple[Slot, ...] = tuple(_algebraics.slots)
ALGEBRAIC_NAMES: tuple[str, ...] = tuple(slot.name for slot in ALGEBRAICS)

# ---- header of the parameter vector --------------------------------------------------------------
_header = _Declaration()
# the phase: written at every phase start (mission.configure_phase)
H_MODE = _header.slot("mode", "-", "load-mode code of the phase (physics.loads.LOAD_MODES)")
H_VALUE = _header.slot("value", "A|W|ohm|V", "demand of the phase, in its mode's unit")
H_AMBIENT = _header.slot("ambient", "K", "ambient temperature of the phase (without an ambient profile)")
# the pack
H_NS = _header.slot("series", "-", "cells in series")
H_NP = _header.slot("parallel", "-", "cells in parallel")
H_RIC = _header.slot("interconnect_resistance", "ohm", "interconnect resistance (heats the sink)")
H_CAPACITY = _header.slot("capacity", "C", "capacity of one cell")
H_CCELL = _header.slot("cell_heat_capacity", "J/K", "heat capacity of all cells, Ns Np m c_p")
H_CSINK = _header.slot("sink_heat_capacity", "J/K", "heat capacity of the sink node")
H_GCS = _header.slot("cell_to_sink", "W/K", "conductance cells to sink")
H_GSA = _header.slot("sink_to_ambient", "W/K", "fixed conductance sink to ambient (0 with correlations)")
H_GCA = _header.slot("cell_to_ambient", "W/K", "conductance cells to ambient")
H_NRC = _header.slot("n_rc", "-", "number of RC pairs")
H_OCV = _header.slot("ocv_block", "-", "offset of the OCV block")
H_R0 = _header.slot("r0_block", "-", "offset of the R0 resistance-law block")
H_RC = _header.slot("rc_block", "-", "offset of the first RC-pair block")
H_TIME = _header.slot("time", "s", "current time, written by every caller (an ambient profile reads it)")
H_AMBIENT_TABLE = _header.slot("ambient_table", "-", "offset of the ambient-profile block, 0 for none (or off)")
# cooling
H_FORCED = _header.slot("forced_correlation", "-", "kernel code of the forced-convection correlation, 0 none")
H_NATURAL = _header.slot("natural_correlation", "-", "kernel code of the natural-convection correlation, 0 none")
H_CONV_LENGTH = _header.slot("convection_length", "m", "characteristic length of the correlations")
H_CONV_AREA = _header.slot("convection_area", "m^2", "wetted area of the sink")
H_AIR_SPEED = _header.slot("air_speed", "m/s", "air speed over the sink (fan off)")
H_FAN_ON = _header.slot("fan_on", "-", "1 while the fan runs")
H_FAN_SPEED = _header.slot("fan_speed", "m/s", "air speed with the fan on; < 0: the fan leaves it alone")
H_FAN_G = _header.slot("fan_conductance", "W/K", "conductance the fan adds, sink to air")
H_EMISSIVITY = _header.slot("emissivity", "-", "emissivity of the sink surface, 0 for no radiation")
H_RAD_AREA = _header.slot("radiation_area", "m^2", "radiating area of the sink")
H_SURROUNDINGS = _header.slot("surroundings", "K", "temperature of the surroundings, 0: the ambient")
H_COOL_MCP = _header.slot("coolant_capacity_rate", "W/K", "coolant flow times its specific heat")
H_COOL_UA = _header.slot("plate_conductance", "W/K", "UA of the cold plate")
H_COOL_G = _header.slot("coolant_conductance", "W/K", "given conductance sink to coolant inlet")
H_COOL_C = _header.slot("coolant_heat_capacity", "J/K", "heat capacity of the coolant in the plate, 0: massless")
H_COOL_INLET = _header.slot("coolant_inlet", "K", "coolant inlet temperature, 0 without a coolant")
H_PUMP_ON = _header.slot("pump_on", "-", "1 while the coolant flows")
H_HEATER_ON = _header.slot("heater_on", "-", "1 while the heater runs")
H_HEATER_POWER = _header.slot("heater_power", "W", "heater power")
H_HEATER_FROM_PACK = _header.slot("heater_from_pack", "-", "1 when the pack feeds the heater")
H_FAN_POWER = _header.slot("fan_power", "W", "electrical power of the fan while on, from the pack")
H_PUMP_POWER = _header.slot("pump_power", "W", "electrical power of the pump while the coolant flows, from the pack")
# a resolved pack (0 offsets for a lumped one)
H_NCELLS = _header.slot("cells", "-", "cell blocks in the state vector (1 for a lumped pack)")
H_CELLS = _header.slot("cell_table", "-", "offset of the cell table, 0 for a lumped pack")
H_EDGES = _header.slot("neighbour_list", "-", "offset of the neighbour list (resolved pack)")
H_PATH = _header.slot("coolant_path", "-", "offset of the coolant path, 0: the coolant cools the sink node")
H_WORK = _header.slot("work_block", "-", "offset of the work block the resolved kernel writes (resolved pack)")
# the limits of the pack specification ([limits]): tables over cell temperature and SoC (resistance-law
# blocks without an activation energy), read at each cell; flags for the kernels to skip what is absent
H_LIMITS = _header.slot("limits", "-", "1 when a current or power limit table is given (its margins are computed)")
H_LIMIT_DISCHARGE_CURRENT = _header.slot("limit_discharge_current", "-", "offset of the cell discharge current "
                                         "limit's table [A], 0 for none")
H_LIMIT_CHARGE_CURRENT = _header.slot("limit_charge_current", "-", "offset of the cell charge current limit's "
                                      "table [A], 0 for none")
H_LIMIT_DISCHARGE_POWER = _header.slot("limit_discharge_power", "-", "offset of the pack discharge power limit's "
                                       "table [W], 0 for none")
H_LIMIT_CHARGE_POWER = _header.slot("limit_charge_power", "-", "offset of the pack charge power limit's table [W], "
                                    "0 for none")
# the BMS's derating ([derating]): allowance tables as the limits', the voltage limiter, the ramp
H_DERATE = _header.slot("derate", "-", "1 when the BMS derates: the demand is held within the allowances")
H_DERATE_DISCHARGE_CURRENT = _header.slot("derate_discharge_current", "-", "offset of the allowed cell discharge "
                                          "current's table [A], 0 for none")
H_DERATE_CHARGE_CURRENT = _header.slot("derate_charge_current", "-", "offset of the allowed cell charge current's "
                                       "table [A], 0 for none")
H_DERATE_DISCHARGE_POWER = _header.slot("derate_discharge_power", "-", "offset of the allowed pack discharge "
                                        "power's table [W], 0 for none")
H_DERATE_CHARGE_POWER = _header.slot("derate_charge_power", "-", "offset of the allowed pack charge power's table "
                                     "[W], 0 for none")
H_CELL_VOLTAGE_MIN = _header.slot("cell_voltage_min", "V", "the cell's voltage_min (the voltage limiter holds it)")
H_CELL_VOLTAGE_MAX = _header.slot("cell_voltage_max", "V", "the cell's voltage_max (the voltage limiter holds it)")
H_HOLD_HYSTERESIS = _header.slot("hold_hysteresis", "A", "pack current by which the demand must fall below the "
                                 "held current before the limiter lets go")
H_CUTOFF = _header.slot("cutoff", "A", "pack current at or below which nothing counts as deliverable")
H_RAMP_RATE = _header.slot("ramp_rate", "A/s", "fastest rise of the delivered pack current's magnitude, 0 for none")
# the phase's hold state and ramp anchor (mission.configure_phase)
H_HOLD = _header.slot("hold", "-", "hold state of the phase: 0 free, 1 cells held at voltage_min, -1 at voltage_max")
H_RAMP_CURRENT = _header.slot("ramp_current", "A", "delivered pack current where the ramp starts")
H_RAMP_TIME = _header.slot("ramp_time", "s", "time where the ramp starts")
# root functions of the phase (events.EVENTS order)
H_ACTIVE = _header.slot("active", "-", "root-function activity flags", N_EVENTS)
H_THRESHOLD = _header.slot("threshold", "V|K|A|-", "root-function thresholds", N_EVENTS)
HEADER = _header.size
HEADER_SLOTS: tuple[Slot, ...] = tuple(_header.slots)
#: The header flag each thermostat switches, in the order of ``events.CONTROL_EVENTS``.
CONTROL_FLAG_OF = (H_FAN_ON, H_HEATER_ON, H_PUMP_ON)
if len(CONTROL_FLAG_OF) != len(CONTROL_EVENTS) or CONTROL_EVENTS != tuple(range(CONTROL_EVENTS[0],
                                                                                 CONTROL_EVENTS[0] + 3)):
    raise ImportError("the thermostat events must be fan, heater, pump, one after the other")

#: The root function whose cell is reported (the algebraic output that names it), by event code:
#: a voltage limit (or the limiter's hold) names a cell of the group at the limit, the temperature
#: limits the hottest (or, discharging in the cold, the coldest) cell, the SoC limits the emptiest or
#: fullest cell, a current limit the cell nearest it, a thermostat the cell it senses.
CELL_OF_EVENT: dict[int, int] = {EV_VOLTAGE_MIN: A_CELL_LOW_VOLTAGE, EV_VOLTAGE_MAX: A_CELL_HIGH_VOLTAGE,
                                 EV_TEMPERATURE: A_CELL_HOT, EV_SOC_EMPTY: A_CELL_SOC_LOW,
                                 EV_SOC_FULL: A_CELL_SOC_HIGH, EV_FAN: A_CELL_HOT, EV_HEATER: A_CELL_COLD,
                                 EV_PUMP: A_CELL_HOT, EV_DISCHARGE_CURRENT: A_CELL_DISCHARGE_LIMIT,
                                 EV_CHARGE_CURRENT: A_CELL_CHARGE_LIMIT, EV_DISCHARGE_TEMPERATURE: A_CELL_COLD,
                                 EV_CHARGE_TEMPERATURE: A_CELL_HOT, EV_HOLD_MIN: A_CELL_LOW_VOLTAGE,
                                 EV_HOLD_MAX: A_CELL_HIGH_VOLTAGE}

#: :data:`CELL_OF_EVENT` as an array for the kernels: the algebraic slot naming the cell, -1 for none.
EVENT_CELL_SLOT = np.array([CELL_OF_EVENT.get(k, -1) for k in range(N_EVENTS)], dtype=np.int64)

# ---- the resolved pack's blocks: the cell table, the work block, the neighbour list, the coolant path --
# Cell table: one record per cell, these fields then the factor of each RC pair's resistance.
_cell_fields = _Declaration()
CELL_GROUP = _cell_fields.slot("group", "-", "parallel group of the cell, from 0")
CELL_CAPACITY = _cell_fields.slot("capacity", "C", "capacity of the cell")
CELL_R0_FACTOR = _cell_fields.slot("r0_factor", "-", "series resistance over the nominal law")
CELL_TAB = _cell_fields.slot("tab_resistance", "ohm", "resistance added in the cell's branch")
CELL_HEAT_CAPACITY = _cell_fields.slot("heat_capacity", "J/K", "heat capacity of the cell")
CELL_SINK = _cell_fields.slot("cell_to_sink", "W/K", "conductance cell to sink node")
CELL_AMBIENT = _cell_fields.slot("cell_to_ambient", "W/K", "conductance cell to ambient")
CELL_PLATE = _cell_fields.slot("segment_effectiveness", "-", "effectiveness of the cell's coolant segment")
CELL_HEATER = _cell_fields.slot("heater_share", "-", "share of the heater power the cell receives")
CELL_RC = _cell_fields.slot("rc_factor", "-", "resistance factor of the first RC pair (one slot per pair)")
CELL_FIELDS: tuple[Slot, ...] = tuple(_cell_fields.slots)
# Work block: per cell these values of the last evaluation, then per group its two sums.
_work_fields = _Declaration()
W_CURRENT = _work_fields.slot("current", "A", "cell current, > 0 discharging")
W_EMF = _work_fields.slot("emf", "V", "cell source voltage, OCV minus its RC voltages")
W_RESISTANCE = _work_fields.slot("resistance", "ohm", "cell series resistance (tab included)")
W_OCV = _work_fields.slot("ocv", "V", "cell open-circuit voltage")
W_ENTROPIC = _work_fields.slot("entropic", "V/K", "cell entropic coefficient")
W_HEAT = _work_fields.slot("heat", "W", "heat generated in the cell (Bernardi)")
W_VOLTAGE = _work_fields.slot("voltage", "V", "terminal voltage of the cell's group")
W_COOLANT = _work_fields.slot("coolant", "K", "coolant temperature entering the cell's segment")
W_TO_COOLANT = _work_fields.slot("to_coolant", "W", "heat from the cell into the coolant")
WORK_WIDTH = _work_fields.size
WORK_FIELDS: tuple[Slot, ...] = tuple(_work_fields.slots)
#: Per group after the cells' work: ``sum E_i / R_i`` [A], ``sum 1 / R_i`` [S] and its terminal voltage [V].
GROUP_WEIGHTED, GROUP_CONDUCTANCE, GROUP_VOLTAGE, GROUP_WIDTH = 0, 1, 2, 3
# neighbour list: [m, (i, j, G) per pair] [-, -, W/K]; coolant path: [k, cell per station] [-]
EDGE_N, EDGE_FIRST, EDGE_WIDTH = 0, 1, 3
PATH_N, PATH_FIRST = 0, 1


def cell_record_width(n_rc: int) -> int:
    """Length of one record of the cell table: :data:`CELL_FIELDS` with one RC factor per pair.

    Parameters
    ----------
    n_rc : int
        Number of RC pairs of the cell [-].

    Returns
    -------
    int
        ``CELL_RC + n_rc`` [-].
    """
    return CELL_RC + n_rc


def work_size(n_cells: int, series: int) -> int:
    """Length of the work block of a resolved pack.

    Parameters
    ----------
    n_cells : int
        Number of cells [-].
    series : int
        Number of groups in series [-].

    Returns
    -------
    int
        ``n_cells WORK_WIDTH + series GROUP_WIDTH`` [-].
    """
    return n_cells * WORK_WIDTH + series * GROUP_WIDTH


# ---- blocks after the header: formats, writers and in-place readers ------------------------------
# OCV block: [n, T_ref, soc[n], voltage[n], entropic[n]]
OCV_N, OCV_REFERENCE, OCV_SOC = 0, 1, 2
# resistance-law block: [nz, nt, Ea, T_ref, soc[nz], temperature[nt], values[nt * nz]] (row per temperature)
LAW_NZ, LAW_NT, LAW_EA, LAW_REFERENCE, LAW_SOC = 0, 1, 2, 3, 4
# RC-pair block: [kind (1: time constant given, 0: capacitance), tau [s] or C [F], resistance-law block]
RC_KIND, RC_VALUE, RC_LAW = 0, 1, 2
# ambient-profile block: [n, time[n], ambient[n]] [s, K], linear in time
AMBIENT_N, AMBIENT_TIME = 0, 1


def ocv_block(soc, voltage, entropic, reference_temperature: float) -> list[float]:
    """The OCV block of a cell: ``[n, T_ref, soc[n], voltage[n], entropic[n]]``.

    The OCV and its entropic coefficient share one SoC grid, so a kernel brackets
    the SoC once for both (:func:`ocv_at`).

    Parameters
    ----------
    soc : sequence of float
        SoC grid, strictly increasing [-].
    voltage : sequence of float
        Open-circuit voltage at the grid points at ``reference_temperature`` [V].
    entropic : sequence of float
        Entropic coefficient dU/dT at the grid points [V/K].
    reference_temperature : float
        Temperature at which ``voltage`` holds [K].

    Returns
    -------
    list of float
        The block: its length ``n`` [-], ``T_ref`` [K], the SoC grid [-], the
        voltages [V] and the entropic coefficients [V/K].
    """
    return [len(soc), reference_temperature, *soc, *voltage, *entropic]


def law_block(law) -> list[float]:
    """The block of a :class:`~thermoelec.physics.cell.ResistanceLaw`.

    Format ``[nz, nt, Ea, T_ref, soc[nz], temperature[nt], values[nt * nz]]``, the
    values row by row, one row per temperature (read by :func:`law_value`).

    Parameters
    ----------
    law : ResistanceLaw
        Table [Ω] over SoC [-] and temperature [K], activation energy [J/mol] (0 for
        none) and its reference temperature [K].

    Returns
    -------
    list of float
        The block: grid sizes [-], ``Ea`` [J/mol], ``T_ref`` [K], SoC grid [-],
        temperature grid [K], table values [Ω].
    """
    nz, nt = len(law.soc), len(law.temperature)
    return [nz, nt, law.activation_energy, law.reference_temperature,
            *law.soc, *law.temperature, *np.asarray(law.values, float).ravel()]


def rc_block(pair) -> list[float]:
    """The block of an :class:`~thermoelec.physics.cell.RCPair`: ``[kind, tau or C, law block]``.

    Parameters
    ----------
    pair : RCPair
        An RC pair: its time constant [s] or capacitance [F], and its resistance law [Ω].

    Returns
    -------
    list of float
        ``kind`` (1: time constant given, 0: capacitance) [-], the time constant [s]
        or capacitance [F], then the :func:`law_block` of its resistance.
    """
    head = [1.0, pair.time_constant] if pair.time_constant is not None else [0.0, float(pair.capacitance)]
    return head + law_block(pair.resistance)


def ambient_block(times, values) -> list[float]:
    """The block of an ambient profile: ``[n, time[n], ambient[n]]``, linear in time.

    Parameters
    ----------
    times : sequence of float
        Time stamps of the profile, strictly increasing [s].
    values : sequence of float
        Ambient temperature at each time stamp [K].

    Returns
    -------
    list of float
        The block: its length ``n`` [-], the times [s], the temperatures [K].
    """
    return [len(times), *times, *values]


@_jit
def ocv_at(p, off, z):
    """OCV at the reference temperature and entropic coefficient at SoC ``z``, from the OCV block at ``off``.

    The two tables share their SoC grid, so one bracket serves both; the tables are
    linear between grid points and held at their end values outside
    (:func:`thermoelec.physics.tables.bracket_at`).

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the OCV block in ``p`` [-].
    z : float
        State of charge [-].

    Returns
    -------
    u_ref : float
        Open-circuit voltage at the block's reference temperature [V].
    dudt : float
        Entropic coefficient dU/dT [V/K].
    """
    return ocv_read(p, off + OCV_SOC, int(p[off + OCV_N]), z)


@_jit
def ocv_read(p, soc_start, n, z):
    """:func:`ocv_at` from the OCV block's SoC grid at ``soc_start`` of ``n`` points (its size read already).

    A caller that reads one block many times (the plain right-hand side,
    :mod:`thermoelec.engine.plain`) keeps the offset and the size as integers.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    soc_start : int
        Offset of the block's SoC grid in ``p`` (the block's offset plus ``OCV_SOC``) [-].
    n : int
        Number of grid points [-], >= 1.
    z : float
        State of charge [-].

    Returns
    -------
    u_ref : float
        Open-circuit voltage at the block's reference temperature [V].
    dudt : float
        Entropic coefficient dU/dT [V/K].
    """
    i, w = bracket_at(p, soc_start, n, z)
    i1 = i + 1 if n > 1 else i
    voltage = soc_start + n
    entropic = voltage + n
    return (p[voltage + i] * (1.0 - w) + p[voltage + i1] * w,
            p[entropic + i] * (1.0 - w) + p[entropic + i1] * w)


@_jit
def law_value(p, off, z, temperature):
    """Resistance of the resistance-law block at ``off`` at SoC ``z`` and ``temperature``.

    Bilinear in SoC and temperature (constant along an axis of one point), held at the
    edge values outside the grid, a 1 x 1 table read directly; times the Arrhenius factor
    :func:`thermoelec.physics.cell.arrhenius_factor` when the block has an activation energy.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the resistance-law block in ``p`` [-].
    z : float
        State of charge [-].
    temperature : float
        Cell temperature [K].

    Returns
    -------
    float
        Resistance [Ω].
    """
    return law_value_sized(p, off, int(p[off + LAW_NZ]), int(p[off + LAW_NT]), z, temperature)


@_jit
def law_value_sized(p, off, nz, nt, z, temperature):
    """:func:`law_value` of the block at ``off`` whose grid sizes ``nz`` and ``nt`` are read already.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the resistance-law block in ``p`` [-].
    nz, nt : int
        Its SoC and temperature grid sizes [-], >= 1.
    z : float
        State of charge [-].
    temperature : float
        Cell temperature [K].

    Returns
    -------
    float
        Resistance [Ω].
    """
    grid = off + LAW_SOC
    if nz == 1 and nt == 1:
        base = p[grid + 2]
    else:
        base = _bilinear_at(p, grid, p, grid + nz, p, grid + nz + nt, nz, nt, z, temperature)
    if p[off + LAW_EA] != 0.0:
        base *= arrhenius_factor(temperature, p[off + LAW_EA], p[off + LAW_REFERENCE])
    return base


@_jit
def law_length(p, off):
    """Length of the resistance-law block at ``off``.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the resistance-law block in ``p`` [-].

    Returns
    -------
    int
        Number of slots of the block, ``4 + nz + nt + nz nt`` [-].
    """
    nz = int(p[off + LAW_NZ])
    nt = int(p[off + LAW_NT])
    return LAW_SOC + nz + nt + nz * nt


@_jit
def rc_length(p, off):
    """Length of the RC-pair block at ``off`` (the next pair's block starts after it).

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the RC-pair block in ``p`` [-].

    Returns
    -------
    int
        Number of slots of the block, its two head slots and its resistance-law block [-].
    """
    return RC_LAW + law_length(p, off + RC_LAW)


@_jit
def ambient_at(p, off, t):
    """Ambient temperature at time ``t`` from the ambient-profile block at ``off``.

    Linear in time between the time stamps, held at the end values outside them.

    Parameters
    ----------
    p : float64 array
        Parameter vector (:mod:`thermoelec.engine.layout`) [SI, unit per slot].
    off : int
        Offset of the ambient-profile block in ``p`` [-].
    t : float
        Mission time [s].

    Returns
    -------
    float
        Ambient temperature [K].
    """
    n = int(p[off + AMBIENT_N])
    i, w = bracket_at(p, off + AMBIENT_TIME, n, t)
    values = off + AMBIENT_TIME + n
    if n == 1:
        return p[values]
    return p[values + i] * (1.0 - w) + p[values + i + 1] * w


def _law_text(p: np.ndarray, off: int) -> str:
    nz, nt = int(p[off + LAW_NZ]), int(p[off + LAW_NT])
    grid = off + LAW_SOC
    values = p[grid + nz + nt: grid + nz + nt + nz * nt].reshape(nt, nz)
    return (f"{nz} x {nt} table [ohm] over soc {p[grid:grid + nz].tolist()} and temperature "
            f"{p[grid + nz:grid + nz + nt].tolist()} K: {values.tolist()}; Ea {p[off + LAW_EA]:g} J/mol, "
            f"T_ref {p[off + LAW_REFERENCE]:g} K")


def describe(p: np.ndarray) -> str:
    """A parameter vector as text, slot by slot with units, then its blocks decoded (for debugging).

    Parameters
    ----------
    p : float64 array
        A vector built by :func:`thermoelec.engine.problem.pack_parameters` [SI, unit per slot].

    Returns
    -------
    str
        One line per header slot (``index name = value [unit]  description``), the
        root functions by event name (activity flag [-], threshold [V, K, A or -]), and
        the OCV, R0, RC and ambient blocks with their units.
    """
    lines = []
    for slot in HEADER_SLOTS:
        if slot.size == 1:
            lines.append(f"{slot.index:3d} {slot.name:<24} = {p[slot.index]:<14.8g} [{slot.unit}]  {slot.description}")
    lines.append("root functions (active, threshold):")
    for k, name in enumerate(EVENT_NAMES):
        lines.append(f"    {name:<20} {int(p[H_ACTIVE + k])}  {p[H_THRESHOLD + k]:.8g}")
    o = int(p[H_OCV])
    n = int(p[o + OCV_N])
    soc = o + OCV_SOC
    lines.append(f"ocv block at {o}: T_ref {p[o + OCV_REFERENCE]:g} K, soc {p[soc:soc + n].tolist()}, "
                 f"voltage {p[soc + n:soc + 2 * n].tolist()} V, entropic {p[soc + 2 * n:soc + 3 * n].tolist()} V/K")
    lines.append(f"r0 block at {int(p[H_R0])}: {_law_text(p, int(p[H_R0]))}")
    off = int(p[H_RC])
    for k in range(int(p[H_NRC])):
        kind = "time constant [s]" if p[off + RC_KIND] == 1.0 else "capacitance [F]"
        lines.append(f"rc pair {k + 1} at {off}: {kind} {p[off + RC_VALUE]:g}; {_law_text(p, off + RC_LAW)}")
        off += int(rc_length(p, off))
    table = int(p[H_AMBIENT_TABLE])
    if table:
        n = int(p[table + AMBIENT_N])
        lines.append(f"ambient profile at {table}: {n} points over {p[table + 1]:g}..{p[table + n]:g} s")
    if p[H_CELLS]:
        lines += _resolved_text(p)
    return "\n".join(lines)


def _resolved_text(p: np.ndarray) -> list[str]:
    """The cell table, neighbour list and coolant path of a resolved pack, one line per cell."""
    n, nrc = int(p[H_NCELLS]), int(p[H_NRC])
    width, table = cell_record_width(nrc), int(p[H_CELLS])
    lines = [f"cell table at {table}: {n} cells, {width} slots each "
             f"({', '.join(f'{f.name} [{f.unit}]' for f in CELL_FIELDS)} per pair)"]
    for c in range(n):
        record = p[table + c * width: table + (c + 1) * width]
        lines.append(f"    cell {c + 1:4d}: " + ", ".join(f"{value:.6g}" for value in record))
    edges = int(p[H_EDGES])
    m = int(p[edges + EDGE_N])
    lines.append(f"neighbour list at {edges}: {m} pairs (cell, cell, W/K): "
                 + "; ".join(f"{int(p[e]) + 1}-{int(p[e + 1]) + 1} {p[e + 2]:.4g}"
                             for e in range(edges + EDGE_FIRST, edges + EDGE_FIRST + EDGE_WIDTH * m, EDGE_WIDTH)))
    path = int(p[H_PATH])
    if path:
        k = int(p[path + PATH_N])
        cells = [int(x) + 1 for x in p[path + PATH_FIRST: path + PATH_FIRST + k]]
        lines.append(f"coolant path at {path}: {k} cells in flow order {cells}")
    lines.append(f"work block at {int(p[H_WORK])}: {WORK_WIDTH} slots per cell "
                 f"({', '.join(f.name for f in WORK_FIELDS)}), then {GROUP_WIDTH} per group")
    return lines
