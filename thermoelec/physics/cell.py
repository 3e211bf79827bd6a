"""Cell physics: open-circuit voltage, resistance laws, load-mode current, heat.

Every function here is a small pure function on scalars in SI units (V, A, Ω, W,
K, s). They are written so that :mod:`thermoelec.engine.model` can compile them with
numba unchanged; called from Python they work on plain floats.

Sign convention: a current ``I > 0`` discharges the cell; a power ``P > 0``
flows to the load.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numba.extending import register_jitable
from scipy.constants import R as GAS_CONSTANT  # [J/(mol K)], CODATA

__all__ = [
    "GAS_CONSTANT",
    "Cell",
    "CellGeometry",
    "Pack",
    "RCPair",
    "ResistanceLaw",
    "arrhenius_ageing_rate",
    "arrhenius_factor",
    "bernardi_heat",
    "bracket",
    "current_for_power",
    "current_for_resistance",
    "current_for_voltage",
    "interpolate_1d",
    "interpolate_2d",
    "maximum_power",
    "open_circuit_voltage",
    "power_deliverable_margin",
    "rc_zero_order_hold",
    "terminal_voltage_with_auxiliary_load",
    "voltage_limited_power",
]


@register_jitable
def bracket(grid: np.ndarray, x: float) -> tuple[int, float]:
    """Index and weight of ``x`` in a sorted ``grid``, clamped at the ends.

    Parameters
    ----------
    grid : array of float
        Strictly increasing break points (any unit); one point means a constant.
    x : float
        Query point, same unit as ``grid``.

    Returns
    -------
    index : int
        ``i`` with ``grid[i] <= x <= grid[i + 1]`` (0 for a one-point grid).
    weight : float
        Linear weight of ``grid[i + 1]`` in 0..1; beyond the end points the
        value is held (weight 0 or 1), as the scenario format specifies.
    """
    n = grid.shape[0]
    if n == 1 or x <= grid[0]:
        return 0, 0.0
    if x >= grid[n - 1]:
        return n - 2, 1.0
    if n <= 32:  # a scan beats bisection on the short tables of cell data (and inside compiled kernels)
        i = 0
        while grid[i + 1] <= x:
            i += 1
    else:
        i = np.searchsorted(grid, x, side="right") - 1
    return i, (x - grid[i]) / (grid[i + 1] - grid[i])


@register_jitable
def interpolate_1d(grid: np.ndarray, values: np.ndarray, x: float) -> float:
    """Piecewise-linear interpolation held constant beyond the end points.

    Parameters
    ----------
    grid : array of float
        Strictly increasing break points [any unit].
    values : array of float
        Values at the break points [any unit].
    x : float
        Query point [unit of ``grid``].

    Returns
    -------
    float
        Interpolated value [unit of ``values``].
    """
    i, w = bracket(grid, x)
    if grid.shape[0] == 1:
        return values[0]
    return values[i] * (1.0 - w) + values[i + 1] * w


@register_jitable
def interpolate_2d(
    soc_grid: np.ndarray,
    temperature_grid: np.ndarray,
    values: np.ndarray,
    soc: float,
    temperature: float,
) -> float:
    """Bilinear interpolation over SoC and temperature, clamped at the edges.

    Parameters
    ----------
    soc_grid : array of float, shape (nz,)
        Strictly increasing SoC break points [-].
    temperature_grid : array of float, shape (nt,)
        Strictly increasing temperatures [K]; one point for a table over SoC only.
    values : array of float, shape (nt * nz,)
        Row-major table, one row of ``nz`` values per temperature [any unit].
    soc : float
        State of charge [-].
    temperature : float
        Temperature [K].

    Returns
    -------
    float
        Interpolated value [unit of ``values``].
    """
    nz = soc_grid.shape[0]
    i, wz = bracket(soc_grid, soc)
    j, wt = bracket(temperature_grid, temperature)
    i1 = i + 1 if nz > 1 else i
    j1 = j + 1 if temperature_grid.shape[0] > 1 else j
    low = values[j * nz + i] * (1.0 - wz) + values[j * nz + i1] * wz
    high = values[j1 * nz + i] * (1.0 - wz) + values[j1 * nz + i1] * wz
    return low * (1.0 - wt) + high * wt


@register_jitable
def arrhenius_factor(temperature: float, activation_energy: float, reference_temperature: float) -> float:
    """Arrhenius scaling of a rate-limited resistance.

    ``R(T) / R(T_ref) = exp(Ea / R_gas * (1 / T - 1 / T_ref))``

    Parameters
    ----------
    temperature : float
        Temperature [K], > 0.
    activation_energy : float
        Activation energy [J/mol]; 0 means no temperature dependence.
    reference_temperature : float
        Temperature at which the factor is 1 [K].

    Returns
    -------
    float
        Dimensionless factor [-]; > 1 below the reference temperature.

    References
    ----------
    S. Arrhenius, Z. Phys. Chem. 4 (1889) 226; applied to cell resistance as in
    G. L. Plett, *Battery Management Systems*, Vol. I, Artech House (2015).
    """
    return np.exp(activation_energy / GAS_CONSTANT * (1.0 / temperature - 1.0 / reference_temperature))


@register_jitable
def arrhenius_ageing_rate(temperature: float, activation_energy: float, reference_temperature: float) -> float:
    """Rate of a thermally activated (ageing) process relative to its rate at ``reference_temperature``.

    ``k(T) / k(T_ref) = exp(-Ea / R_gas * (1 / T - 1 / T_ref))``, the inverse of
    :func:`arrhenius_factor`; its time integral is the time at the reference
    temperature that ages a cell as much.

    Parameters
    ----------
    temperature : float
        Temperature [K], > 0.
    activation_energy : float
        Activation energy [J/mol].
    reference_temperature : float
        Temperature at which the rate is 1 [K].

    Returns
    -------
    float
        Relative rate [-]; > 1 above the reference temperature.

    References
    ----------
    S. Arrhenius, Z. Phys. Chem. 4 (1889) 226; as an ageing acceleration factor
    e.g. J. Wang et al., J. Power Sources 196 (2011) 3942.
    """
    return 1.0 / arrhenius_factor(temperature, activation_energy, reference_temperature)


@register_jitable
def open_circuit_voltage(
    reference_voltage: float, entropic_coefficient: float, temperature: float, reference_temperature: float
) -> float:
    """Open-circuit voltage corrected for temperature by the entropic coefficient.

    ``U(z, T) = U_ref(z) + (T - T_ref) * dU/dT(z)``

    Parameters
    ----------
    reference_voltage : float
        OCV at the reference temperature and the present SoC [V].
    entropic_coefficient : float
        ``dU/dT`` at the present SoC [V/K].
    temperature, reference_temperature : float
        Cell temperature and table reference temperature [K].

    Returns
    -------
    float
        Open-circuit voltage [V].

    References
    ----------
    D. Bernardi, E. Pawlikowski, J. Newman, J. Electrochem. Soc. 132 (1985) 5-12.
    """
    return reference_voltage + (temperature - reference_temperature) * entropic_coefficient


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
def bernardi_heat(current: float, ocv: float, terminal_voltage: float, temperature: float, entropic: float) -> float:
    """Heat generated in a cell (Bernardi energy balance, lumped).

    ``q = I (U - V) - I T dU/dT``: the irreversible (overpotential) heat plus the
    reversible (entropic) heat, which is negative (cooling) for some SoC and
    current directions.

    Parameters
    ----------
    current : float
        Cell current [A], > 0 discharging.
    ocv : float
        Open-circuit voltage [V].
    terminal_voltage : float
        Terminal voltage [V].
    temperature : float
        Cell temperature [K].
    entropic : float
        Entropic coefficient ``dU/dT`` [V/K].

    Returns
    -------
    float
        Heat generation rate [W].

    References
    ----------
    D. Bernardi, E. Pawlikowski, J. Newman, "A general energy balance for battery
    systems", J. Electrochem. Soc. 132 (1985) 5-12.
    """
    return current * (ocv - terminal_voltage) - current * temperature * entropic


@register_jitable
def rc_zero_order_hold(voltage: float, resistance: float, time_constant: float, current: float, dt: float) -> float:
    """Exact update of an RC pair over ``dt`` under a constant current.

    ``v <- v e^(-dt/tau) + R I (1 - e^(-dt/tau))``

    Parameters
    ----------
    voltage : float
        RC-pair voltage at the start of the interval [V].
    resistance : float
        Pair resistance [Ω].
    time_constant : float
        ``tau = R C`` [s], > 0.
    current : float
        Cell current held over the interval [A].
    dt : float
        Interval [s], >= 0.

    Returns
    -------
    float
        RC-pair voltage at the end of the interval [V].

    References
    ----------
    G. L. Plett, *Battery Management Systems*, Vol. I, Artech House (2015), ch. 2
    (discrete-time equivalent-circuit model).
    """
    decay = np.exp(-dt / time_constant)
    return voltage * decay + resistance * current * (1.0 - decay)


# --------------------------------------------------------------------------
# Parameter holders (SI units). Built by thermoelec.scenario, read by the model.
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class ResistanceLaw:
    """A resistance over SoC and temperature: a table times an Arrhenius factor.

    A constant is a 1 x 1 table, a table over SoC has one temperature row, a
    2-D table has one row per temperature (then ``activation_energy`` is 0).

    Attributes
    ----------
    soc : array, shape (nz,)  [-]
    temperature : array, shape (nt,)  [K]
    values : array, shape (nt, nz)  [Ω]
    activation_energy : float  [J/mol], 0 for none
    reference_temperature : float  [K]
    """

    soc: np.ndarray
    temperature: np.ndarray
    values: np.ndarray
    activation_energy: float = 0.0
    reference_temperature: float = 298.15

    @classmethod
    def constant(cls, value: float, activation_energy: float = 0.0, reference_temperature: float = 298.15):
        """A constant resistance [Ω], optionally Arrhenius in temperature."""
        return cls(np.array([0.0]), np.array([reference_temperature]), np.array([[value]]),
                   activation_energy, reference_temperature)

    def __call__(self, soc: float, temperature: float) -> float:
        """Resistance [Ω] at ``soc`` [-] and ``temperature`` [K]."""
        base = interpolate_2d(self.soc, self.temperature, self.values.ravel(), soc, temperature)
        return base * arrhenius_factor(temperature, self.activation_energy, self.reference_temperature)


@dataclass(frozen=True)
class RCPair:
    """One RC pair of the Thevenin circuit.

    Either ``capacitance`` [F] is fixed, or ``time_constant`` [s] fixes
    ``C = tau / R(z, T_ref)`` at the reference temperature of the resistance.
    """

    resistance: ResistanceLaw
    capacitance: float | None = None
    time_constant: float | None = None


@dataclass(frozen=True)
class Cell:
    """Equivalent-circuit and thermal data of one cell (SI units).

    Attributes
    ----------
    capacity : float  [C] (coulombs; 1 Ah = 3600 C)
    voltage_min, voltage_max : float  [V] per cell
    mass : float  [kg];  specific_heat : float  [J/(kg K)]
    ocv_soc, ocv_voltage, ocv_entropic : arrays  [-], [V], [V/K]
    ocv_reference_temperature : float  [K]
    r0 : ResistanceLaw;  rc : tuple of RCPair
    geometry : CellGeometry or None (only for the Biot-number check)
    """

    capacity: float
    voltage_min: float
    voltage_max: float
    mass: float
    specific_heat: float
    ocv_soc: np.ndarray
    ocv_voltage: np.ndarray
    ocv_entropic: np.ndarray
    ocv_reference_temperature: float
    r0: ResistanceLaw
    rc: tuple[RCPair, ...] = field(default_factory=tuple)
    geometry: CellGeometry | None = None

    def ocv(self, soc: float, temperature: float) -> float:
        """Open-circuit voltage [V] at ``soc`` [-] and ``temperature`` [K]."""
        return open_circuit_voltage(interpolate_1d(self.ocv_soc, self.ocv_voltage, soc),
                                    interpolate_1d(self.ocv_soc, self.ocv_entropic, soc),
                                    temperature, self.ocv_reference_temperature)


@dataclass(frozen=True)
class CellGeometry:
    """Outer shape of one cell, for the Biot-number check of the lumped cell node.

    A cylindrical cell gives ``diameter`` and ``length``; a prismatic or pouch
    cell gives ``thickness``, ``width`` and ``height`` [m]. ``thermal_conductivity``
    [W/(m K)] is the lowest one (radial, or through the thickness), which limits
    the internal temperature spread.
    """

    thermal_conductivity: float
    diameter: float | None = None
    length: float | None = None
    thickness: float | None = None
    width: float | None = None
    height: float | None = None

    @property
    def shape(self) -> str:
        """``"cylindrical"`` or ``"prismatic"``."""
        return "cylindrical" if self.diameter is not None else "prismatic"

    def volume(self) -> float:
        """Cell volume [m³]."""
        if self.diameter is not None and self.length is not None:
            return np.pi * self.diameter**2 / 4.0 * self.length
        assert self.thickness is not None and self.width is not None and self.height is not None
        return self.thickness * self.width * self.height

    def surface_area(self) -> float:
        """Outer surface, ends included [m²]."""
        if self.diameter is not None and self.length is not None:
            return np.pi * self.diameter * self.length + np.pi * self.diameter**2 / 2.0
        assert self.thickness is not None and self.width is not None and self.height is not None
        t, w, h = self.thickness, self.width, self.height
        return 2.0 * (w * h + t * w + t * h)


@dataclass(frozen=True)
class Pack:
    """``series`` x ``parallel`` identical cells and a lumped interconnect resistance [Ω]."""

    series: int = 1
    parallel: int = 1
    interconnect_resistance: float = 0.0
