"""The coupled electro-thermal right-hand side, its Jacobian and event functions.

States (SI units), for one scenario::

    y[0]                 z      state of charge [-]
    y[1 : 1+n]           v_k    RC-pair voltages of one cell [V]
    y[1+n]               Tc     lumped cell temperature [K]
    y[2+n]               Ts     heat-sink node temperature [K]
    y[3+n]               Tf     coolant node temperature [K] (constant without a coolant mass)
    y[4+n : 4+n+11]      running integrals (quadratures), see ``Q_*`` below

Equations (see DESIGN notes): Thevenin cell ``V = U - sum v_k - I R0`` with
``U(z, T) = U_ref(z) + (T - T_ref) dU/dT(z)``; pack ``Ns x Np`` with
``E = Ns (U - sum v_k)``, ``R_tot = Ns R0 / Np + R_ic``; the pack current is
closed-form for each load mode; Bernardi heat; two lumped thermal nodes and an
optional coolant node; convection from correlations, radiation, thermostatic
fan, heater and pump (their on/off states are phase parameters, switched at
located events).

The quadratures integrate battery and load energy, heat generated, heat rejected
to ambient and charge throughput with the same integrator as the states. BDF is
a linear method, so the linear invariant ``heat generated = heat stored + heat
to ambient`` is kept to the Newton tolerance, not only to the error tolerance.

All kernels read their parameters from one flat float64 vector built by
:func:`pack_parameters`, because a numba call with one array argument costs a
fraction of one with twenty: the right-hand side is called ~10^5 times a mission.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numba
import numpy as np

from thermoelec.engine.profile import Segment
from thermoelec.physics import cell as cellphys
from thermoelec.physics import thermal as thermphys
from thermoelec.physics.cell import Cell, Pack, ResistanceLaw
from thermoelec.physics.thermal import ThermalNetwork

_jit = numba.njit(cache=True, nogil=True, error_model="numpy")

_arrhenius = cellphys.arrhenius_factor
_ocv = cellphys.open_circuit_voltage
_current_for_power = cellphys.current_for_power
_current_for_resistance = cellphys.current_for_resistance
_current_for_voltage = cellphys.current_for_voltage
_power_margin = cellphys.power_deliverable_margin
_bernardi = cellphys.bernardi_heat
_cell_rate = thermphys.cell_node_rate
_sink_rate = thermphys.sink_node_rate
_h_from_numbers = thermphys.coefficient_from_numbers
_conv_numbers = thermphys.convection_numbers
_radiation = thermphys.radiation_heat
_effectiveness = thermphys.coolant_effectiveness
_aux_voltage = cellphys.terminal_voltage_with_auxiliary_load

# ---- load modes of a phase (a segment is one or two phases) -------------------
MODE_CURRENT, MODE_POWER, MODE_RESISTANCE, MODE_VOLTAGE = 0, 1, 2, 3
MODE_CODES = {"current": MODE_CURRENT, "power": MODE_POWER, "resistance": MODE_RESISTANCE,
              "voltage": MODE_VOLTAGE}

# ---- events: root functions g_k, positive while all is well --------------------
EV_VOLTAGE_MIN, EV_VOLTAGE_MAX, EV_POWER, EV_TEMPERATURE = 0, 1, 2, 3
EV_SOC_EMPTY, EV_SOC_FULL, EV_CV_SWITCH, EV_CV_CUTOFF = 4, 5, 6, 7
EV_END_VOLTAGE_BELOW, EV_END_VOLTAGE_ABOVE, EV_END_SOC_BELOW, EV_END_SOC_ABOVE = 8, 9, 10, 11
EV_FAN, EV_HEATER, EV_PUMP = 12, 13, 14
N_EVENTS = 15
EVENT_NAMES = ("voltage_min", "voltage_max", "power_limit", "temperature_max", "soc_empty", "soc_full",
               "cv_switch", "cv_cutoff", "end_voltage_below", "end_voltage_above", "end_soc_below",
               "end_soc_above", "fan_switch", "heater_switch", "pump_switch")
#: Scale of each root function, to compare how close to zero they are
#: [V, V, V², K, -, -, V, A, V, V, -, -, K, K, K].
EVENT_SCALES = (1.0, 1.0, 100.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0)
#: A root function within this many of its scales of zero (or below) counts as fired.
ROOT_TOLERANCE = 1e-9
#: Which event wins when several fire at once (lower rank first): the stops, then switches and ends,
#: then the thermostats (a thermostat event does not end anything; it toggles and the phase goes on).
EVENT_PRIORITY = (2, 0, 1, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14)
EVENT_RANK = tuple(EVENT_PRIORITY.index(k) for k in range(N_EVENTS))
#: Thermostat events and the header flag each one toggles (filled in below the header).
CONTROL_EVENTS = (EV_FAN, EV_HEATER, EV_PUMP)

# ---- quadratures (offsets after the dynamic states) ----------------------------
Q_BATTERY_DISCHARGE = 0  # ∫ Ns U I+ dt  [J]
Q_BATTERY_CHARGE = 1     # ∫ Ns U I- dt  [J] (negative)
Q_LOAD_DISCHARGE = 2     # ∫ V I+ dt     [J]
Q_LOAD_CHARGE = 3        # ∫ V I- dt     [J] (negative)
Q_HEAT = 4               # ∫ heat generated (cells + interconnect) dt [J]
Q_REVERSIBLE = 5         # ∫ reversible (entropic) heat dt [J]
Q_HEAT_AMBIENT = 6       # ∫ heat rejected to ambient dt [J]
Q_THROUGHPUT = 7         # ∫ |I| dt      [C]
Q_HEATER = 8             # ∫ heater power dt [J]
Q_COOLANT = 9            # ∫ heat carried away by the coolant dt [J]
Q_RADIATION = 10         # ∫ radiation from the sink dt [J] (part of Q_HEAT_AMBIENT)
N_QUADRATURES = 11

# ---- algebraic outputs ---------------------------------------------------------
A_CURRENT, A_VOLTAGE, A_CELL_VOLTAGE, A_OCV, A_EMF, A_RESISTANCE = 0, 1, 2, 3, 4, 5
A_HEAT, A_REVERSIBLE, A_HEAT_AMBIENT, A_ENTROPIC, A_R0, A_POWER_MARGIN = 6, 7, 8, 9, 10, 11
A_AMBIENT, A_HEATER, A_COOLANT, A_RADIATION, A_SINK_CONDUCTANCE, A_COOLANT_OUTLET = 12, 13, 14, 15, 16, 17
A_REYNOLDS, A_RAYLEIGH = 18, 19
N_ALGEBRAICS = 20
ALGEBRAIC_NAMES = ("current", "voltage", "cell_voltage", "ocv", "emf", "resistance", "heat",
                   "reversible_heat", "heat_to_ambient", "entropic", "r0", "power_margin", "ambient",
                   "heater", "coolant", "radiation", "sink_conductance", "coolant_outlet", "reynolds", "rayleigh")

# ---- header of the flat parameter vector ---------------------------------------
H_MODE, H_VALUE, H_AMBIENT = 0, 1, 2
H_NS, H_NP, H_RIC, H_CAPACITY = 3, 4, 5, 6
H_CCELL, H_CSINK, H_GCS, H_GSA, H_GCA = 7, 8, 9, 10, 11
H_NRC, H_OCV, H_R0, H_RC = 12, 13, 14, 15
H_TIME = 16                        # current time [s], written by the callers (time-dependent ambient)
H_AMBIENT_TABLE = 17               # offset of the ambient profile block, 0 for none
H_FORCED, H_NATURAL, H_CONV_LENGTH, H_CONV_AREA, H_AIR_SPEED = 18, 19, 20, 21, 22
H_FAN_ON, H_FAN_SPEED, H_FAN_G = 23, 24, 25     # fan speed < 0: the fan leaves the air speed alone
H_EMISSIVITY, H_RAD_AREA, H_SURROUNDINGS = 26, 27, 28  # surroundings 0: ambient
H_COOL_MCP, H_COOL_UA, H_COOL_G, H_COOL_C, H_COOL_INLET, H_PUMP_ON = 29, 30, 31, 32, 33, 34
H_HEATER_ON, H_HEATER_POWER, H_HEATER_FROM_PACK = 35, 36, 37
CONTROL_FLAGS = {EV_FAN: H_FAN_ON, EV_HEATER: H_HEATER_ON, EV_PUMP: H_PUMP_ON}
CONTROL_FLAG_OF = (H_FAN_ON, H_HEATER_ON, H_PUMP_ON)  # by event - EV_FAN, for the kernels
H_ACTIVE = 38                      # N_EVENTS activity flags
H_THRESHOLD = H_ACTIVE + N_EVENTS  # N_EVENTS thresholds
HEADER = H_THRESHOLD + N_EVENTS


def n_states(n_rc: int) -> int:
    """Number of states for ``n_rc`` RC pairs (dynamic states plus quadratures)."""
    return 4 + n_rc + N_QUADRATURES


def n_dynamic(n_rc: int) -> int:
    """Number of dynamic (non-quadrature) states."""
    return 4 + n_rc


def cell_temperature_index(n_rc: int) -> int:
    """Index of the cell temperature in the state vector."""
    return 1 + n_rc


def sink_temperature_index(n_rc: int) -> int:
    """Index of the sink temperature in the state vector."""
    return 2 + n_rc


def coolant_temperature_index(n_rc: int) -> int:
    """Index of the coolant node temperature in the state vector."""
    return 3 + n_rc


def quadrature_index(n_rc: int) -> int:
    """Index of the first quadrature in the state vector."""
    return 4 + n_rc


@dataclass(frozen=True)
class Limits:
    """Operating limits [V per cell, K]."""

    cell_temperature_max: float = 333.15
    charge_temperature_min: float = 273.15


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
    """Everything needed to simulate one scenario, in SI units."""

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

    @property
    def n_rc(self) -> int:
        """Number of RC pairs."""
        return len(self.cell.rc)

    def initial_state(self) -> np.ndarray:
        """State vector at t = 0: RC pairs relaxed, integrals zero."""
        y = np.zeros(n_states(self.n_rc))
        y[0] = self.initial_soc
        y[cell_temperature_index(self.n_rc)] = self.initial_cell_temperature
        y[sink_temperature_index(self.n_rc)] = self.initial_sink_temperature
        coolant = self.thermal.coolant
        if self.initial_coolant_temperature is not None:
            y[coolant_temperature_index(self.n_rc)] = self.initial_coolant_temperature
        elif coolant is not None:
            y[coolant_temperature_index(self.n_rc)] = coolant.inlet_temperature
        else:
            y[coolant_temperature_index(self.n_rc)] = self.initial_sink_temperature
        return y

    def ambient_at(self, time: float) -> float:
        """Ambient temperature [K] at ``time`` [s] from the ambient profile (else the constant)."""
        if self.ambient_profile is None:
            return self.ambient_temperature
        return float(np.interp(time, *self.ambient_profile))


def _law_block(law: ResistanceLaw) -> list[float]:
    nz, nt = len(law.soc), len(law.temperature)
    return [nz, nt, law.activation_energy, law.reference_temperature,
            *law.soc, *law.temperature, *np.asarray(law.values, float).ravel()]


def pack_parameters(problem: Problem) -> np.ndarray:
    """The flat parameter vector read by the kernels (phase fields left at zero)."""
    c, pk, th = problem.cell, problem.pack, problem.thermal
    header = np.zeros(HEADER)
    header[H_NS], header[H_NP], header[H_RIC] = pk.series, pk.parallel, pk.interconnect_resistance
    header[H_CAPACITY] = c.capacity
    header[H_CCELL] = pk.series * pk.parallel * c.mass * c.specific_heat
    header[H_CSINK], header[H_GCS] = th.sink_heat_capacity, th.cell_to_sink
    header[H_GSA], header[H_GCA] = th.sink_to_ambient, th.cell_to_ambient
    header[H_NRC] = len(c.rc)
    header[H_AMBIENT] = problem.ambient_temperature
    _thermal_header(header, th)
    body: list[float] = []
    header[H_OCV] = HEADER + len(body)
    body += [len(c.ocv_soc), c.ocv_reference_temperature, *c.ocv_soc, *c.ocv_voltage, *c.ocv_entropic]
    header[H_R0] = HEADER + len(body)
    body += _law_block(c.r0)
    header[H_RC] = HEADER + len(body)
    for pair in c.rc:
        if pair.time_constant is not None:
            body += [1.0, pair.time_constant]
        else:
            body += [0.0, float(pair.capacitance)]
        body += _law_block(pair.resistance)
    if problem.ambient_profile is not None:
        times, values = problem.ambient_profile
        header[H_AMBIENT_TABLE] = HEADER + len(body)
        body += [len(times), *times, *values]
    return np.concatenate([header, np.asarray(body, float)])


def _thermal_header(header: np.ndarray, th: ThermalNetwork) -> None:
    """Cooling options into the header; thermostat flags start off (the driver sets them)."""
    conv = th.convection
    if conv is not None:
        header[H_FORCED] = thermphys.FORCED_CORRELATIONS.get(conv.forced or "", 0)
        header[H_NATURAL] = thermphys.NATURAL_CORRELATIONS.get(conv.natural or "", 0)
        header[H_CONV_LENGTH], header[H_CONV_AREA], header[H_AIR_SPEED] = conv.length, conv.area, conv.air_speed
    header[H_FAN_SPEED] = -1.0
    if th.fan is not None:
        header[H_FAN_SPEED] = -1.0 if th.fan.air_speed is None else th.fan.air_speed
        header[H_FAN_G] = th.fan.conductance
    if th.radiation is not None:
        header[H_EMISSIVITY], header[H_RAD_AREA] = th.radiation.emissivity, th.radiation.area
        header[H_SURROUNDINGS] = th.radiation.surroundings_temperature or 0.0
    if th.coolant is not None:
        cool = th.coolant
        header[H_COOL_MCP], header[H_COOL_UA], header[H_COOL_G] = (cool.capacity_rate, cool.plate_conductance,
                                                                    cool.conductance)
        header[H_COOL_C], header[H_COOL_INLET] = cool.heat_capacity, cool.inlet_temperature
    header[H_PUMP_ON] = 1.0
    if th.heater is not None:
        header[H_HEATER_POWER], header[H_HEATER_FROM_PACK] = th.heater.power, float(th.heater.from_pack)


# The kernels read tables in place, by offset into ``p``: a slice of ``p`` would make a
# new array view (with its reference count) at every call, a third of the cost of
# ``evaluate``. The interpolation rules are those of :func:`thermoelec.physics.cell.bracket`.
@_jit
def _bracket_at(p, start, n, x):
    """:func:`thermoelec.physics.cell.bracket` on the grid ``p[start:start + n]``, read in place."""
    if n == 1 or x <= p[start]:
        return 0, 0.0
    if x >= p[start + n - 1]:
        return n - 2, 1.0
    if n <= 32:  # a scan on the short tables of cell data
        i = 0
        while p[start + i + 1] <= x:
            i += 1
    else:  # bisection on long ones (an ambient profile): p[start + lo] <= x < p[start + hi]
        lo, hi = 0, n - 1
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if p[start + mid] <= x:
                lo = mid
            else:
                hi = mid
        i = lo
    return i, (x - p[start + i]) / (p[start + i + 1] - p[start + i])


@_jit
def _interp1_at(p, grid, values, n, x):
    """:func:`thermoelec.physics.cell.interpolate_1d` on tables at offsets ``grid`` and ``values`` of ``p``."""
    i, w = _bracket_at(p, grid, n, x)
    if n == 1:
        return p[values]
    return p[values + i] * (1.0 - w) + p[values + i + 1] * w


@_jit
def _law_value(p, off, z, temperature):
    """Resistance [Ω] of the resistance-law block that starts at ``off`` (bilinear, as ``cell.interpolate_2d``)."""
    nz = int(p[off])
    nt = int(p[off + 1])
    ea = p[off + 2]
    a = off + 4
    if nz == 1 and nt == 1:
        base = p[a + 2]
    else:
        i, wz = _bracket_at(p, a, nz, z)
        j, wt = _bracket_at(p, a + nz, nt, temperature)
        i1 = i + 1 if nz > 1 else i
        j1 = j + 1 if nt > 1 else j
        v = a + nz + nt
        low = p[v + j * nz + i] * (1.0 - wz) + p[v + j * nz + i1] * wz
        high = p[v + j1 * nz + i] * (1.0 - wz) + p[v + j1 * nz + i1] * wz
        base = low * (1.0 - wt) + high * wt
    if ea != 0.0:
        base *= _arrhenius(temperature, ea, p[off + 3])
    return base


@_jit
def _law_length(p, off):
    nz = int(p[off])
    nt = int(p[off + 1])
    return 4 + nz + nt + nz * nt


@_jit
def _rc_rate(p, off, z, temperature, icell, v):
    """``dv/dt = I/C - v/(R C)`` [V/s] of the RC-pair block at ``off``, with fewest divisions.

    Given a time constant, ``C = tau / R(z, T_ref)``; when the law does not depend
    on temperature, ``R(z, T_ref) = R`` and the rate is ``(R I - v) / tau``.
    """
    r = _law_value(p, off + 2, z, temperature)
    if p[off] == 1.0:
        if p[off + 3] == 1.0 and p[off + 4] == 0.0:  # one temperature point, no Arrhenius factor
            return (r * icell - v) / p[off + 1]
        r_ref = _law_value(p, off + 2, z, p[off + 5])
        return (icell - v / r) * r_ref / p[off + 1]
    return (icell - v / r) / p[off + 1]


@_jit
def _rc_pair(p, off, z, temperature):
    """Resistance [Ω] and capacitance [F] of the RC-pair block that starts at ``off``."""
    r = _law_value(p, off + 2, z, temperature)
    if p[off] == 1.0:
        return r, p[off + 1] / _law_value(p, off + 2, z, p[off + 5])  # C = tau / R(z, T_ref)
    return r, p[off + 1]


@_jit
def evaluate(y, p, ydot, alg):
    """Fill ``ydot`` (state derivatives) and ``alg`` (algebraic outputs) at state ``y``.

    Numba kernel; all units SI. ``alg`` holds the ``A_*`` quantities.
    """
    nrc = int(p[H_NRC])
    z = y[0]
    tc = y[1 + nrc]
    ts = y[2 + nrc]
    tf = y[3 + nrc]
    ta = p[H_AMBIENT]
    table = int(p[H_AMBIENT_TABLE])
    if table > 0:
        nt = int(p[table])
        ta = _interp1_at(p, table + 1, table + 1 + nt, nt, p[H_TIME])
    ns = p[H_NS]
    npar = p[H_NP]
    ric = p[H_RIC]

    o = int(p[H_OCV])
    n = int(p[o])
    # the OCV and entropic tables share their SoC grid: one bracket for both
    i, w = _bracket_at(p, o + 2, n, z)
    i1 = i + 1 if n > 1 else i
    u_ref = p[o + 2 + n + i] * (1.0 - w) + p[o + 2 + n + i1] * w
    dudt = p[o + 2 + 2 * n + i] * (1.0 - w) + p[o + 2 + 2 * n + i1] * w
    u = _ocv(u_ref, dudt, tc, p[o + 1])

    r0 = _law_value(p, int(p[H_R0]), z, tc)
    vsum = 0.0
    for k in range(nrc):
        vsum += y[1 + k]
    emf = ns * (u - vsum)
    rtot = ns * r0 / npar + ric

    mode = int(p[H_MODE])
    value = p[H_VALUE]
    heater = p[H_HEATER_POWER] if p[H_HEATER_ON] == 1.0 else 0.0
    # a heater fed from the pack is a constant-power load on its terminals (in voltage
    # mode the charger holding the terminals feeds it, so the cells do not see it)
    aux = heater if p[H_HEATER_FROM_PACK] == 1.0 else 0.0
    if mode == MODE_CURRENT:
        current = value
        if aux > 0.0:
            current = value + aux / _aux_voltage(1.0, emf - rtot * value, rtot, aux)
    elif mode == MODE_POWER:
        current = _current_for_power(emf, rtot, value + aux)
    elif mode == MODE_RESISTANCE:
        current = _current_for_resistance(emf, rtot, value)
        if aux > 0.0:
            v_aux = _aux_voltage(1.0 + rtot / value, emf, rtot, aux)
            current = v_aux / value + aux / v_aux
    else:
        current = _current_for_voltage(emf, rtot, value)

    icell = current / npar
    vcell = u - vsum - icell * r0
    voltage = emf - current * rtot

    ydot[0] = -icell / p[H_CAPACITY]
    off = int(p[H_RC])
    for k in range(nrc):
        ydot[1 + k] = _rc_rate(p, off, z, tc, icell, y[1 + k])
        off += 2 + _law_length(p, off + 2)

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
    alg[A_AMBIENT] = ta
    alg[A_HEATER] = heater
    alg[A_COOLANT] = carried
    alg[A_RADIATION] = radiated
    alg[A_SINK_CONDUCTANCE] = g_sa
    alg[A_COOLANT_OUTLET] = outlet
    alg[A_REYNOLDS] = reynolds
    alg[A_RAYLEIGH] = rayleigh


@_jit
def rhs(y, ydot, p, alg):
    """Right-hand side ``dy/dt`` written into ``ydot`` (autonomous within a phase)."""
    evaluate(y, p, ydot, alg)


@_jit
def roots(y, g, p, alg, scratch):
    """Event functions ``g_k`` written into ``g``; each is positive while all is well."""
    evaluate(y, p, scratch, alg)
    roots_from(y, g, p, alg)


@_jit
def roots_from(y, g, p, alg):
    """Event functions from the algebraic outputs ``alg`` already evaluated at ``y``."""
    nrc = int(p[H_NRC])
    z = y[0]
    vcell = alg[A_CELL_VOLTAGE]
    voltage = alg[A_VOLTAGE]
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] == 0.0:
            g[k] = 1.0
            continue
        thr = p[H_THRESHOLD + k]
        if k == EV_VOLTAGE_MIN:
            g[k] = vcell - thr
        elif k == EV_VOLTAGE_MAX:
            g[k] = thr - vcell
        elif k == EV_POWER:
            g[k] = alg[A_POWER_MARGIN]
        elif k == EV_TEMPERATURE:
            g[k] = thr - y[1 + nrc]
        elif k == EV_SOC_EMPTY:
            g[k] = z - thr
        elif k == EV_SOC_FULL:
            g[k] = thr - z
        elif k == EV_CV_SWITCH:
            g[k] = thr - voltage
        elif k == EV_CV_CUTOFF:
            g[k] = abs(alg[A_CURRENT]) - thr
        elif k == EV_END_VOLTAGE_BELOW:
            g[k] = voltage - thr
        elif k == EV_END_VOLTAGE_ABOVE:
            g[k] = thr - voltage
        elif k == EV_END_SOC_BELOW:
            g[k] = z - thr
        elif k == EV_END_SOC_ABOVE:
            g[k] = thr - z
        else:
            # a thermostat: the threshold is the one it switches at next; a cooling
            # switch (fan, pump) and a heater that is on wait for the temperature to
            # rise to it, the others for it to fall
            rising = (p[CONTROL_FLAG_OF[k - EV_FAN]] == 1.0) == (k == EV_HEATER)
            g[k] = thr - y[1 + nrc] if rising else y[1 + nrc] - thr


@_jit
def jacobian(y, jac, p, alg, f0, f1, yy):
    """Forward-difference Jacobian ``df/dy`` into ``jac`` (dense, row = equation).

    The quadrature columns are zero (nothing depends on a running integral), so
    only the ``4 + n_rc`` dynamic columns are differenced. Step
    ``sqrt(eps) * max(|y_j|, 1)`` as in Dennis & Schnabel, *Numerical Methods for
    Unconstrained Optimization and Nonlinear Equations* (1983), §5.4.
    """
    n = y.shape[0]
    ndyn = 4 + int(p[H_NRC])
    evaluate(y, p, f0, alg)
    for i in range(n):
        yy[i] = y[i]
    for j in range(n):
        for i in range(n):
            jac[i, j] = 0.0
    for j in range(ndyn):
        h = 1.4901161193847656e-08 * max(abs(y[j]), 1.0)
        yy[j] = y[j] + h
        evaluate(yy, p, f1, alg)
        yy[j] = y[j]
        for i in range(n):
            jac[i, j] = (f1[i] - f0[i]) / h


@_jit
def diagonal_newton_contraction(y, p, alg, f0, f1, yy, jac, gamma):
    """Bound on the contraction factor of Newton's iteration when only the Jacobian's diagonal is used.

    An implicit step solves ``(I - gamma J) dy = r``; iterating with the diagonal
    ``D`` of ``J`` alone converges with the rate of ``E = (I - gamma D)^-1 gamma O``
    (``O`` the off-diagonal part), the Jacobi splitting of ``I - gamma J``. Its
    spectral radius is at most its row-sum norm, as for any induced norm (Horn &
    Johnson, *Matrix Analysis*, 1985, Thm. 5.6.9; theorem number from memory).
    The diagonal Newton matrix is CVODE's CVDIAG module (Hindmarsh et al., ACM
    TOMS 31 (2005) 363). Taken over the dynamic states; the quadratures only
    receive and do not change the rate.
    """
    jacobian(y, jac, p, alg, f0, f1, yy)
    ndyn = 4 + int(p[H_NRC])
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
# Base vector: [t_0, (v_0, v_inf, tau) per pair].


def rc_base_size(n_rc: int) -> int:
    """Length of the RC base vector for ``n_rc`` pairs."""
    return 1 + 3 * n_rc


@_jit
def rc_base_setup(y, p, alg, scratch, t0, base):
    """Fill ``base`` with the zero-order-hold response of each RC pair from state ``y`` at ``t0``."""
    evaluate(y, p, scratch, alg)
    nrc = int(p[H_NRC])
    icell = alg[A_CURRENT] / p[H_NP]
    z = y[0]
    tc = y[1 + nrc]
    base[0] = t0
    off = int(p[H_RC])
    for k in range(nrc):
        r, cap = _rc_pair(p, off, z, tc)
        tau = r * cap
        ok = tau > 0.0 and np.isfinite(tau) and np.isfinite(icell)
        base[1 + 3 * k] = y[1 + k]
        base[2 + 3 * k] = r * icell if ok else y[1 + k]
        base[3 + 3 * k] = tau if ok else 0.0
        off += 2 + _law_length(p, off + 2)


@_jit
def rc_base_add(w, y, base, t, sign):
    """``y = w + sign * b(t)`` on the RC slots, ``y = w`` elsewhere; returns nothing."""
    for i in range(w.shape[0]):
        y[i] = w[i]
    s = t - base[0]
    for k in range((base.shape[0] - 1) // 3):
        v0, v_inf, tau = base[1 + 3 * k], base[2 + 3 * k], base[3 + 3 * k]
        b = v0 if tau == 0.0 else v_inf + (v0 - v_inf) * np.exp(-s / tau)
        y[1 + k] = w[1 + k] + sign * b


@_jit
def shift_phase_start(y0, p, alg, scratch, t0, base, w0, f0, f1, yy, jac, gamma):
    """Start a CVODE phase at ``(t0, y0)``.

    Sets the RC base there (:func:`rc_base_setup`), writes ``w0 = y0 - b(t0)`` and
    returns :func:`diagonal_newton_contraction` for steps up to ``gamma`` (0 when
    ``gamma`` is 0: not wanted).
    """
    p[H_TIME] = t0
    rc_base_setup(y0, p, alg, scratch, t0, base)
    rc_base_add(y0, w0, base, t0, -1.0)
    if gamma == 0.0:
        return 0.0
    return diagonal_newton_contraction(y0, p, alg, f0, f1, yy, jac, gamma)


@_jit
def shifted_rhs(t, w, wdot, p, alg, base, y):
    """Right-hand side in the shifted variables: ``dw/dt = f(w + b(t)) - b'(t)``; sets the time in ``p``."""
    p[H_TIME] = t
    rc_base_add(w, y, base, t, 1.0)
    evaluate(y, p, wdot, alg)
    s = t - base[0]
    for k in range((base.shape[0] - 1) // 3):
        v0, v_inf, tau = base[1 + 3 * k], base[2 + 3 * k], base[3 + 3 * k]
        if tau != 0.0:
            wdot[1 + k] -= (v_inf - v0) / tau * np.exp(-s / tau)


@_jit
def shifted_roots(t, w, g, p, alg, scratch, base, y):
    """Event functions at ``w + b(t)``."""
    rc_base_add(w, y, base, t, 1.0)
    roots(y, g, p, alg, scratch)


@_jit
def shifted_jacobian(t, w, jac, p, alg, f0, f1, yy, base, y):
    """Jacobian of the shifted system: ``b`` does not depend on ``w``, so it is ``df/dy`` at ``w + b(t)``."""
    rc_base_add(w, y, base, t, 1.0)
    jacobian(y, jac, p, alg, f0, f1, yy)


@_jit
def start_check(y, p, alg, scratch, g, g_ahead, probe, slack):
    """Events already true at a phase start, and the reach of the others.

    Root finding cannot see a root function that is already non-positive when a
    phase starts (a jump of the demand can put the voltage below its minimum at
    once), so this is checked here. A function at zero that is not heading down
    (a full cell at rest) is switched off for the phase. With an imposed terminal
    voltage the cell voltage limits are checked here, with a relative ``slack``.

    Returns the index of the event that fired (by ``EVENT_PRIORITY`` order of the
    caller: the lowest-index stop first), or -1; ``g`` and ``g_ahead`` hold the
    root functions at the start and ``probe`` seconds along the initial slope.
    """
    n = y.shape[0]
    roots(y, g, p, alg, scratch)
    yy = np.empty(n)
    evaluate(y, p, scratch, alg)
    for i in range(n):
        yy[i] = y[i] + probe * scratch[i]
    roots(yy, g_ahead, p, alg, scratch)
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
        evaluate(y, p, scratch, alg)
        if alg[A_CELL_VOLTAGE] > p[H_THRESHOLD + EV_VOLTAGE_MAX] * (1.0 + slack):
            return EV_VOLTAGE_MAX
        if alg[A_CELL_VOLTAGE] < p[H_THRESHOLD + EV_VOLTAGE_MIN] * (1.0 - slack):
            return EV_VOLTAGE_MIN
    return -1


@_jit
def beyond_reach(g, g_ahead, p, probe, duration, factor):
    """True when every active root function stays clear of zero over the phase.

    "Clear" means ``g(t0) > factor * |g'(t0)| * duration``: beyond ``factor``
    times the first-order reach, with ``g'`` from the probe.
    """
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] == 0.0:
            continue
        slope = abs(g_ahead[k] - g[k]) / probe
        if g[k] <= factor * slope * duration:
            return False
    return True


