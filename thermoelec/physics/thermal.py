"""Thermal network: a lumped cell node, a heat-sink node and ambient.

Energy balances of two lumped capacitances (Incropera, DeWitt, Bergman, Lavine,
*Fundamentals of Heat and Mass Transfer*, 6th ed., ch. 5, the lumped capacitance
method), all for the pack as a whole::

    C_c dTc/dt = Q_cells - G_cs (Tc - Ts) - G_ca (Tc - Ta)
    C_s dTs/dt = G_cs (Tc - Ts) - G_sa (Ts - Ta) + Q_sink

The lumped cell node assumes a Biot number ``h L_c / k < 0.1`` (Incropera §5.1).
The sink-to-air coefficient from geometry and flow comes from
:mod:`thermoelec.physics.correlations`; this module holds the node balances,
the conductance helpers and the parameters of the network and its controls.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from thermoelec.jit import register_jitable
from thermoelec.physics.constants import STEFAN_BOLTZMANN

__all__ = [
    "LUMPED_BIOT_LIMIT",
    "Convection",
    "Coolant",
    "Fan",
    "Heater",
    "Radiation",
    "Switch",
    "ThermalNetwork",
    "biot_number",
    "cell_node_rate",
    "convection_conductance",
    "coolant_effectiveness",
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

    Examples
    --------
    A cylinder of 21 mm by 70 mm (ends included: ``V/A = 4.565 mm``) at
    ``h = 10 W/(m² K)``, ``k = 0.5 W/(m K)``:

    >>> round(biot_number(10.0, 2.424515e-5, 5.310856e-3, 0.5), 4)
    0.0913
    """
    return coefficient * (volume / area) / conductivity


@dataclass(frozen=True)
class Convection:
    """Sink-to-air convection from geometry and flow, evaluated during the run.

    ``forced`` (a forced entry of
    :data:`thermoelec.physics.correlations.CORRELATIONS`) at ``air_speed`` [m/s]
    and / or ``natural`` (a natural entry) at the current sink-to-air
    temperature difference; both together combine as mixed convection.
    ``length`` [m] is the diameter of a cylinder, the flow length of a plate in
    forced flow, the height of a vertical plate, or area over perimeter of a
    horizontal plate; ``area`` [m²] is the wetted area.
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
        """Whether the thermostat is on at the start: the temperature is already past its on threshold.

        Parameters
        ----------
        temperature : float
            Cell temperature at the start [K].

        Returns
        -------
        bool
            On: at or below ``on_at`` for a heating switch, at or above it for a cooling one.
        """
        return temperature <= self.on_at if self.heating else temperature >= self.on_at


@dataclass(frozen=True)
class Fan:
    """A thermostatic fan: when on, the air speed becomes ``air_speed`` [m/s] (with a
    convection correlation) and / or ``conductance`` [W/K] is added from sink to air;
    it draws ``power`` [W] from the pack terminals while on (an auxiliary load)."""

    switch: Switch
    air_speed: float | None = None
    conductance: float = 0.0
    power: float = 0.0


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
    ``pump`` switches the coolant flow (always on without a pump thermostat); the
    pump draws ``pump_power`` [W] from the pack terminals while the coolant flows.
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
    pump_power: float = 0.0


@register_jitable
def radiation_heat(emissivity: float, area: float, surface_temperature: float,
                   surroundings_temperature: float) -> float:
    """Net radiation from a small grey surface to large surroundings [W].

    ``q = ε σ A (Ts⁴ - Tsur⁴)``, exact in the temperatures.

    Parameters
    ----------
    emissivity : float
        Grey-body emissivity of the surface ``ε`` [-], 0..1.
    area : float
        Radiating area ``A`` [m²].
    surface_temperature : float
        Surface temperature ``Ts`` [K].
    surroundings_temperature : float
        Temperature of the large surroundings ``Tsur`` [K].

    Returns
    -------
    float
        Net heat leaving the surface by radiation [W]; negative when the surroundings are hotter.

    References
    ----------
    Incropera et al., 6th ed., Eq. 1.7 (Stefan-Boltzmann law).

    Examples
    --------
    The radiation coefficient ``h_rad = q / (A (Ts - Tsur))`` at ε = 0.9, 310 K to
    290 K (Incropera Eq. 1.9, ``ε σ (Ts + Tsur)(Ts² + Tsur²)``):

    >>> round(radiation_heat(0.9, 1.0, 310.0, 290.0) / 20.0, 4)
    5.5177
    """
    return emissivity * STEFAN_BOLTZMANN * area * (surface_temperature**4 - surroundings_temperature**4)


@register_jitable
def coolant_effectiveness(conductance: float, capacity_rate: float) -> float:
    """Effectiveness of a coolant channel along a surface at uniform temperature.

    ``ε = 1 - exp(-UA / (ṁ c_p))``, so the coolant carries ``ε ṁ c_p (T_s - T_in)``
    and leaves at ``T_out = T_in + ε (T_s - T_in)``.

    Parameters
    ----------
    conductance : float
        Conductance from the surface to the coolant along the channel ``UA`` [W/K], >= 0.
    capacity_rate : float
        Coolant heat capacity rate ``ṁ c_p`` [W/K]; no flow (<= 0) gives 0.

    Returns
    -------
    float
        Effectiveness ``ε`` [-], 0..1.

    References
    ----------
    Incropera et al., 6th ed., Eq. 8.42b (constant surface temperature; an
    exchanger with ``C_r = 0``, Eq. 11.35a).

    Examples
    --------
    ``NTU = UA / (ṁ c_p) = 1`` gives ``1 - 1/e``:

    >>> round(float(coolant_effectiveness(10.0, 10.0)), 6)
    0.632121
    """
    if capacity_rate <= 0.0:
        return 0.0
    return 1.0 - np.exp(-conductance / capacity_rate)
