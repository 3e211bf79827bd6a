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

from thermoelec.jit import register_jitable
from thermoelec.physics.constants import GAS_CONSTANT, ZERO_CELSIUS
from thermoelec.physics.tables import interpolate_1d, interpolate_2d

__all__ = [
    "REFERENCE_TEMPERATURE",
    "Cell",
    "CellGeometry",
    "Pack",
    "RCPair",
    "ResistanceLaw",
    "arrhenius_ageing_rate",
    "arrhenius_factor",
    "bernardi_heat",
    "open_circuit_voltage",
    "rc_zero_order_hold",
]


#: 25 °C, the reference temperature of cell data where none is given (common practice) [K].
REFERENCE_TEMPERATURE = ZERO_CELSIUS + 25.0


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

    Examples
    --------
    30 kJ/mol at 0 °C against 25 °C, ``exp(30e3 / 8.314462618 * (1/273.15 - 1/298.15))``:

    >>> round(float(arrhenius_factor(273.15, 30e3, 298.15)), 6)
    3.027147
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

    Examples
    --------
    5 A at U = 3.7 V, V = 3.55 V, 25 °C, dU/dT = -0.1 mV/K: 0.75 W irreversible
    plus 0.149075 W reversible:

    >>> round(bernardi_heat(5.0, 3.7, 3.55, 298.15, -0.1e-3), 6)
    0.899075
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

    Examples
    --------
    A 15 mΩ, 2000 F pair (τ = 30 s) after 30 s of 5 A from rest holds ``R I (1 - 1/e)``:

    >>> round(float(rc_zero_order_hold(0.0, 0.015, 30.0, 5.0, 30.0)), 6)
    0.047409
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
    reference_temperature: float = REFERENCE_TEMPERATURE

    @classmethod
    def constant(cls, value: float, activation_energy: float = 0.0,
                 reference_temperature: float = REFERENCE_TEMPERATURE):
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
        """Open-circuit voltage of the cell, corrected for temperature by the entropic coefficient.

        Parameters
        ----------
        soc : float
            State of charge [-].
        temperature : float
            Cell temperature [K].

        Returns
        -------
        float
            Open-circuit voltage [V] (:func:`open_circuit_voltage`).
        """
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
        """Cell volume.

        Returns
        -------
        float
            Volume [m³]: ``π D² L / 4`` for a cylinder, ``t w h`` for a prism.
        """
        if self.diameter is not None and self.length is not None:
            return np.pi * self.diameter**2 / 4.0 * self.length
        assert self.thickness is not None and self.width is not None and self.height is not None
        return self.thickness * self.width * self.height

    def surface_area(self) -> float:
        """Outer surface, ends included.

        Returns
        -------
        float
            Area [m²]: ``π D L + π D² / 2`` for a cylinder, ``2 (w h + t w + t h)`` for a prism.
        """
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