@_jit
def phase_start(y, p, alg, scratch, g, g_ahead, probe, slack, duration, factor):
    """:func:`start_check`, then :func:`beyond_reach` over ``duration``, in one call.

    Returns the event that fired (>= 0), -1 when the phase needs root finding, or
    -2 when every root function stays beyond reach.
    """
    fired = start_check(y, p, alg, scratch, g, g_ahead, probe, slack)
    if fired >= 0:
        return fired
    return -2 if beyond_reach(g, g_ahead, p, probe, duration, factor) else -1


@_jit
def fired_event(g, p):
    """The event that fired at a located root, given the root-function values ``g``.

    Among the active functions within :data:`ROOT_TOLERANCE` of their scale of
    zero (or below) the first by :data:`EVENT_PRIORITY` wins; should none be that
    close, the nearest to zero does.
    """
    for k in EVENT_PRIORITY:
        if p[H_ACTIVE + k] != 0.0 and g[k] <= ROOT_TOLERANCE * EVENT_SCALES[k]:
            return k
    best, event = np.inf, 0
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] != 0.0 and g[k] / EVENT_SCALES[k] < best:
            best, event = g[k] / EVENT_SCALES[k], k
    return event


@_jit
def all_positive(y, p, alg, scratch, g):
    """True when every active root function is positive at ``y``."""
    roots(y, g, p, alg, scratch)
    for k in range(N_EVENTS):
        if p[H_ACTIVE + k] != 0.0 and g[k] <= 0.0:
            return False
    return True


