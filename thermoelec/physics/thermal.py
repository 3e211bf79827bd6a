"""Thermal network: a lumped cell node, a heat-sink node and ambient.

Energy balances of two lumped capacitances (Incropera, DeWitt, Bergman, Lavine,
*Fundamentals of Heat and Mass Transfer*, 6th ed., ch. 5, the lumped capacitance
method), all for the pack as a whole::

    C_c dTc/dt = Q_cells - G_cs (Tc - Ts) - G_ca (Tc - Ta)
    C_s dTs/dt = G_cs (Tc - Ts) - G_sa (Ts - Ta) + Q_sink

The lumped cell node assumes a Biot number ``h L_c / k < 0.1`` (Incropera §5.1).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba.extending import register_jitable
from scipy.constants import Stefan_Boltzmann as STEFAN_BOLTZMANN  # [W/(m² K⁴)], CODATA

from thermoelec.physics.tables import interpolate_1d as _interp

__all__ = [
    "LUMPED_BIOT_LIMIT",
    "Convection",
    "Coolant",
    "Fan",
    "Heater",
    "Radiation",
    "Switch",
    "ThermalNetwork",
    "air_properties",
    "biot_number",
    "cell_node_rate",
    "coefficient_from_numbers",
    "convection_coefficient",
    "convection_conductance",
    "convection_numbers",
    "coolant_effectiveness",
    "mixed_convection_nusselt",
    "nusselt_cylinder_crossflow",
    "nusselt_flat_plate_forced",
    "nusselt_horizontal_cylinder_natural",
    "nusselt_horizontal_plate_natural",
    "nusselt_vertical_plate_natural",
    "radiation_heat",
    "sink_node_rate",
]

#: Biot number below which a body may be treated as one lumped node (Incropera et al., 6th ed., Eq. 5.10).
LUMPED_BIOT_LIMIT = 0.1


@register_jitable
def convection_conductance(coefficient: float, area: float) -> float:
    """Convective conductance ``G = h A`` (Newton's law of cooling).

    Parameters
    ----------
    coefficient : float
        Convection coefficient ``h`` [W/(m² K)], >= 0.
    area : float
        Wetted area [m²], >= 0.

    Returns
    -------
    float
        Conductance [W/K].

    References
    ----------
    Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., Eq. 1.3a.
    """
    return coefficient * area


@register_jitable
def cell_node_rate(
    heat_cells: float,
    cell_temperature: float,
    sink_temperature: float,
    ambient_temperature: float,
    heat_capacity: float,
    cell_to_sink: float,
    cell_to_ambient: float,
) -> float:
    """Rate of change of the lumped cell temperature [K/s].

    Parameters
    ----------
    heat_cells : float
        Heat generated in all cells [W].
    cell_temperature, sink_temperature, ambient_temperature : float
        Node temperatures [K].
    heat_capacity : float
        Heat capacity of all cells ``Ns Np m c_p`` [J/K], > 0.
    cell_to_sink, cell_to_ambient : float
        Conductances [W/K], >= 0.

    Returns
    -------
    float
        ``dTc/dt`` [K/s].

    References
    ----------
    Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., §5.3.
    """
    flow = (heat_cells - cell_to_sink * (cell_temperature - sink_temperature)
            - cell_to_ambient * (cell_temperature - ambient_temperature))
    return flow / heat_capacity


@register_jitable
def sink_node_rate(
    heat_sink: float,
    cell_temperature: float,
    sink_temperature: float,
    ambient_temperature: float,
    heat_capacity: float,
    cell_to_sink: float,
    sink_to_ambient: float,
) -> float:
    """Rate of change of the heat-sink temperature [K/s].

    Parameters
    ----------
    heat_sink : float
        Heat released in the sink node itself (interconnect losses) [W].
    cell_temperature, sink_temperature, ambient_temperature : float
        Node temperatures [K].
    heat_capacity : float
        Sink heat capacity [J/K], > 0.
    cell_to_sink, sink_to_ambient : float
        Conductances [W/K], >= 0.

    Returns
    -------
    float
        ``dTs/dt`` [K/s].

    References
    ----------
    Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., §5.3.
    """
    flow = (heat_sink + cell_to_sink * (cell_temperature - sink_temperature)
            - sink_to_ambient * (sink_temperature - ambient_temperature))
    return flow / heat_capacity


def biot_number(coefficient: float, volume: float, area: float, conductivity: float) -> float:
    """Biot number ``Bi = h L_c / k`` with the characteristic length ``L_c = V / A``.

    Parameters
    ----------
    coefficient : float
        Heat transfer coefficient at the body surface ``h`` [W/(m² K)].
    volume : float
        Body volume [m³].
    area : float
        Surface through which heat leaves [m²].
    conductivity : float
        Thermal conductivity of the body [W/(m K)].

    Returns
    -------
    float
        ``Bi`` [-]; the lumped capacitance method holds for ``Bi < 0.1``.

    References
    ----------
    Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., Eqs. 5.10 and 5.11.
    """
    return coefficient * (volume / area) / conductivity


#: Correlation codes of the kernels (0 = none).
FORCED_CORRELATIONS = {"cylinder_crossflow": 1, "flat_plate": 2}
NATURAL_CORRELATIONS = {"horizontal_cylinder": 1, "vertical_plate": 2, "horizontal_plate_up": 3,
                        "horizontal_plate_down": 4}


@dataclass(frozen=True)
class Convection:
    """Sink-to-air convection from geometry and flow, evaluated during the run.

    ``forced`` (a key of :data:`FORCED_CORRELATIONS`) at ``air_speed`` [m/s] and /
    or ``natural`` (a key of :data:`NATURAL_CORRELATIONS`) at the current
    sink-to-air temperature difference; both together combine as mixed
    convection. ``length`` [m] is the diameter of a cylinder, the flow length
    of a plate in forced flow, the height of a vertical plate, or area over
    perimeter of a horizontal plate; ``area`` [m²] is the wetted area.
    """

    area: float
    length: float
    forced: str | None = None
    natural: str | None = None
    air_speed: float = 0.0


@dataclass(frozen=True)
class Radiation:
    """Grey-body radiation from the sink surface: emissivity [-], area [m²], surroundings [K] (None: ambient)."""

    emissivity: float
    area: float
    surroundings_temperature: float | None = None


@dataclass(frozen=True)
class Coolant:
    """A cold plate on the sink node with a coolant loop.

    Either a flow (``capacity_rate = ṁ c_p`` [W/K] and the plate conductance
    ``plate_conductance`` UA [W/K]) or a given ``conductance`` [W/K] from sink
    to the coolant inlet. With ``heat_capacity`` [J/K] > 0 the coolant in the
    plate is its own well-mixed node (needs a flow).
    """

    inlet_temperature: float
    capacity_rate: float = 0.0
    plate_conductance: float = 0.0
    conductance: float = 0.0
    heat_capacity: float = 0.0


@dataclass(frozen=True)
class Switch:
    """A thermostat with hysteresis on the cell temperature [K]: on at ``on_at``, off at ``off_at``.

    A cooling switch (fan, pump) has ``off_at < on_at`` and switches on rising;
    a heating switch (heater) has ``on_at < off_at`` and switches on falling.
    """

    on_at: float
    off_at: float

    @property
    def heating(self) -> bool:
        """True for a switch that turns on when the temperature falls."""
        return self.on_at < self.off_at

    def initially_on(self, temperature: float) -> bool:
        """On at the start when the temperature is already past the on threshold."""
        return temperature <= self.on_at if self.heating else temperature >= self.on_at


@dataclass(frozen=True)
class Fan:
    """A thermostatic fan: when on, the air speed becomes ``air_speed`` [m/s] (with a
    convection correlation) and / or ``conductance`` [W/K] is added from sink to air."""

    switch: Switch
    air_speed: float | None = None
    conductance: float = 0.0


@dataclass(frozen=True)
class Heater:
    """A heater of ``power`` [W] on the cells, thermostatic, fed from the pack or from outside."""

    switch: Switch
    power: float
    from_pack: bool = False


@dataclass(frozen=True)
class ThermalNetwork:
    """Capacities [J/K] and conductances [W/K] of the pack's thermal network, and its cooling options.

    ``sink_to_ambient`` is a fixed conductance; with ``convection`` the
    conductance comes from a correlation instead (then ``sink_to_ambient`` is 0).
    ``pump`` switches the coolant flow (always on without a pump).
    """

    sink_heat_capacity: float
    cell_to_sink: float
    sink_to_ambient: float
    cell_to_ambient: float = 0.0
    convection: Convection | None = None
    radiation: Radiation | None = None
    coolant: Coolant | None = None
    fan: Fan | None = None
    heater: Heater | None = None
    pump: Switch | None = None


# ---------------------------------------------------------------------------
# Air properties and convection correlations (Nusselt numbers)
# ---------------------------------------------------------------------------

#: Air at 1 atm (Incropera et al., 6th ed., Table A.4, from memory):
#: temperature [K], kinematic viscosity [m²/s], thermal conductivity [W/(m K)], Prandtl number [-].
AIR_TEMPERATURE = np.array([200.0, 250.0, 300.0, 350.0, 400.0, 450.0, 500.0])
AIR_KINEMATIC_VISCOSITY = np.array([7.590e-6, 11.44e-6, 15.89e-6, 20.92e-6, 26.41e-6, 32.39e-6, 38.79e-6])
AIR_CONDUCTIVITY = np.array([18.1e-3, 22.3e-3, 26.3e-3, 30.0e-3, 33.8e-3, 37.3e-3, 40.7e-3])
AIR_PRANDTL = np.array([0.737, 0.720, 0.707, 0.700, 0.690, 0.686, 0.684])
#: Standard gravity [m/s²].
GRAVITY = 9.80665


@register_jitable
def nusselt_cylinder_crossflow(reynolds: float, prandtl: float) -> float:
    """Average Nusselt number of a cylinder in cross-flow (Churchill-Bernstein).

    ``Nu = 0.3 + 0.62 Re^1/2 Pr^1/3 / [1 + (0.4/Pr)^2/3]^1/4 [1 + (Re/282000)^5/8]^4/5``,
    valid for ``Re Pr >= 0.2``; properties at the film temperature.

    References
    ----------
    S. W. Churchill, M. Bernstein, J. Heat Transfer 99 (1977) 300-306;
    Incropera et al., 6th ed., Eq. 7.54.
    """
    return 0.3 + 0.62 * reynolds**0.5 * prandtl ** (1.0 / 3.0) / (1.0 + (0.4 / prandtl) ** (2.0 / 3.0)) ** 0.25 \
        * (1.0 + (reynolds / 282000.0) ** 0.625) ** 0.8


@register_jitable
def nusselt_flat_plate_forced(reynolds: float, prandtl: float) -> float:
    """Average Nusselt number of a flat plate in parallel flow, over its length.

    Laminar ``Nu = 0.664 Re^1/2 Pr^1/3`` below the transition at ``Re = 5e5``
    (Incropera et al., 6th ed., Eq. 7.30, ``Pr >= 0.6``); mixed laminar-turbulent
    ``Nu = (0.037 Re^4/5 - 871) Pr^1/3`` above it (Eq. 7.38, ``Re <= 1e8``,
    ``0.6 <= Pr <= 60``).
    """
    if reynolds <= 5e5:
        return 0.664 * reynolds**0.5 * prandtl ** (1.0 / 3.0)
    return (0.037 * reynolds**0.8 - 871.0) * prandtl ** (1.0 / 3.0)


@register_jitable
def nusselt_horizontal_cylinder_natural(rayleigh: float, prandtl: float) -> float:
    """Average Nusselt number of a long horizontal cylinder in free convection (Churchill-Chu).

    ``Nu = {0.60 + 0.387 Ra^1/6 / [1 + (0.559/Pr)^9/16]^8/27}^2``, valid for ``Ra <= 1e12``.

    References
    ----------
    S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18 (1975) 1049-1053;
    Incropera et al., 6th ed., Eq. 9.34.
    """
    term = 0.60 + 0.387 * rayleigh ** (1.0 / 6.0) / (1.0 + (0.559 / prandtl) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return term * term


@register_jitable
def nusselt_vertical_plate_natural(rayleigh: float, prandtl: float) -> float:
    """Average Nusselt number of a vertical plate in free convection (Churchill-Chu), all ``Ra``.

    ``Nu = {0.825 + 0.387 Ra^1/6 / [1 + (0.492/Pr)^9/16]^8/27}^2``.

    References
    ----------
    S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18 (1975) 1323-1329;
    Incropera et al., 6th ed., Eq. 9.26.
    """
    term = 0.825 + 0.387 * rayleigh ** (1.0 / 6.0) / (1.0 + (0.492 / prandtl) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return term * term


@register_jitable
def nusselt_horizontal_plate_natural(rayleigh: float, buoyant_side: bool) -> float:
    """Average Nusselt number of a horizontal plate in free convection (McAdams form).

    ``buoyant_side`` is true for the upper surface of a hot plate (or the lower
    surface of a cold one): ``Nu = 0.54 Ra^1/4`` for ``1e4 <= Ra <= 1e7``,
    ``0.15 Ra^1/3`` for ``1e7 <= Ra <= 1e11``; otherwise ``Nu = 0.27 Ra^1/4`` for
    ``1e5 <= Ra <= 1e10``. The length is the plate area over its perimeter.

    References
    ----------
    W. H. McAdams, *Heat Transmission*, 3rd ed. (1954); Incropera et al., 6th ed.,
    Eqs. 9.30-9.32.
    """
    if buoyant_side:
        if rayleigh <= 1e7:
            return 0.54 * rayleigh**0.25
        return 0.15 * rayleigh ** (1.0 / 3.0)
    return 0.27 * rayleigh**0.25


@register_jitable
def mixed_convection_nusselt(forced: float, natural: float) -> float:
    """Forced and natural convection combined, ``Nu^3 = Nu_F^3 + Nu_N^3`` (assisting flows).

    References
    ----------
    S. W. Churchill, AIChE J. 23 (1977) 10; Incropera et al., 6th ed., Eq. 9.64 with n = 3.
    """
    return (forced**3 + natural**3) ** (1.0 / 3.0)


@register_jitable
def air_properties(temperature: float) -> tuple[float, float, float]:
    """Kinematic viscosity [m²/s], conductivity [W/(m K)] and Prandtl number of air at 1 atm.

    Linear interpolation in the table of Incropera et al., 6th ed., Table A.4
    (:data:`AIR_TEMPERATURE`), held at its ends (200 and 500 K).
    """
    return (_interp(AIR_TEMPERATURE, AIR_KINEMATIC_VISCOSITY, temperature),
            _interp(AIR_TEMPERATURE, AIR_CONDUCTIVITY, temperature),
            _interp(AIR_TEMPERATURE, AIR_PRANDTL, temperature))


@register_jitable
def convection_numbers(length: float, air_speed: float, surface_temperature: float,
                       air_temperature: float) -> tuple[float, float, float, float]:
    """Reynolds and Rayleigh numbers, air conductivity and Prandtl number at the film temperature.

    ``Re = U L / ν``; ``Ra = g β |Ts - T∞| L³ / (ν α)`` with ``β = 1 / T_film``
    (ideal gas) and ``α = ν / Pr`` (Incropera et al., 6th ed., Eqs. 6.41 and 9.25).
    """
    film = 0.5 * (surface_temperature + air_temperature)
    nu, k, pr = air_properties(film)
    reynolds = air_speed * length / nu
    rayleigh = GRAVITY / film * abs(surface_temperature - air_temperature) * length**3 * pr / (nu * nu)
    return reynolds, rayleigh, k, pr


@register_jitable
def convection_coefficient(forced: int, natural: int, length: float, air_speed: float,
                           surface_temperature: float, air_temperature: float) -> float:
    """Heat transfer coefficient ``h = Nu k / L`` [W/(m² K)] from the chosen correlations.

    ``forced``: 0 none, 1 cylinder in cross-flow (Churchill-Bernstein), 2 flat
    plate; ``natural``: 0 none, 1 horizontal cylinder, 2 vertical plate (both
    Churchill-Chu), 3 / 4 horizontal plate facing up / down (McAdams). Forced
    convection without air speed contributes nothing; both together combine as
    ``Nu³ = Nu_F³ + Nu_N³`` (:func:`mixed_convection_nusselt`).
    """
    reynolds, rayleigh, k, pr = convection_numbers(length, air_speed, surface_temperature, air_temperature)
    return coefficient_from_numbers(forced, natural, length, air_speed > 0.0,
                                    surface_temperature >= air_temperature, reynolds, rayleigh, k, pr)


@register_jitable
def coefficient_from_numbers(forced: int, natural: int, length: float, flowing: bool, surface_hot: bool,
                             reynolds: float, rayleigh: float, conductivity: float, prandtl: float) -> float:
    """``h = Nu k / L`` [W/(m² K)] from already computed Re, Ra, air conductivity [W/(m K)] and Pr.

    The same correlations as :func:`convection_coefficient` (which computes the
    numbers first); kept apart so a caller that also reports Re and Ra computes
    them once. ``surface_hot``: the surface is at or above the air temperature.
    """
    nu_forced = 0.0
    if forced != 0 and flowing:
        if forced == 1:
            nu_forced = nusselt_cylinder_crossflow(reynolds, prandtl)
        else:
            nu_forced = nusselt_flat_plate_forced(reynolds, prandtl)
    nu_natural = 0.0
    if natural == 1:
        nu_natural = nusselt_horizontal_cylinder_natural(rayleigh, prandtl)
    elif natural == 2:
        nu_natural = nusselt_vertical_plate_natural(rayleigh, prandtl)
    elif natural == 3:
        nu_natural = nusselt_horizontal_plate_natural(rayleigh, surface_hot)
    elif natural == 4:
        nu_natural = nusselt_horizontal_plate_natural(rayleigh, not surface_hot)
    if nu_forced > 0.0 and nu_natural > 0.0:
        return mixed_convection_nusselt(nu_forced, nu_natural) * conductivity / length
    return (nu_forced + nu_natural) * conductivity / length


@register_jitable
def radiation_heat(emissivity: float, area: float, surface_temperature: float,
                   surroundings_temperature: float) -> float:
    """Net radiation from a small grey surface to large surroundings [W].

    ``q = ε σ A (Ts⁴ - Tsur⁴)``, exact in the temperatures [K].

    References
    ----------
    Incropera et al., 6th ed., Eq. 1.7 (Stefan-Boltzmann law).
    """
    return emissivity * STEFAN_BOLTZMANN * area * (surface_temperature**4 - surroundings_temperature**4)


@register_jitable
def coolant_effectiveness(conductance: float, capacity_rate: float) -> float:
    """Effectiveness of a coolant channel along a surface at uniform temperature.

    ``ε = 1 - exp(-UA / (ṁ c_p))``, so the coolant carries ``ε ṁ c_p (T_s - T_in)``
    and leaves at ``T_out = T_in + ε (T_s - T_in)``.

    References
    ----------
    Incropera et al., 6th ed., Eq. 8.42b (constant surface temperature; an
    exchanger with ``C_r = 0``, Eq. 11.35a).
    """
    if capacity_rate <= 0.0:
        return 0.0
    return 1.0 - np.exp(-conductance / capacity_rate)
