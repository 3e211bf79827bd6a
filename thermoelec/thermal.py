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

from numba.extending import register_jitable

__all__ = ["LUMPED_BIOT_LIMIT", "ThermalNetwork", "biot_number", "cell_node_rate", "convection_conductance",
           "sink_node_rate"]

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


@dataclass(frozen=True)
class ThermalNetwork:
    """Capacities [J/K] and conductances [W/K] of the pack's thermal network."""

    sink_heat_capacity: float
    cell_to_sink: float
    sink_to_ambient: float
    cell_to_ambient: float = 0.0
