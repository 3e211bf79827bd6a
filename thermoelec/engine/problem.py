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
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.pack import ResolvedPack
from thermoelec.physics.thermal import ThermalNetwork, coolant_effectiveness

__all__ = ["Limits", "Problem", "StressSettings", "jacobian_bandwidth", "pack_parameters"]


@dataclass(frozen=True)
class Limits:
    """Operating limits of the cell temperature (the voltage limits are the cell's own).

    Attributes
    ----------
    cell_temperature_max : float
        The mission stops when the cell temperature rises to it (event ``temperature_max``) [K].
    charge_temperature_min : float
        Charging below it is reported after the run (by the results layer), not an event [K].
    """

    cell_temperature_max: float = ZERO_CELSIUS + 60.0
    charge_temperature_min: float = ZERO_CELSIUS


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
    if problem.resolved is not None:
        body += _resolved_blocks(header, L.HEADER + len(body), problem)
    return np.concatenate([header, np.asarray(body, float)])


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
