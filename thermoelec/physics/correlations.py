"""Convection correlations: air properties, Nusselt numbers and the one registry of correlations.

The heat-sink-to-air coefficient ``h = Nu k / L`` comes from a published
Nusselt-number correlation, evaluated during the run at the film temperature
``(T_s + T_∞) / 2`` with the properties of air at 1 atm (:func:`air_properties`).
Each correlation is a small pure function named by quantity, case and author
(``nusselt_horizontal_cylinder_churchill_chu``); forced and free convection
together combine as mixed convection (:func:`mixed_convection_nusselt`).

:data:`CORRELATIONS` is the one list of the correlations a scenario may name:
each entry holds its kind (forced or natural), its code in the engine's
kernels, its Nusselt function, its validity range and its reference. The
scenario schema (:data:`FORCED_CORRELATION_NAMES`, :data:`NATURAL_CORRELATION_NAMES`),
the engine's parameter header (:data:`FORCED_CORRELATIONS`,
:data:`NATURAL_CORRELATIONS`) and the range warnings of the diagnostics all
derive from it. Adding a correlation means a pure function here, an entry in
:data:`CORRELATIONS` and a branch in :func:`coefficient_from_numbers` (plus its tests).

The functions used by the kernels are ``register_jitable``: plain Python on
floats, compiled into the engine's numba kernels unchanged.

References
----------
F. P. Incropera, D. P. DeWitt, T. L. Bergman, A. S. Lavine, *Fundamentals of
Heat and Mass Transfer*, 6th ed., Wiley (2007), chapters 7 and 9 and Table A.4
(below: "Incropera"; equation numbers from memory, they may be off by one
between editions).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Literal

import numpy as np

from thermoelec.jit import register_jitable
from thermoelec.physics.constants import STANDARD_GRAVITY
from thermoelec.physics.tables import interpolate_1d as _interp

__all__ = [
    "AIR_CONDUCTIVITY",
    "AIR_KINEMATIC_VISCOSITY",
    "AIR_PRANDTL",
    "AIR_TEMPERATURE",
    "CORRELATIONS",
    "FLAT_PLATE_TRANSITION_REYNOLDS",
    "FORCED_CORRELATIONS",
    "FORCED_CORRELATION_NAMES",
    "NATURAL_CORRELATIONS",
    "NATURAL_CORRELATION_NAMES",
    "Correlation",
    "ValidityRange",
    "air_properties",
    "coefficient_from_numbers",
    "convection_coefficient",
    "convection_numbers",
    "correlation",
    "mixed_convection_nusselt",
    "nusselt_cylinder_churchill_bernstein",
    "nusselt_flat_plate_laminar",
    "nusselt_flat_plate_mixed",
    "nusselt_flat_plate_parallel_flow",
    "nusselt_horizontal_cylinder_churchill_chu",
    "nusselt_horizontal_plate_mcadams",
    "nusselt_number",
    "nusselt_vertical_plate_churchill_chu",
    "valid_correlations",
]

# ---------------------------------------------------------------------------
# Air at 1 atm
# ---------------------------------------------------------------------------

#: Air at 1 atm (Incropera, Table A.4, from memory): temperature [K], kinematic
#: viscosity [m²/s], thermal conductivity [W/(m K)], Prandtl number [-].
AIR_TEMPERATURE = np.array([200.0, 250.0, 300.0, 350.0, 400.0, 450.0, 500.0])
AIR_KINEMATIC_VISCOSITY = np.array([7.590e-6, 11.44e-6, 15.89e-6, 20.92e-6, 26.41e-6, 32.39e-6, 38.79e-6])
AIR_CONDUCTIVITY = np.array([18.1e-3, 22.3e-3, 26.3e-3, 30.0e-3, 33.8e-3, 37.3e-3, 40.7e-3])
AIR_PRANDTL = np.array([0.737, 0.720, 0.707, 0.700, 0.690, 0.686, 0.684])


@register_jitable
def air_properties(temperature: float) -> tuple[float, float, float]:
    """Kinematic viscosity, thermal conductivity and Prandtl number of air at 1 atm.

    Linear interpolation in Incropera, Table A.4 (:data:`AIR_TEMPERATURE`),
    held at its ends (200 and 500 K): the diagnostics warn when a run's film
    temperature leaves the table.

    Parameters
    ----------
    temperature : float
        Air (film) temperature [K].

    Returns
    -------
    kinematic_viscosity : float
        ``ν`` [m²/s].
    conductivity : float
        ``k`` [W/(m K)].
    prandtl : float
        ``Pr`` [-].

    References
    ----------
    Incropera, Table A.4 (values from memory; within 2 % of CoolProp, see the tests).

    Examples
    --------
    At 300 K, a row of the table:

    >>> [float(value) for value in air_properties(300.0)]
    [1.589e-05, 0.0263, 0.707]
    """
    return (_interp(AIR_TEMPERATURE, AIR_KINEMATIC_VISCOSITY, temperature),
            _interp(AIR_TEMPERATURE, AIR_CONDUCTIVITY, temperature),
            _interp(AIR_TEMPERATURE, AIR_PRANDTL, temperature))


# ---------------------------------------------------------------------------
# Forced convection
# ---------------------------------------------------------------------------

#: Critical Reynolds number of the laminar-turbulent transition on a flat plate [-]
#: (the representative value of Incropera §6.3; common practice).
FLAT_PLATE_TRANSITION_REYNOLDS = 5e5


@register_jitable
def nusselt_cylinder_churchill_bernstein(reynolds: float, prandtl: float) -> float:
    r"""Average Nusselt number of a circular cylinder in cross-flow (Churchill-Bernstein).

    .. math::

        Nu_D = 0.3 + \frac{0.62 Re_D^{1/2} Pr^{1/3}}{[1 + (0.4/Pr)^{2/3}]^{1/4}}
               \left[1 + \left(\frac{Re_D}{282000}\right)^{5/8}\right]^{4/5}

    Valid for ``Re_D Pr >= 0.2``, laminar and turbulent; all properties at the
    film temperature.

    Parameters
    ----------
    reynolds : float
        Reynolds number on the diameter, ``Re_D = U D / ν`` [-].
    prandtl : float
        Prandtl number of the fluid [-].

    Returns
    -------
    float
        ``Nu_D = h D / k`` [-].

    References
    ----------
    S. W. Churchill, M. Bernstein, "A correlating equation for forced convection
    from gases and liquids to a circular cylinder in crossflow", J. Heat Transfer
    99 (1977) 300-306, doi:10.1115/1.3450685; Incropera, Eq. 7.54.

    Examples
    --------
    Incropera, Example 7.3 (as quoted in the docstring of ``ht``'s
    ``Nu_cylinder_Churchill_Bernstein``): ``Re_D = 6071``, ``Pr = 0.7``.

    >>> round(nusselt_cylinder_churchill_bernstein(6071.0, 0.7), 5)
    40.63709
    """
    return 0.3 + 0.62 * reynolds**0.5 * prandtl ** (1.0 / 3.0) / (1.0 + (0.4 / prandtl) ** (2.0 / 3.0)) ** 0.25 \
        * (1.0 + (reynolds / 282000.0) ** 0.625) ** 0.8


@register_jitable
def nusselt_flat_plate_laminar(reynolds: float, prandtl: float) -> float:
    """Average Nusselt number of an isothermal flat plate in laminar parallel flow (Pohlhausen).

    ``Nu_L = 0.664 Re_L^1/2 Pr^1/3``, the similarity solution of the laminar
    boundary layer averaged over the plate length; valid for
    ``Re_L <= 5e5`` (:data:`FLAT_PLATE_TRANSITION_REYNOLDS`) and ``Pr >= 0.6``.

    Parameters
    ----------
    reynolds : float
        Reynolds number on the plate length along the flow, ``Re_L = U L / ν`` [-].
    prandtl : float
        Prandtl number of the fluid [-].

    Returns
    -------
    float
        ``Nu_L = h L / k`` [-].

    References
    ----------
    E. Pohlhausen, Z. Angew. Math. Mech. 1 (1921) 115-121; Incropera, Eq. 7.30.

    Examples
    --------
    The check value of the docstring of ``ht``'s ``Nu_horizontal_plate_laminar_Baehr``:

    >>> round(nusselt_flat_plate_laminar(1e5, 0.7), 6)
    186.437853
    """
    return 0.664 * reynolds**0.5 * prandtl ** (1.0 / 3.0)


@register_jitable
def nusselt_flat_plate_mixed(reynolds: float, prandtl: float) -> float:
    """Average Nusselt number of an isothermal flat plate with a mixed laminar-turbulent boundary layer.

    ``Nu_L = (0.037 Re_L^4/5 - 871) Pr^1/3``: the laminar average up to the
    transition at ``Re_x,c = 5e5`` plus the turbulent local correlation
    ``Nu_x = 0.0296 Re_x^4/5 Pr^1/3`` beyond it, integrated over the length
    (``871 = 0.037 Re_x,c^4/5 - 0.664 Re_x,c^1/2``, rounded). Valid for
    ``5e5 < Re_L <= 1e8`` and ``0.6 <= Pr <= 60``.

    Parameters
    ----------
    reynolds : float
        Reynolds number on the plate length along the flow [-].
    prandtl : float
        Prandtl number of the fluid [-].

    Returns
    -------
    float
        ``Nu_L = h L / k`` [-].

    References
    ----------
    Incropera, Eq. 7.38 (with Eqs. 7.30 and 7.36), §7.2.3.

    Examples
    --------
    At ``Re_L = 1e6``, ``Pr = 0.7`` (evaluated by hand:
    ``(0.037 * 63095.73 - 871) * 0.887904``):

    >>> round(nusselt_flat_plate_mixed(1e6, 0.7), 4)
    1299.485
    """
    return (0.037 * reynolds**0.8 - 871.0) * prandtl ** (1.0 / 3.0)


@register_jitable
def nusselt_flat_plate_parallel_flow(reynolds: float, prandtl: float) -> float:
    """Average Nusselt number of an isothermal flat plate in parallel flow, laminar or mixed.

    :func:`nusselt_flat_plate_laminar` up to the transition at
    ``Re_L = 5e5`` (:data:`FLAT_PLATE_TRANSITION_REYNOLDS`),
    :func:`nusselt_flat_plate_mixed` beyond it; valid up to ``Re_L = 1e8``,
    ``0.6 <= Pr <= 60``.

    Parameters
    ----------
    reynolds : float
        Reynolds number on the plate length along the flow [-].
    prandtl : float
        Prandtl number of the fluid [-].

    Returns
    -------
    float
        ``Nu_L = h L / k`` [-].

    References
    ----------
    Incropera, Eqs. 7.30 and 7.38.

    Examples
    --------
    >>> round(nusselt_flat_plate_parallel_flow(1e5, 0.7), 6), round(nusselt_flat_plate_parallel_flow(1e6, 0.7), 4)
    (186.437853, 1299.485)
    """
    if reynolds <= FLAT_PLATE_TRANSITION_REYNOLDS:
        return nusselt_flat_plate_laminar(reynolds, prandtl)
    return nusselt_flat_plate_mixed(reynolds, prandtl)


# ---------------------------------------------------------------------------
# Free (natural) convection
# ---------------------------------------------------------------------------

@register_jitable
def nusselt_horizontal_cylinder_churchill_chu(rayleigh: float, prandtl: float) -> float:
    r"""Average Nusselt number of a long isothermal horizontal cylinder in free convection (Churchill-Chu).

    .. math::

        Nu_D = \left\{0.60 + \frac{0.387 Ra_D^{1/6}}{[1 + (0.559/Pr)^{9/16}]^{8/27}}\right\}^2

    Valid for ``Ra_D <= 1e12``, all Prandtl numbers; properties at the film temperature.

    Parameters
    ----------
    rayleigh : float
        Rayleigh number on the diameter, ``Ra_D = g β ΔT D³ / (ν α) = Gr_D Pr`` [-].
    prandtl : float
        Prandtl number of the fluid [-].

    Returns
    -------
    float
        ``Nu_D = h D / k`` [-].

    References
    ----------
    S. W. Churchill, H. H. S. Chu, "Correlating equations for laminar and
    turbulent free convection from a horizontal cylinder", Int. J. Heat Mass
    Transfer 18 (1975) 1049-1053, doi:10.1016/0017-9310(75)90222-7; Incropera, Eq. 9.34.

    Examples
    --------
    Incropera, Example 9.2, as quoted in the docstring of ``ht``'s
    ``Nu_horizontal_cylinder_Churchill_Chu(Pr=0.69, Gr=2.63e9)``; this function
    takes ``Ra = Gr Pr``:

    >>> round(nusselt_horizontal_cylinder_churchill_chu(2.63e9 * 0.69, 0.69), 4)
    139.1349
    """
    term = 0.60 + 0.387 * rayleigh ** (1.0 / 6.0) / (1.0 + (0.559 / prandtl) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return term * term


@register_jitable
def nusselt_vertical_plate_churchill_chu(rayleigh: float, prandtl: float) -> float:
    r"""Average Nusselt number of an isothermal vertical plate in free convection (Churchill-Chu).

    .. math::

        Nu_L = \left\{0.825 + \frac{0.387 Ra_L^{1/6}}{[1 + (0.492/Pr)^{9/16}]^{8/27}}\right\}^2

    Valid over the whole range of ``Ra_L``, laminar and turbulent, all Prandtl numbers.

    Parameters
    ----------
    rayleigh : float
        Rayleigh number on the plate height, ``Ra_L = Gr_L Pr`` [-].
    prandtl : float
        Prandtl number of the fluid [-].

    Returns
    -------
    float
        ``Nu_L = h L / k`` [-].

    References
    ----------
    S. W. Churchill, H. H. S. Chu, "Correlating equations for laminar and
    turbulent free convection from a vertical plate", Int. J. Heat Mass Transfer
    18 (1975) 1323-1329, doi:10.1016/0017-9310(75)90243-4; Incropera, Eq. 9.26.

    Examples
    --------
    Incropera, Example 9.2, as quoted in the docstring of ``ht``'s
    ``Nu_vertical_plate_Churchill(Pr=0.69, Gr=2.63e9)``:

    >>> round(nusselt_vertical_plate_churchill_chu(2.63e9 * 0.69, 0.69), 4)
    147.1619
    """
    term = 0.825 + 0.387 * rayleigh ** (1.0 / 6.0) / (1.0 + (0.492 / prandtl) ** (9.0 / 16.0)) ** (8.0 / 27.0)
    return term * term


@register_jitable
def nusselt_horizontal_plate_mcadams(rayleigh: float, buoyant_side: bool) -> float:
    """Average Nusselt number of an isothermal horizontal plate in free convection (McAdams).

    On the buoyant side (the upper surface of a hot plate, the lower surface of
    a cold one), where the plume leaves the plate freely:
    ``Nu_L = 0.54 Ra_L^1/4`` for ``1e4 <= Ra_L <= 1e7`` and
    ``Nu_L = 0.15 Ra_L^1/3`` for ``1e7 <= Ra_L <= 1e11``. On the other side
    ``Nu_L = 0.27 Ra_L^1/4`` for ``1e5 <= Ra_L <= 1e10``. The length is the
    plate area over its perimeter, ``L = A_s / P``.

    Parameters
    ----------
    rayleigh : float
        Rayleigh number on ``L = A_s / P`` [-].
    buoyant_side : bool
        The surface is the buoyant side (hot facing up or cold facing down).

    Returns
    -------
    float
        ``Nu_L = h L / k`` [-].

    References
    ----------
    W. H. McAdams, *Heat Transmission*, 3rd ed., McGraw-Hill (1954);
    Incropera, Eqs. 9.30-9.32 (the 6th edition's forms, from memory).

    Examples
    --------
    The check values of the docstring of ``ht``'s ``Nu_horizontal_plate_McAdams(Pr=5.54, Gr=3.21e8)``:

    >>> ra = 5.54 * 3.21e8
    >>> round(nusselt_horizontal_plate_mcadams(ra, True), 5), round(nusselt_horizontal_plate_mcadams(ra, False), 5)
    (181.73121, 55.44565)
    """
    if buoyant_side:
        if rayleigh <= 1e7:
            return 0.54 * rayleigh**0.25
        return 0.15 * rayleigh ** (1.0 / 3.0)
    return 0.27 * rayleigh**0.25


@register_jitable
def mixed_convection_nusselt(forced: float, natural: float) -> float:
    """Forced and free convection combined: ``Nu^3 = Nu_F^3 + Nu_N^3`` (Churchill, n = 3).

    For assisting and transverse flows; the exponent 3 is the one recommended
    for cylinders and plates. Either part alone gives itself back.

    Parameters
    ----------
    forced : float
        Nusselt number of the forced flow alone [-].
    natural : float
        Nusselt number of free convection alone [-].

    Returns
    -------
    float
        Nusselt number of the mixed flow [-].

    References
    ----------
    S. W. Churchill, "A comprehensive correlating equation for laminar,
    assisting, forced and free convection", AIChE J. 23 (1977) 10-16,
    doi:10.1002/aic.690230103; Incropera, Eq. 9.64 with n = 3.

    Examples
    --------
    ``(3³ + 4³)^(1/3) = 91^(1/3)``:

    >>> round(mixed_convection_nusselt(3.0, 4.0), 6)
    4.497941
    """
    return (forced**3 + natural**3) ** (1.0 / 3.0)


# ---------------------------------------------------------------------------
# The registry
# ---------------------------------------------------------------------------

CorrelationKind = Literal["forced", "natural"]


@dataclass(frozen=True)
class ValidityRange:
    """A range of a dimensionless group inside which a correlation holds.

    Attributes
    ----------
    quantity : {"Re", "Re Pr", "Ra", "Pr"}
        The group bounded: the Reynolds number, its product with the Prandtl
        number (the Péclet number), the Rayleigh number or the Prandtl number [-].
    low, high : float
        Bounds, inclusive [-]; 0 and ``inf`` when a side is not bounded.
    surface : {"any", "hot", "cold"}
        Where the range applies: always, or only while the surface is above
        (hot) or below (cold) the air temperature (a horizontal plate changes
        form with the side the plume leaves from).
    form : str
        Which form of the correlation the range belongs to, in words.
    """

    quantity: Literal["Re", "Re Pr", "Ra", "Pr"]
    low: float = 0.0
    high: float = math.inf
    surface: Literal["any", "hot", "cold"] = "any"
    form: str = ""

    def value(self, reynolds, rayleigh, prandtl):
        """The bounded group (Re, Re Pr, Pr or Ra) from the flow's numbers, scalars or arrays alike.

        Parameters
        ----------
        reynolds : float or array
            Reynolds number [-].
        rayleigh : float or array
            Rayleigh number [-].
        prandtl : float or array
            Prandtl number [-].

        Returns
        -------
        float or array
            The group this range bounds [-].
        """
        if self.quantity == "Re":
            return reynolds
        if self.quantity == "Re Pr":
            return reynolds * prandtl
        if self.quantity == "Pr":
            return prandtl
        return rayleigh

    def applies(self, surface_hot):
        """Whether the range applies to a surface that is (or is not) at or above the air temperature.

        Parameters
        ----------
        surface_hot : bool or bool array
            The surface is at or above the air temperature.

        Returns
        -------
        bool array
            Where the range applies (every element for a range of ``surface = "any"``).
        """
        hot = np.asarray(surface_hot, dtype=bool)
        if self.surface == "any":
            return np.ones_like(hot)
        return hot if self.surface == "hot" else ~hot

    def contains(self, value) -> bool:
        """True when every value lies within the bounds.

        Parameters
        ----------
        value : float or array
            Values of the bounded group [-].

        Returns
        -------
        bool
            All within ``low <= value <= high``.
        """
        values = np.asarray(value, dtype=float)
        return bool(np.all((values >= self.low) & (values <= self.high)))

    def describe(self) -> str:
        """The range in words.

        Returns
        -------
        str
            ``1e+04 <= Ra <= 1e+11``, ``0.2 <= Re Pr``, ``Ra <= 1e+12``.
        """
        parts = []
        if self.low > 0.0:
            parts.append(f"{self.low:.3g} <=")
        parts.append(self.quantity)
        if math.isfinite(self.high):
            parts.append(f"<= {self.high:.3g}")
        return " ".join(parts)


@dataclass(frozen=True)
class Correlation:
    """One convection correlation a scenario may name (``[thermal.convection] forced = "flat_plate"``).

    Attributes
    ----------
    name : str
        The name in scenario files.
    kind : {"forced", "natural"}
        Forced flow at the air speed, or free convection at the sink-to-air difference.
    code : int
        Its code in the engine's kernels (:func:`coefficient_from_numbers`), unique per kind; 0 is none.
    nusselt : callable
        The Nusselt function: ``nusselt(Re or Ra, Pr)``, or for a horizontal plate
        ``nusselt(Ra, buoyant_side)``.
    length : str
        The characteristic length ``L`` in ``Re``, ``Ra`` and ``h = Nu k / L``.
    validity : tuple of ValidityRange
        Where the correlation holds, in ``Re`` or ``Ra`` and in ``Pr`` (no range: everywhere).
    method : str
        Author or form, for messages.
    reference : str
        The published source.
    facing : {"up", "down"} or None
        For a horizontal plate, the face exposed to the air.
    """

    name: str
    kind: CorrelationKind
    code: int
    nusselt: Callable[..., float]
    length: str
    validity: tuple[ValidityRange, ...]
    method: str
    reference: str
    facing: Literal["up", "down"] | None = None

    def evaluate(self, number: float, prandtl: float, surface_hot: bool = True) -> float:
        """The correlation's Nusselt number.

        Parameters
        ----------
        number : float
            Reynolds number (forced) or Rayleigh number (natural) [-].
        prandtl : float
            Prandtl number [-].
        surface_hot : bool
            The surface is at or above the air temperature: picks the form of a
            horizontal plate; the other correlations ignore it.

        Returns
        -------
        float
            Average Nusselt number [-].
        """
        if self.facing is None:
            return self.nusselt(number, prandtl)
        return self.nusselt(number, surface_hot if self.facing == "up" else not surface_hot)

    def is_valid(self, number: float, prandtl: float, surface_hot: bool = True) -> bool:
        """True when the flow lies inside every validity range that applies.

        Parameters
        ----------
        number : float
            Reynolds number (forced) or Rayleigh number (natural) [-].
        prandtl : float
            Prandtl number [-].
        surface_hot : bool
            The surface is at or above the air temperature (for a horizontal plate's ranges).

        Returns
        -------
        bool
            Inside every applicable range.
        """
        reynolds, rayleigh = (number, 0.0) if self.kind == "forced" else (0.0, number)
        return all(rng.contains(rng.value(reynolds, rayleigh, prandtl))
                   for rng in self.validity if rng.applies(surface_hot))


#: The convection correlations by name, forced then natural, each in the order of its code.
CORRELATIONS: dict[str, Correlation] = {entry.name: entry for entry in (
    Correlation(
        "cylinder_crossflow", "forced", 1, nusselt_cylinder_churchill_bernstein, "cylinder diameter",
        (ValidityRange("Re Pr", 0.2),), "Churchill-Bernstein, Incropera Eq. 7.54",
        "S. W. Churchill, M. Bernstein, J. Heat Transfer 99 (1977) 300; Incropera, Eq. 7.54"),
    Correlation(
        "flat_plate", "forced", 2, nusselt_flat_plate_parallel_flow, "plate length along the flow",
        (ValidityRange("Re", 0.0, 1e8), ValidityRange("Pr", 0.6, 60.0)),
        "flat plate laminar / mixed, Incropera Eqs. 7.30 and 7.38",
        "E. Pohlhausen, Z. Angew. Math. Mech. 1 (1921) 115; Incropera, Eqs. 7.30 and 7.38"),
    Correlation(
        "horizontal_cylinder", "natural", 1, nusselt_horizontal_cylinder_churchill_chu, "cylinder diameter",
        (ValidityRange("Ra", 0.0, 1e12),), "Churchill-Chu, Incropera Eq. 9.34",
        "S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18 (1975) 1049; Incropera, Eq. 9.34"),
    Correlation(
        "vertical_plate", "natural", 2, nusselt_vertical_plate_churchill_chu, "plate height",
        (), "Churchill-Chu, Incropera Eq. 9.26",
        "S. W. Churchill, H. H. S. Chu, Int. J. Heat Mass Transfer 18 (1975) 1323; Incropera, Eq. 9.26"),
    Correlation(
        "horizontal_plate_up", "natural", 3, nusselt_horizontal_plate_mcadams, "plate area over its perimeter",
        (ValidityRange("Ra", 1e4, 1e11, "hot", "hot surface facing up, Incropera Eqs. 9.30-9.31"),
         ValidityRange("Ra", 1e5, 1e10, "cold", "cold surface facing up, Incropera Eq. 9.32")),
        "McAdams", "W. H. McAdams, Heat Transmission, 3rd ed. (1954); Incropera, Eqs. 9.30-9.32",
        facing="up"),
    Correlation(
        "horizontal_plate_down", "natural", 4, nusselt_horizontal_plate_mcadams, "plate area over its perimeter",
        (ValidityRange("Ra", 1e4, 1e11, "cold", "cold surface facing down, Incropera Eqs. 9.30-9.31"),
         ValidityRange("Ra", 1e5, 1e10, "hot", "hot surface facing down, Incropera Eq. 9.32")),
        "McAdams", "W. H. McAdams, Heat Transmission, 3rd ed. (1954); Incropera, Eqs. 9.30-9.32",
        facing="down"),
)}

#: Kernel codes of the forced and the natural correlations by name (0, absent here, is none).
FORCED_CORRELATIONS: dict[str, int] = {c.name: c.code for c in CORRELATIONS.values() if c.kind == "forced"}
NATURAL_CORRELATIONS: dict[str, int] = {c.name: c.code for c in CORRELATIONS.values() if c.kind == "natural"}
#: The names a scenario may give as ``forced`` / ``natural``.
FORCED_CORRELATION_NAMES: tuple[str, ...] = tuple(FORCED_CORRELATIONS)
NATURAL_CORRELATION_NAMES: tuple[str, ...] = tuple(NATURAL_CORRELATIONS)

# The codes the kernel dispatch branches on (module globals: numba compiles them in as constants).
_CYLINDER_CROSSFLOW = CORRELATIONS["cylinder_crossflow"].code
_FLAT_PLATE = CORRELATIONS["flat_plate"].code
_HORIZONTAL_CYLINDER = CORRELATIONS["horizontal_cylinder"].code
_VERTICAL_PLATE = CORRELATIONS["vertical_plate"].code
_HORIZONTAL_PLATE_UP = CORRELATIONS["horizontal_plate_up"].code
_HORIZONTAL_PLATE_DOWN = CORRELATIONS["horizontal_plate_down"].code


def correlation(name: str, kind: CorrelationKind | None = None) -> Correlation:
    """The registry entry of a correlation by name; an unknown name is an error that lists the valid ones.

    Parameters
    ----------
    name : str
        A key of :data:`CORRELATIONS`.
    kind : {"forced", "natural"} or None
        Accept only a correlation of this kind (None: either).

    Returns
    -------
    Correlation
        The entry.

    Raises
    ------
    ValueError
        For a name not in the registry (or not of ``kind``), listing the valid names.

    Examples
    --------
    >>> correlation("vertical_plate").method
    'Churchill-Chu, Incropera Eq. 9.26'
    >>> correlation("cone", "natural")
    Traceback (most recent call last):
    ...
    ValueError: unknown natural convection correlation 'cone'; valid: horizontal_cylinder, vertical_plate, \
horizontal_plate_up, horizontal_plate_down
    """
    entry = CORRELATIONS.get(name)
    if entry is None or (kind is not None and entry.kind != kind):
        names = [c.name for c in CORRELATIONS.values() if kind is None or c.kind == kind]
        what = f"{kind} convection" if kind else "convection"
        raise ValueError(f"unknown {what} correlation {name!r}; valid: {', '.join(names)}")
    return entry


def nusselt_number(name: str, number: float, prandtl: float, surface_hot: bool = True) -> float:
    """Nusselt number from a correlation chosen by name (a dispatcher over :data:`CORRELATIONS`).

    Parameters
    ----------
    name : str
        A key of :data:`CORRELATIONS`.
    number : float
        Reynolds number for a forced correlation, Rayleigh number for a natural
        one, on the correlation's length [-].
    prandtl : float
        Prandtl number [-].
    surface_hot : bool
        The surface is at or above the air temperature (picks a horizontal plate's form).

    Returns
    -------
    float
        Nusselt number [-].

    Examples
    --------
    >>> round(nusselt_number("cylinder_crossflow", 6071.0, 0.7), 5)
    40.63709
    """
    return correlation(name).evaluate(number, prandtl, surface_hot)


def valid_correlations(prandtl: float, reynolds: float | None = None, rayleigh: float | None = None,
                       surface_hot: bool = True) -> list[str]:
    """Names of the correlations whose validity ranges hold the given numbers.

    Forced correlations are considered when ``reynolds`` is given, natural ones
    when ``rayleigh`` is given. The geometry is the caller's to choose: this
    lists where each correlation is valid, not which shape the sink has.

    Parameters
    ----------
    prandtl : float
        Prandtl number [-].
    reynolds : float or None
        Reynolds number [-] (None: no forced correlation is considered).
    rayleigh : float or None
        Rayleigh number [-] (None: no natural correlation is considered).
    surface_hot : bool
        The surface is at or above the air temperature.

    Returns
    -------
    list of str
        Keys of :data:`CORRELATIONS`, in registry order.

    Examples
    --------
    A hot surface at ``Ra = 5e4``: McAdams' form for a hot plate facing down holds from ``Ra = 1e5`` only:

    >>> valid_correlations(0.707, rayleigh=5e4)
    ['horizontal_cylinder', 'vertical_plate', 'horizontal_plate_up']
    """
    numbers = {"forced": reynolds, "natural": rayleigh}
    return [c.name for c in CORRELATIONS.values()
            if numbers[c.kind] is not None and c.is_valid(numbers[c.kind], prandtl, surface_hot)]


# ---------------------------------------------------------------------------
# What the kernels evaluate
# ---------------------------------------------------------------------------

@register_jitable
def convection_numbers(length: float, air_speed: float, surface_temperature: float,
                       air_temperature: float) -> tuple[float, float, float, float]:
    """Reynolds and Rayleigh numbers, air conductivity and Prandtl number at the film temperature.

    ``Re = U L / ν``; ``Ra = g β |T_s - T_∞| L³ / (ν α)`` with ``β = 1 / T_film``
    (ideal gas) and ``α = ν / Pr``, properties of air (:func:`air_properties`)
    at ``T_film = (T_s + T_∞) / 2``.

    Parameters
    ----------
    length : float
        Characteristic length of the correlation [m], > 0.
    air_speed : float
        Free-stream air speed [m/s], >= 0.
    surface_temperature : float
        Surface (sink) temperature ``T_s`` [K].
    air_temperature : float
        Free-stream air temperature ``T_∞`` [K].

    Returns
    -------
    reynolds : float
        ``Re`` [-].
    rayleigh : float
        ``Ra`` [-].
    conductivity : float
        Air conductivity at the film temperature [W/(m K)].
    prandtl : float
        Prandtl number at the film temperature [-].

    References
    ----------
    Incropera, Eqs. 6.41 and 9.25; ``g`` the standard gravity.

    Examples
    --------
    A 21 mm cylinder at 2 m/s in air at 300 K (Table A.4): ``Re = 2 * 0.021 / 15.89e-6``:

    >>> re, ra, k, pr = convection_numbers(0.021, 2.0, 300.0, 300.0)
    >>> round(float(re), 2), float(ra), float(k), float(pr)
    (2643.17, 0.0, 0.0263, 0.707)
    """
    film = 0.5 * (surface_temperature + air_temperature)
    nu, k, pr = air_properties(film)
    reynolds = air_speed * length / nu
    rayleigh = STANDARD_GRAVITY / film * abs(surface_temperature - air_temperature) * length**3 * pr / (nu * nu)
    return reynolds, rayleigh, k, pr


@register_jitable
def coefficient_from_numbers(forced: int, natural: int, length: float, flowing: bool, surface_hot: bool,
                             reynolds: float, rayleigh: float, conductivity: float, prandtl: float) -> float:
    """``h = Nu k / L`` from already computed Re, Ra, air conductivity and Pr: the kernels' dispatch.

    The branches follow the codes of :data:`CORRELATIONS`; forced convection
    without air flow contributes nothing; both kinds together combine as
    ``Nu³ = Nu_F³ + Nu_N³`` (:func:`mixed_convection_nusselt`). Kept apart
    from :func:`convection_coefficient` so a caller that also reports Re and Ra
    computes them once.

    Parameters
    ----------
    forced : int
        Code of the forced correlation, :data:`FORCED_CORRELATIONS`; 0 for none [-].
    natural : int
        Code of the natural correlation, :data:`NATURAL_CORRELATIONS`; 0 for none [-].
    length : float
        Characteristic length [m], > 0.
    flowing : bool
        The air moves (air speed > 0).
    surface_hot : bool
        The surface is at or above the air temperature.
    reynolds : float
        ``Re`` on ``length`` [-].
    rayleigh : float
        ``Ra`` on ``length`` [-].
    conductivity : float
        Air conductivity [W/(m K)].
    prandtl : float
        Prandtl number [-].

    Returns
    -------
    float
        Heat transfer coefficient ``h`` [W/(m² K)].

    Examples
    --------
    Churchill-Chu at the worked example of :func:`nusselt_horizontal_cylinder_churchill_chu`
    (a length of 1 m and ``k = 1 W/(m K)``, so ``h`` equals ``Nu``):

    >>> code = NATURAL_CORRELATIONS["horizontal_cylinder"]
    >>> round(coefficient_from_numbers(0, code, 1.0, False, True, 0.0, 2.63e9 * 0.69, 1.0, 0.69), 4)
    139.1349
    """
    nu_forced = 0.0
    if forced != 0 and flowing:
        if forced == _CYLINDER_CROSSFLOW:
            nu_forced = nusselt_cylinder_churchill_bernstein(reynolds, prandtl)
        elif forced == _FLAT_PLATE:
            nu_forced = nusselt_flat_plate_parallel_flow(reynolds, prandtl)
    nu_natural = 0.0
    if natural == _HORIZONTAL_CYLINDER:
        nu_natural = nusselt_horizontal_cylinder_churchill_chu(rayleigh, prandtl)
    elif natural == _VERTICAL_PLATE:
        nu_natural = nusselt_vertical_plate_churchill_chu(rayleigh, prandtl)
    elif natural == _HORIZONTAL_PLATE_UP:
        nu_natural = nusselt_horizontal_plate_mcadams(rayleigh, surface_hot)
    elif natural == _HORIZONTAL_PLATE_DOWN:
        nu_natural = nusselt_horizontal_plate_mcadams(rayleigh, not surface_hot)
    if nu_forced > 0.0 and nu_natural > 0.0:
        return mixed_convection_nusselt(nu_forced, nu_natural) * conductivity / length
    return (nu_forced + nu_natural) * conductivity / length


@register_jitable
def convection_coefficient(forced: int, natural: int, length: float, air_speed: float,
                           surface_temperature: float, air_temperature: float) -> float:
    """Heat transfer coefficient ``h = Nu k / L`` from the chosen correlations, air at the film temperature.

    :func:`convection_numbers` then :func:`coefficient_from_numbers`.

    Parameters
    ----------
    forced : int
        Code of the forced correlation, :data:`FORCED_CORRELATIONS`; 0 for none [-].
    natural : int
        Code of the natural correlation, :data:`NATURAL_CORRELATIONS`; 0 for none [-].
    length : float
        Characteristic length [m], > 0.
    air_speed : float
        Free-stream air speed [m/s], >= 0.
    surface_temperature : float
        Surface temperature [K].
    air_temperature : float
        Free-stream air temperature [K].

    Returns
    -------
    float
        Heat transfer coefficient ``h`` [W/(m² K)].

    Examples
    --------
    A 21 mm cylinder in cross-flow at 2 m/s, air at 300 K (Table A.4), by Churchill-Bernstein:

    >>> code = FORCED_CORRELATIONS["cylinder_crossflow"]
    >>> round(float(convection_coefficient(code, 0, 0.021, 2.0, 300.0, 300.0)), 4)
    32.9355
    """
    reynolds, rayleigh, k, pr = convection_numbers(length, air_speed, surface_temperature, air_temperature)
    return coefficient_from_numbers(forced, natural, length, air_speed > 0.0,
                                    surface_temperature >= air_temperature, reynolds, rayleigh, k, pr)
