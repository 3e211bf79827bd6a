"""The problem the engine solves: one scenario in SI units, and its parameter vector.

:class:`Problem` is what the scenario layer builds and both drivers integrate;
:func:`pack_parameters` writes it into the flat vector the kernels read (its
layout is declared in :mod:`thermoelec.engine.layout`).

This module imports nothing of the engine but the layout and the profile (and
physics' cell and thermal data); it must not import the mission, the kernels,
the back ends or the drivers, which all take a :class:`Problem`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from thermoelec.engine import layout as L
from thermoelec.engine.profile import Segment
from thermoelec.physics import correlations
from thermoelec.physics.cell import Cell, Pack
from thermoelec.physics.constants import SECONDS_PER_HOUR, ZERO_CELSIUS
from thermoelec.physics.pack import ResolvedPack
from thermoelec.physics.tables import interpolate_2d
from thermoelec.physics.thermal import ThermalNetwork, coolant_effectiveness

__all__ = ["Derating", "LimitTable", "Limits", "Problem", "StressSettings", "jacobian_bandwidth", "pack_parameters"]


@dataclass(frozen=True)
class LimitTable:
    """A limit or an allowance over cell temperature and SoC: bilinear, held at its edge values.

    A constant is a 1 x 1 table; a table over temperature has one SoC point, a table over
    SoC one temperature point. Stored as tuples (compared by value: the mission plans of a
    sweep's variants are shared when their limits agree). The engine writes it as a
    resistance-law block without an activation energy (:func:`thermoelec.engine.layout.law_block`).

    Attributes
    ----------
    soc : tuple of float
        SoC grid, strictly increasing [-].
    temperature : tuple of float
        Temperature grid, strictly increasing [K].
    values : tuple of float
        The values row by row, one row of ``len(soc)`` per temperature [A or W].
    """

    soc: tuple[float, ...]
    temperature: tuple[float, ...]
    values: tuple[float, ...]

    #: No Arrhenius factor on a limit (for the block format of a resistance law).
    activation_energy = 0.0

    @property
    def reference_temperature(self) -> float:
        """The block's reference temperature [K] (unused without an activation energy)."""
        return ZERO_CELSIUS + 25.0

    @classmethod
    def constant(cls, value: float) -> LimitTable:
        """A limit that is the same everywhere [A or W]."""
        return cls((0.0,), (ZERO_CELSIUS + 25.0,), (float(value),))

    @property
    def is_constant(self) -> bool:
        """True for a 1 x 1 table."""
        return len(self.values) == 1

    def __call__(self, soc: float, temperature: float) -> float:
        """The value at ``soc`` [-] and ``temperature`` [K] [A or W]."""
        return float(interpolate_2d(np.asarray(self.soc, float), np.asarray(self.temperature, float),
                                    np.asarray(self.values, float), soc, temperature))

    def scaled(self, factor: float) -> LimitTable:
        """The table with every value times ``factor`` (a C-rate into amperes).

        Parameters
        ----------
        factor : float
            The factor [A per unit of the values, or -].

        Returns
        -------
        LimitTable
            The scaled table [A or W].
        """
        return LimitTable(self.soc, self.temperature, tuple(v * factor for v in self.values))


@dataclass(frozen=True)
class Limits:
    """The operating limits of the pack specification (the voltage limits are the cell's own).

    Each limit beyond the two temperature limits of every mission is optional (None: not
    set); each set one is a root function of the mission (:data:`thermoelec.engine.events.LIMIT_EVENTS`,
    its stop reason its name). Current limits are per cell, power limits for the pack; a
    table is read at each cell's temperature and SoC, and the most restrictive cell binds.

    Attributes
    ----------
    cell_temperature_max : float
        The mission stops when the cell temperature rises to it (event ``temperature_max``) [K].
    charge_temperature_min : float
        Charging below it is reported after the run (by the results layer), not an event [K].
    discharge_current_max, charge_current_max : LimitTable or None
        Largest discharge, charge (a magnitude) current of a cell [A].
    discharge_power_max, charge_power_max : LimitTable or None
        Largest power to the load, into the terminals while charging (a magnitude) [W].
    discharge_temperature_min : float or None
        No discharge with the coldest cell below it [K].
    charge_temperature_max : float or None
        No charge with the hottest cell above it [K].
    sink_temperature_max : float or None
        The sink (housing) node stays below it [K].
    """

    cell_temperature_max: float = ZERO_CELSIUS + 60.0
    charge_temperature_min: float = ZERO_CELSIUS
    discharge_current_max: LimitTable | None = None
    charge_current_max: LimitTable | None = None
    discharge_power_max: LimitTable | None = None
    charge_power_max: LimitTable | None = None
    discharge_temperature_min: float | None = None
    charge_temperature_max: float | None = None
    sink_temperature_max: float | None = None

    @property
    def tables(self) -> tuple[LimitTable | None, ...]:
        """The current and power limits in the order of their header slots (discharge current, charge current,
        discharge power, charge power)."""
        return (self.discharge_current_max, self.charge_current_max, self.discharge_power_max, self.charge_power_max)


@dataclass(frozen=True)
class Derating:
    """How the battery management system derates the demand instead of letting a limit stop the mission.

    The demand's current is held within the allowances (:func:`thermoelec.physics.loads.derated_current`),
    its rises ramped (:func:`~thermoelec.physics.loads.ramped_current`), and with the voltage
    limiter a cell at its voltage limit is held there (:func:`~thermoelec.physics.loads.held_current`)
    instead of stopping the mission. The mission stops only where the pack may deliver no more
    than ``cutoff_current`` per cell while more is demanded (``nothing_deliverable``).

    Attributes
    ----------
    discharge_current, charge_current : LimitTable or None
        Allowed discharge, charge (a magnitude) current of a cell [A]; None: not limited.
    discharge_power, charge_power : LimitTable or None
        Allowed power of the pack to the load, into the terminals while charging [W].
    ramp_rate : float
        Fastest rise of a cell's current magnitude [A/s]; 0 for none.
    voltage_limiter : bool
        Hold a cell at its voltage limit instead of stopping.
    cutoff_current : float
        A cell current at or below which nothing counts as deliverable [A].
    """

    discharge_current: LimitTable | None = None
    charge_current: LimitTable | None = None
    discharge_power: LimitTable | None = None
    charge_power: LimitTable | None = None
    ramp_rate: float = 0.0
    voltage_limiter: bool = True
    cutoff_current: float = 0.0

    @property
    def tables(self) -> tuple[LimitTable | None, ...]:
        """The allowances in the order of their header slots (discharge current, charge current, discharge power,
        charge power)."""
        return (self.discharge_current, self.charge_current, self.discharge_power, self.charge_power)


@dataclass(frozen=True)
class StressSettings:
    """How ageing stress is weighed in the report.

    ``activation_energy`` [J/mol] and ``reference_temperature`` [K] set the
    Arrhenius weighting of time (an hour at T counts as
    ``exp(-Ea/R (1/T - 1/T_ref))`` hours at T_ref); ``hot_temperature`` [K] is the
    threshold of the reported "time above" indicator. The default activation
    energy, 31.5 kJ/mol, is close to the calendar/cycle capacity-fade value
    reported by J. Wang et al., J. Power Sources 196 (2011) 3942 for
    graphite/LiFePO4 cells (from memory); give the value of your own chemistry.
    """

    activation_energy: float = 31_500.0
    reference_temperature: float = 298.15
    hot_temperature: float = 318.15


@dataclass(frozen=True)
class Problem:
    """Everything needed to simulate one scenario, in SI units.

    Attributes
    ----------
    cell : Cell
        Equivalent-circuit and thermal data of one cell (:class:`thermoelec.physics.cell.Cell`).
    pack : Pack
        Cells in series and in parallel, interconnect resistance [Ω].
    thermal : ThermalNetwork
        Conductances [W/K], heat capacities [J/K] and the cooling options.
    segments : tuple of Segment
        The mission profile, pack level [SI].
    ambient_temperature : float
        Ambient of the mission [K], where neither a segment nor ``ambient_profile`` sets it.
    initial_soc : float
        State of charge at t = 0 [-].
    initial_cell_temperature, initial_sink_temperature : float
        Node temperatures at t = 0 [K].
    limits : Limits
        Temperature limits [K].
    name : str
        Scenario name, for reports.
    stress : StressSettings
        Arrhenius weighting of time for the ageing-stress indicators.
    initial_coolant_temperature : float or None
        Coolant node temperature at t = 0 [K]; None: the coolant inlet temperature
        (the sink temperature without a coolant).
    ambient_profile : tuple of two arrays or None
        Times [s] and ambient temperatures [K], linear in time; a segment with its own
        ambient holds that instead.
    soak : tuple of Segment
        Segments run before the mission as a problem of their own
        (:func:`thermoelec.engine.mission.soak_problem`); the mission starts from their
        end state with the integrals reset.
    notes : tuple of str
        What the scenario layer wants said in the summary (a profile's ambient column that
        overrides the scenario's); nothing the engine reads.
    resolved : ResolvedPack or None
        Every cell with its own states, factors and thermal paths
        (:class:`thermoelec.physics.pack.ResolvedPack`); None for the lumped pack
        (identical cells in one node, the default).
    derating : Derating or None
        How the battery management system derates the demand; None: no derating (a
        limit reached stops the mission).
    """

    cell: Cell
    pack: Pack
    thermal: ThermalNetwork
    segments: tuple[Segment, ...]
    ambient_temperature: float
    initial_soc: float
    initial_cell_temperature: float
    initial_sink_temperature: float
    limits: Limits = field(default_factory=Limits)
    name: str = ""
    stress: StressSettings = field(default_factory=StressSettings)
    initial_coolant_temperature: float | None = None
    ambient_profile: tuple[np.ndarray, np.ndarray] | None = None
    soak: tuple[Segment, ...] = ()
    notes: tuple[str, ...] = ()
    resolved: ResolvedPack | None = None
    derating: Derating | None = None

    @property
    def n_rc(self) -> int:
        """Number of RC pairs of the cell [-]."""
        return len(self.cell.rc)

    @property
    def n_cells(self) -> int:
        """Number of cell blocks in the state vector: every cell of a resolved pack, 1 for a lumped one [-]."""
        return 1 if self.resolved is None else self.resolved.n_cells

    @property
    def n_states(self) -> int:
        """Length of the state vector (:func:`thermoelec.engine.layout.n_states`) [-]."""
        return L.n_states(self.n_rc, self.n_cells)

    def initial_state(self) -> np.ndarray:
        """State vector at t = 0: RC pairs relaxed, integrals zero.

        Returns
        -------
        float64 array, shape (n_states,)
            The state (:mod:`thermoelec.engine.layout`): the initial SoC of each cell [-], RC
            voltages 0 [V], the initial cell and sink temperatures [K], the coolant node
            at ``initial_coolant_temperature``, else the coolant inlet, else the sink
            temperature [K], and the quadratures 0 [J, C].
        """
        n_rc, n_cells = self.n_rc, self.n_cells
        y = np.zeros(L.n_states(n_rc, n_cells))
        soc, temperature = L.cell_state_indices(n_rc, n_cells)
        y[soc] = self.initial_soc if self.resolved is None else self.resolved.initial_soc
        y[temperature] = self.initial_cell_temperature
        y[L.sink_temperature_index(n_rc, n_cells)] = self.initial_sink_temperature
        coolant = self.thermal.coolant
        tf = L.coolant_temperature_index(n_rc, n_cells)
        if self.initial_coolant_temperature is not None:
            y[tf] = self.initial_coolant_temperature
        elif coolant is not None:
            y[tf] = coolant.inlet_temperature
        else:
            y[tf] = self.initial_sink_temperature
        return y

    def ambient_at(self, time: float) -> float:
        """Ambient temperature at ``time`` from the ambient profile, else the constant ambient.

        Linear in time between the profile's points, held at its end values outside them.

        Parameters
        ----------
        time : float
            Mission time [s].

        Returns
        -------
        float
            Ambient temperature [K].
        """
        if self.ambient_profile is None:
            return self.ambient_temperature
        return float(np.interp(time, *self.ambient_profile))


def pack_parameters(problem: Problem) -> np.ndarray:
    """The flat parameter vector of :mod:`thermoelec.engine.layout`, the phase slots left at zero.

    The phase slots (mode, demand, root functions) are left at zero and the ambient
    at the mission's: :func:`thermoelec.engine.mission.configure_phase` writes them at
    every phase start, and the flag of each thermostat present. The fan and heater
    flags start off, the pump's on (a coolant without a pump thermostat always flows).

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].

    Returns
    -------
    float64 array
        Header then blocks [SI, unit per slot]; :func:`thermoelec.engine.layout.describe`
        prints it by name.
    """
    c, pk, th = problem.cell, problem.pack, problem.thermal
    header = np.zeros(L.HEADER)
    header[L.H_NS], header[L.H_NP], header[L.H_RIC] = pk.series, pk.parallel, pk.interconnect_resistance
    header[L.H_CAPACITY] = c.capacity
    header[L.H_CCELL] = pk.series * pk.parallel * c.mass * c.specific_heat
    header[L.H_CSINK], header[L.H_GCS] = th.sink_heat_capacity, th.cell_to_sink
    header[L.H_GSA], header[L.H_GCA] = th.sink_to_ambient, th.cell_to_ambient
    header[L.H_NRC] = len(c.rc)
    header[L.H_AMBIENT] = problem.ambient_temperature
    header[L.H_NCELLS] = problem.n_cells
    _thermal_header(header, th)
    body: list[float] = []
    header[L.H_OCV] = L.HEADER + len(body)
    body += L.ocv_block(c.ocv_soc, c.ocv_voltage, c.ocv_entropic, c.ocv_reference_temperature)
    header[L.H_R0] = L.HEADER + len(body)
    body += L.law_block(c.r0)
    header[L.H_RC] = L.HEADER + len(body)
    for pair in c.rc:
        body += L.rc_block(pair)
    if problem.ambient_profile is not None:
        header[L.H_AMBIENT_TABLE] = L.HEADER + len(body)
        body += L.ambient_block(*problem.ambient_profile)
    body += _limit_blocks(header, L.HEADER + len(body), problem)
    if problem.resolved is not None:
        body += _resolved_blocks(header, L.HEADER + len(body), problem)
    return np.concatenate([header, np.asarray(body, float)])


#: The header slots of the limit tables and of the allowance tables, in the order of ``Limits.tables``.
_LIMIT_SLOTS = (L.H_LIMIT_DISCHARGE_CURRENT, L.H_LIMIT_CHARGE_CURRENT, L.H_LIMIT_DISCHARGE_POWER,
                L.H_LIMIT_CHARGE_POWER)
_DERATE_SLOTS = (L.H_DERATE_DISCHARGE_CURRENT, L.H_DERATE_CHARGE_CURRENT, L.H_DERATE_DISCHARGE_POWER,
                 L.H_DERATE_CHARGE_POWER)


def _limit_blocks(header: np.ndarray, start: int, problem: Problem) -> list[float]:
    """The limit and allowance tables from ``start``, their offsets, flags and the voltage limiter's constants into
    ``header``. Current tables are per cell (the kernels scale them to the cell's share); power tables the pack's."""
    c, pk = problem.cell, problem.pack
    header[L.H_CELL_VOLTAGE_MIN], header[L.H_CELL_VOLTAGE_MAX] = c.voltage_min, c.voltage_max
    body: list[float] = []
    limits = problem.limits
    for slot, table in zip(_LIMIT_SLOTS, limits.tables, strict=True):
        if table is not None:
            header[slot] = start + len(body)
            header[L.H_LIMITS] = 1.0
            body += L.law_block(table)
    derating = problem.derating
    if derating is None:
        return body
    header[L.H_DERATE] = 1.0
    for slot, table in zip(_DERATE_SLOTS, derating.tables, strict=True):
        if table is not None:
            header[slot] = start + len(body)
            body += L.law_block(table)
    # the limiter lets go once the held current passes the demand by a hundred-thousandth of the 1 C current:
    # small against any demand, large enough to keep its root function clear of zero where it switched
    header[L.H_HOLD_HYSTERESIS] = 1e-5 * pk.parallel * c.capacity / SECONDS_PER_HOUR
    header[L.H_CUTOFF] = pk.parallel * derating.cutoff_current
    header[L.H_RAMP_RATE] = pk.parallel * derating.ramp_rate
    return body


def _resolved_blocks(header: np.ndarray, start: int, problem: Problem) -> list[float]:
    """The cell table, neighbour list, coolant path and work block of a resolved pack, from ``start``.

    Writes their offsets into ``header``. A cell's coolant segment is stored as its
    effectiveness ``1 - exp(-UA_i / m c_p)`` (the flow is fixed while the pump runs).
    """
    rp, c, th = problem.resolved, problem.cell, problem.thermal
    n, nrc = rp.n_cells, problem.n_rc
    header[L.H_CCELL] = float(np.sum(rp.heat_capacity))
    rate = th.coolant.capacity_rate if th.coolant is not None else 0.0
    records = np.zeros((n, L.cell_record_width(nrc)))
    records[:, L.CELL_GROUP] = rp.group
    records[:, L.CELL_CAPACITY] = c.capacity * rp.capacity_factor
    records[:, L.CELL_R0_FACTOR] = rp.r0_factor
    records[:, L.CELL_TAB] = rp.tab_resistance
    records[:, L.CELL_HEAT_CAPACITY] = rp.heat_capacity
    records[:, L.CELL_SINK] = rp.cell_to_sink
    records[:, L.CELL_AMBIENT] = rp.cell_to_ambient
    records[:, L.CELL_PLATE] = [coolant_effectiveness(ua, rate) for ua in rp.plate_conductance]
    records[:, L.CELL_HEATER] = rp.heat_capacity / np.sum(rp.heat_capacity)
    records[:, L.CELL_RC:] = rp.rc_factor.reshape(n, nrc)
    body: list[float] = []
    header[L.H_CELLS] = start
    body += records.ravel().tolist()
    header[L.H_EDGES] = start + len(body)
    pairs = rp.layout.neighbours
    body += [len(pairs), *np.column_stack([pairs, rp.neighbour_conductance]).ravel().tolist()]
    if len(rp.coolant_order):
        header[L.H_PATH] = start + len(body)
        body += [len(rp.coolant_order), *rp.coolant_order.tolist()]
    header[L.H_WORK] = start + len(body)
    body += [0.0] * L.work_size(n, rp.series)
    return body


def _thermal_header(header: np.ndarray, th: ThermalNetwork) -> None:
    """Cooling options into the header; thermostat flags start off (the driver sets them)."""
    conv = th.convection
    if conv is not None:
        header[L.H_FORCED] = correlations.FORCED_CORRELATIONS.get(conv.forced or "", 0)
        header[L.H_NATURAL] = correlations.NATURAL_CORRELATIONS.get(conv.natural or "", 0)
        header[L.H_CONV_LENGTH], header[L.H_CONV_AREA], header[L.H_AIR_SPEED] = conv.length, conv.area, conv.air_speed
    header[L.H_FAN_SPEED] = -1.0
    if th.fan is not None:
        header[L.H_FAN_SPEED] = -1.0 if th.fan.air_speed is None else th.fan.air_speed
        header[L.H_FAN_G] = th.fan.conductance
        header[L.H_FAN_POWER] = th.fan.power
    if th.radiation is not None:
        header[L.H_EMISSIVITY], header[L.H_RAD_AREA] = th.radiation.emissivity, th.radiation.area
        header[L.H_SURROUNDINGS] = th.radiation.surroundings_temperature or 0.0
    if th.coolant is not None:
        cool = th.coolant
        header[L.H_COOL_MCP], header[L.H_COOL_UA], header[L.H_COOL_G] = (cool.capacity_rate, cool.plate_conductance,
                                                                    cool.conductance)
        header[L.H_COOL_C], header[L.H_COOL_INLET] = cool.heat_capacity, cool.inlet_temperature
    header[L.H_PUMP_ON] = 1.0
    header[L.H_PUMP_POWER] = th.pump_power if th.coolant is not None else 0.0
    if th.heater is not None:
        header[L.H_HEATER_POWER], header[L.H_HEATER_FROM_PACK] = th.heater.power, float(th.heater.from_pack)


def jacobian_bandwidth(problem: Problem) -> int:
    """Half-bandwidth of the Jacobian's part that couples the cell blocks of a resolved pack.

    A cell's equations depend on its own block, on the cells of its group (through
    the group voltage), on its neighbours and on the next cell along the coolant
    path; the band holds those couplings (cells are numbered group by group, so a
    group is a band of ``parallel`` blocks). What lies outside (the sink and coolant
    nodes, which every cell touches, the pack current that every cell shares in a
    power phase, the coolant's memory of the cells upstream) makes the band matrix
    an approximate Newton matrix, as CVODE allows; it is weak against ``1 / gamma``.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].

    Returns
    -------
    int
        The half-bandwidth in states, 0 for a lumped pack [-].
    """
    rp = problem.resolved
    if rp is None:
        return 0
    nb = L.cell_block_size(problem.n_rc)
    reach = rp.parallel - 1
    if len(rp.layout.neighbours):
        reach = max(reach, int(np.max(np.abs(np.diff(rp.layout.neighbours, axis=1)))))
    if len(rp.coolant_order) > 1:
        reach = max(reach, int(np.max(np.abs(np.diff(rp.coolant_order)))))
    return min((reach + 1) * nb - 1, problem.n_states - 1)