@_jit
def evaluate_rows(states, params, algebraics):
    """Algebraic outputs for many rows, each with its own parameter vector."""
    n = states.shape[1]
    scratch = np.empty(n)
    alg = np.empty(N_ALGEBRAICS)
    for r in range(states.shape[0]):
        evaluate(states[r], params[r], scratch, alg)
        for k in range(N_ALGEBRAICS):
            algebraics[r, k] = alg[k]


class Kernels:
    """Python-callable closures over one parameter vector, in the signatures solvers want.

    The vector ``p`` is shared and mutated between phases (mode, demand, ambient,
    active events), so the closures never need rebuilding.
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
        self.base = np.zeros(rc_base_size(int(p[H_NRC])))
        self.error: BaseException | None = None
        self.g = np.empty(N_EVENTS)
        self.g_ahead = np.empty(N_EVENTS)
        self._g_end = np.empty(N_EVENTS)
        self.cvode_rhs = self._cvode_rhs()

    # scikits.odes signatures: write into the given buffers, return 0 or a negative flag.
    # CVODE sees the shifted variables w = y - b(t) of :func:`rc_base_setup`; see
    # :meth:`shift_from` and :meth:`unshift`.
    def shift_from(self, t0: float, y0: np.ndarray, gamma: float = 0.0) -> tuple[np.ndarray, float]:
        """Start a phase at ``(t0, y0)``: see :func:`shift_phase_start`; returns ``w0`` and the contraction."""
        w0 = np.empty(self.size)
        contraction = shift_phase_start(y0, self.p, self._alg, self._scratch, t0, self.base, w0, self._f0,
                                        self._f1, self._yy, self._jac, gamma)
        return w0, contraction

    def unshift(self, t: float, w: np.ndarray) -> np.ndarray:
        """The state ``y = w + b(t)`` (a new array; ``w`` a float64 vector)."""
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
        self.p[H_TIME] = t
        try:
            shifted_roots(t, y, g, self.p, self._alg, self._scratch, self.base, self._shifted)
        except BaseException as exc:
            self.error = exc
            return -1
        return 0

    def cvode_jacobian(self, t: float, y: np.ndarray, fy: np.ndarray, jac: np.ndarray) -> int:
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
        self.p[H_TIME] = t
        ydot = np.empty(self.size)
        rhs(y, ydot, self.p, self._alg)
        return ydot

    def event_values(self, y: np.ndarray) -> np.ndarray:
        """All root functions at ``y`` (inactive ones read 1)."""
        g = np.empty(N_EVENTS)
        roots(np.ascontiguousarray(y, dtype=float), g, self.p, self._alg, self._scratch)
        return g

    def scipy_jacobian(self, t: float, y: np.ndarray) -> np.ndarray:
        self.p[H_TIME] = t
        jac = np.empty((self.size, self.size))
        jacobian(np.ascontiguousarray(y, dtype=float), jac, self.p, self._alg, self._f0, self._f1, self._yy)
        return jac

    def phase_start(self, y: np.ndarray, probe: float, slack: float, duration: float, factor: float) -> int:
        """See :func:`phase_start`; fills ``self.g`` and ``self.g_ahead``."""
        return phase_start(y, self.p, self._alg, self._scratch, self.g, self.g_ahead, probe, slack, duration, factor)

    def diagonal_newton_contraction(self, y: np.ndarray, gamma: float) -> float:
        """See :func:`diagonal_newton_contraction`."""
        return diagonal_newton_contraction(y, self.p, self._alg, self._f0, self._f1, self._yy, self._jac, gamma)

    def all_positive(self, y: np.ndarray) -> bool:
        """See :func:`all_positive`."""
        return all_positive(y, self.p, self._alg, self._scratch, self._g_end)


def mode_code(mode: str) -> int:
    """Kernel code of a demand mode name."""
    return MODE_CODES[mode]


__all__ = [
    "ALGEBRAIC_NAMES",
    "EVENT_NAMES",
    "Kernels",
    "Limits",
    "Problem",
    "StressSettings",
    "cell_temperature_index",
    "evaluate",
    "evaluate_rows",
    "n_states",
    "pack_parameters",
]
