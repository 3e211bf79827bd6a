"""The scenario schema (format 1): pydantic models of every table, their quantity types and checks.

Owns the sections (``[cell]``, ``[thermal]``, ``[[profile.segment]]`` ...) with
their keys, the annotated quantity types that convert a value to SI as it is
validated, and :class:`KeyedError` with the small ``_check`` helpers a
section's validator raises it with (naming the key at fault). After validation
every value is SI (K, s, A, V, Ω, W, J, C).

Imports from :mod:`thermoelec.inputs`, :mod:`thermoelec.engine` (back ends,
solver options, stress settings), :mod:`thermoelec.physics` and, for the CSV
column names, :mod:`thermoelec.scenario.series`; never from the other scenario
modules (they build on this one) nor from the layers above.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Annotated, Any, ClassVar, Literal

import numpy as np
from pydantic import BaseModel, BeforeValidator, ConfigDict, create_model, model_validator

from thermoelec.engine.backends import BACKENDS
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Derating, Limits, LimitTable, StressSettings
from thermoelec.inputs.units import to_si
from thermoelec.physics.cell import CellGeometry, RCPair, ResistanceLaw
from thermoelec.physics.constants import SECONDS_PER_HOUR, ZERO_CELSIUS
from thermoelec.physics.correlations import FORCED_CORRELATION_NAMES, NATURAL_CORRELATION_NAMES
from thermoelec.physics.loads import LOAD_MODES, SEGMENT_MODES
from thermoelec.physics.thermal import (
    Convection,
    Coolant,
    Fan,
    Heater,
    Radiation,
    Switch,
    ThermalNetwork,
    convection_conductance,
)
from thermoelec.scenario.series import AMBIENT_COLUMN

__all__ = ["FORMAT_VERSION", "MIN_RTOL", "CellFileSpec", "CurrentLimitSpec", "DeratingSpec", "KeyedError",
           "LimitTableSpec", "LimitsSpec", "OptionSpec", "PowerLimitSpec", "RateLimitSpec", "ReviewSpec",
           "ScenarioSpec", "SegmentSpec", "Unit", "key_kind"]

#: The scenario format this schema reads (the file's ``format`` key).
FORMAT_VERSION = 1
#: The tightest relative tolerance accepted [-]: about 450 times the double-precision epsilon (2.2e-16);
#: CVODE refuses a tighter one as "too much accuracy requested", scipy's solvers raise it to 100 epsilon.
MIN_RTOL = 1e-13
#: The largest activation energy accepted [J/mol]: cells' Arrhenius laws take 20 to 80 kJ/mol (common
#: practice); ten times that keeps the factor finite over the temperatures a pack meets.
MAX_ACTIVATION_ENERGY = 500e3
#: The most internal steps per phase accepted [-]: CVODE counts them in a C long.
MAX_STEPS = 2**31 - 1
#: Default reference temperature of the cell's tables and laws: 25 degC (common practice) [K].
REFERENCE_TEMPERATURE = ZERO_CELSIUS + 25.0


# ---------------------------------------------------------------------------
# Quantity types: a value in a default unit or with its own, converted to SI
# ---------------------------------------------------------------------------


def _quantity(default_unit: str, si_unit: str | None = None):
    si = si_unit or default_unit
    return BeforeValidator(lambda v: to_si(v, default_unit, si))


def _absolute(value: Any) -> float:
    """A temperature [K] from a file's value (a bare number in degC), refused at or below absolute zero."""
    kelvin = to_si(value, "degC", "K")
    if kelvin <= 0.0:
        raise ValueError(f"{value!r} is at or below absolute zero ({kelvin - ZERO_CELSIUS:.6g} degC)")
    return kelvin


def _temperature_list(v: Any) -> list[float]:
    if not isinstance(v, list):
        raise ValueError(f"expected a list of temperatures in degC, got {v!r}")
    if not v:
        raise ValueError("the list is empty")
    out = []
    for i, item in enumerate(v):
        try:
            out.append(_absolute(item))
        except ValueError as exc:
            raise ValueError(f"item {i + 1}: {exc}") from None
    return out


def _quantity_list(default_unit: str, si_unit: str | None = None):
    si = si_unit or default_unit

    def convert(v: Any) -> list[float]:
        if not isinstance(v, list):
            raise ValueError(f"expected a list of quantities in {default_unit}, got {v!r}")
        if not v:
            raise ValueError("the list is empty")
        out = []
        for i, item in enumerate(v):
            try:
                out.append(to_si(item, default_unit, si))
            except ValueError as exc:
                raise ValueError(f"item {i + 1}: {exc}") from None
        return out

    return BeforeValidator(convert)


def _quantity_table(default_unit: str):
    def convert(v: Any) -> list[list[float]]:
        if not isinstance(v, list) or not v:
            raise ValueError(f"expected a list of rows of values in {default_unit}")
        rows = v if isinstance(v[0], list) else [v]
        out = []
        for r, row in enumerate(rows):
            if not isinstance(row, list):
                raise ValueError(f"row {r + 1} is not a list")
            try:
                out.append([to_si(x, default_unit, default_unit) for x in row])
            except ValueError as exc:
                raise ValueError(f"row {r + 1}: {exc}") from None
        return out

    return BeforeValidator(convert)


def _positive_int(v: Any) -> int:
    if isinstance(v, bool) or not isinstance(v, int) or v < 1:
        raise ValueError(f"expected a whole number >= 1, got {v!r}")
    return v


@dataclass(frozen=True)
class Unit:
    """The unit of a key: of a bare number in the file (``display``, as pint spells it), after validation (``si``)."""

    display: str
    si: str


def _scalar(default_unit: str, si_unit: str | None = None) -> Any:
    """A float key in ``default_unit``, validated to ``si_unit`` (its :class:`Unit` kept for listings)."""
    return Annotated[float, _quantity(default_unit, si_unit), Unit(default_unit, si_unit or default_unit)]


def _listed(default_unit: str, si_unit: str | None = None) -> Any:
    """A list-of-floats key in ``default_unit``, validated to ``si_unit``."""
    return Annotated[list[float], _quantity_list(default_unit, si_unit), Unit(default_unit, si_unit or default_unit)]


Soc = _scalar("", "")
Voltage = _scalar("V")
Current = _scalar("A")
Power = _scalar("W")
Resistance = _scalar("ohm")
Capacity = _scalar("Ah", "C")
Mass = _scalar("kg")
SpecificHeat = _scalar("J/kg/K")
Temperature = Annotated[float, BeforeValidator(_absolute), Unit("degC", "K")]  # above absolute zero
HeatCapacity = _scalar("J/K")
Conductance = _scalar("W/K")
Coefficient = _scalar("W/m^2/K")
Area = _scalar("m^2")
Energy = _scalar("J/mol")
Length = _scalar("m")
Speed = _scalar("m/s")
MassFlow = _scalar("kg/s")
Conductivity = _scalar("W/m/K")
Capacitance = _scalar("F")
Duration = _scalar("s")
Dimensionless = _scalar("", "")
Kelvin = _scalar("K")
SocList = _listed("", "")
VoltageList = _listed("V")
EntropicList = _listed("V/K")
SpeedList = _listed("m/s")
MassFlowList = _listed("kg/s")
PowerList = _listed("W")
TemperatureList = Annotated[list[float], BeforeValidator(_temperature_list), Unit("degC", "K")]
ResistanceTable = Annotated[list[list[float]], _quantity_table("ohm"), Unit("ohm", "ohm")]
Count = Annotated[int, BeforeValidator(_positive_int)]


class KeyedError(ValueError):
    """A validation error that knows which key of its section is at fault.

    ``key`` is a key of the section, or a path below it as a tuple of keys and
    0-based list indices (``("cell", 2, "cell")`` for ``cell[3].cell``). ``form``
    tells a value that cannot be read as its key's kind (a wrong unit) from one
    read well but out of range or at odds with another key (the default).
    """

    def __init__(self, key: str | tuple | None, message: str, form: bool = False):
        super().__init__(message)
        self.key, self.form = key, form


def _check(condition: bool, message: str, key: str | tuple | None = None) -> None:
    """Raise ``message`` as a :class:`KeyedError` naming ``key`` unless ``condition`` holds."""
    if not condition:
        raise KeyedError(key, message)


def _increasing(values: list[float], what: str) -> None:
    _check(all(b > a for a, b in itertools.pairwise(values)),
           f"{what} must be strictly increasing", what)


def _activation_energy(value: float | None, what: str = "activation_energy") -> None:
    """0 .. :data:`MAX_ACTIVATION_ENERGY`: an Arrhenius factor that stays a finite number."""
    if value is not None:
        _check(0.0 <= value <= MAX_ACTIVATION_ENERGY, f"{what} must lie within 0..{MAX_ACTIVATION_ENERGY / 1e3:g} "
               f"kJ/mol, got {value / 1e3:.4g} kJ/mol", what)


def _positive(value: float | None, what: str, allow_zero: bool = False) -> None:
    if value is None:
        return
    if allow_zero:
        _check(value >= 0.0, f"{what} must be >= 0", what)
    else:
        _check(value > 0.0, f"{what} must be > 0", what)


# ---------------------------------------------------------------------------
# Sections (pydantic), SI values after validation
# ---------------------------------------------------------------------------


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class ScenarioInfo(_Section):
    name: str
    description: str = ""


class OcvSpec(_Section):
    soc: SocList
    voltage: VoltageList
    entropic: EntropicList | None = None
    reference_temperature: Temperature = REFERENCE_TEMPERATURE

    @model_validator(mode="after")
    def _table(self):
        _increasing(self.soc, "soc")
        _check(self.soc[0] >= 0.0 and self.soc[-1] <= 1.0, "soc values must lie within 0..1", "soc")
        _check(self.soc[0] == 0.0 and self.soc[-1] == 1.0,
               f"soc must cover 0 and 1 (got {self.soc[0]:g}..{self.soc[-1]:g})", "soc")
        _check(len(self.voltage) == len(self.soc),
               f"voltage has {len(self.voltage)} values but soc has {len(self.soc)}", "voltage")
        _check(all(v > 0 for v in self.voltage), "voltage values must be > 0", "voltage")
        if self.entropic is not None:
            _check(len(self.entropic) == len(self.soc),
                   f"entropic has {len(self.entropic)} values but soc has {len(self.soc)}", "entropic")
        return self


class ResistanceSpec(_Section):
    """One of: ``value``; ``soc`` + ``values``; ``soc`` + ``temperature`` + ``values`` (rows per temperature)."""

    value: Resistance | None = None
    soc: SocList | None = None
    temperature: TemperatureList | None = None
    values: ResistanceTable | None = None
    activation_energy: Energy | None = None
    reference_temperature: Temperature = REFERENCE_TEMPERATURE

    @model_validator(mode="after")
    def _form(self):
        if self.value is not None:
            _check(self.soc is None and self.values is None and self.temperature is None,
                   "give either value, or soc and values (and temperature), not both")
            _positive(self.value, "value")
        else:
            _check(self.soc is not None and self.values is not None,
                   "give value (a constant), or soc and values (a table)")
            _increasing(self.soc, "soc")
            rows = self.values
            if self.temperature is None:
                _check(len(rows) == 1, "values has several rows: give temperature, one per row")
            else:
                _increasing(self.temperature, "temperature")
                _check(len(rows) == len(self.temperature),
                       f"values has {len(rows)} rows but temperature has {len(self.temperature)} values")
                _check(self.activation_energy is None,
                       "activation_energy goes with a constant or a table over SoC, not a 2-D table")
            for r, row in enumerate(rows):
                _check(len(row) == len(self.soc), f"values row {r + 1} has {len(row)} values but soc has "
                                                  f"{len(self.soc)}")
                _check(all(x > 0 for x in row), f"values row {r + 1}: resistances must be > 0")
        _activation_energy(self.activation_energy)
        return self

    def law(self) -> ResistanceLaw:
        ea = self.activation_energy or 0.0
        if self.value is not None:
            return ResistanceLaw.constant(self.value, ea, self.reference_temperature)
        temps = self.temperature or [self.reference_temperature]
        return ResistanceLaw(np.array(self.soc), np.array(temps), np.array(self.values), ea,
                             self.reference_temperature)


class RCSpec(_Section):
    resistance: Resistance | ResistanceSpec
    capacitance: Capacitance | None = None
    time_constant: Duration | None = None
    activation_energy: Energy | None = None
    reference_temperature: Temperature = REFERENCE_TEMPERATURE

    @model_validator(mode="before")
    @classmethod
    def _resistance_form(cls, data: Any) -> Any:
        if isinstance(data, dict) and isinstance(data.get("resistance"), dict):
            data = dict(data)
            inner = dict(data["resistance"])
            for key in ("activation_energy", "reference_temperature"):
                if key in data and key not in inner:
                    inner[key] = data[key]
            data["resistance"] = inner
        return data

    @model_validator(mode="after")
    def _pair(self):
        _check((self.capacitance is None) != (self.time_constant is None),
               "give exactly one of capacitance and time_constant")
        _positive(self.capacitance, "capacitance")
        _positive(self.time_constant, "time_constant")
        if isinstance(self.resistance, float):
            _positive(self.resistance, "resistance")
        _activation_energy(self.activation_energy)
        return self

    def pair(self) -> RCPair:
        if isinstance(self.resistance, ResistanceSpec):
            law = self.resistance.law()
        else:
            law = ResistanceLaw.constant(self.resistance, self.activation_energy or 0.0, self.reference_temperature)
        return RCPair(law, capacitance=self.capacitance, time_constant=self.time_constant)


class CellSpec(_Section):
    capacity: Capacity
    voltage_max: Voltage
    voltage_min: Voltage
    mass: Mass
    specific_heat: SpecificHeat
    initial_soc: Soc = 1.0
    ocv: OcvSpec
    r0: ResistanceSpec
    rc: list[RCSpec] = []
    diameter: Length | None = None
    length: Length | None = None
    thickness: Length | None = None
    width: Length | None = None
    height: Length | None = None
    thermal_conductivity: Conductivity | None = None

    @model_validator(mode="after")
    def _cell(self):
        for key in ("capacity", "voltage_max", "voltage_min", "mass", "specific_heat", *_GEOMETRY_KEYS,
                    "thermal_conductivity"):
            _positive(getattr(self, key), key)
        cylinder = [k for k in ("diameter", "length") if getattr(self, k) is not None]
        prism = [k for k in ("thickness", "width", "height") if getattr(self, k) is not None]
        _check(not (cylinder and prism), "give diameter and length (cylindrical) or thickness, width and height "
               "(prismatic), not both", (cylinder + prism)[0] if cylinder or prism else None)
        if cylinder:
            _check(len(cylinder) == 2, "a cylindrical cell needs both diameter and length",
                   "length" if "length" not in cylinder else "diameter")
        if prism:
            missing = [k for k in ("thickness", "width", "height") if k not in prism]
            _check(not missing, f"a prismatic cell needs thickness, width and height ({', '.join(missing)} missing)",
                   missing[0] if missing else None)
        if self.thermal_conductivity is not None:
            _check(bool(cylinder or prism), "thermal_conductivity needs the cell geometry: diameter and length, "
                   "or thickness, width and height", "thermal_conductivity")
        if self.voltage_min is not None and self.voltage_max is not None:  # a cell file may give one
            _check(self.voltage_min < self.voltage_max,
                   f"voltage_min ({self.voltage_min:g} V) must be below voltage_max ({self.voltage_max:g} V)",
                   "voltage_min")
        if self.initial_soc is not None:
            _check(0.0 <= self.initial_soc <= 1.0, f"initial_soc must lie within 0..1, got {self.initial_soc:g}",
                   "initial_soc")
        return self


    def geometry(self) -> CellGeometry | None:
        if self.thermal_conductivity is None:
            return None
        return CellGeometry(self.thermal_conductivity, **{k: getattr(self, k) for k in _GEOMETRY_KEYS})


_GEOMETRY_KEYS = ("diameter", "length", "thickness", "width", "height")


class LayoutSpec(_Section):
    """Where the cells sit: a grid (``rows`` x ``columns``, numbered along the rows or down the
    columns), or a list (``neighbours`` as pairs of cell numbers, ``wall`` cells, optional ``positions``)."""

    rows: Count | None = None
    columns: Count | None = None
    fill: Literal["rows", "columns"] = "rows"
    neighbours: list[list[int]] | None = None
    wall: list[int] = []
    positions: list[list[float]] | None = None

    @model_validator(mode="after")
    def _layout(self):
        grid = self.rows is not None or self.columns is not None
        _check(grid != (self.neighbours is not None),
               "give rows and columns (a grid), or neighbours (a list of pairs of cells), not both",
               "neighbours" if grid else "rows")
        if grid:
            _check(self.rows is not None and self.columns is not None, "a grid needs both rows and columns",
                   "columns" if self.columns is None else "rows")
            _check(not self.wall and self.positions is None,
                   "a grid finds its wall cells and positions itself: drop wall and positions", "wall")
        else:
            for k, pair in enumerate(self.neighbours):
                _check(len(pair) == 2 and pair[0] != pair[1], f"neighbours item {k + 1} must be two different cells",
                       ("neighbours", k))
        if self.positions is not None:
            for k, xy in enumerate(self.positions):
                _check(len(xy) == 2, f"positions item {k + 1} must be [x, y]", ("positions", k))
        return self

    def check_cells(self, n: int) -> None:
        """Raise a :class:`KeyedError` (relative to ``[pack]``) unless the layout holds ``n`` cells."""
        if self.rows is not None:
            _check(self.rows * self.columns == n, f"the layout has {self.rows} x {self.columns} = "
                   f"{self.rows * self.columns} places but the pack series x parallel = {n} cells", ("layout", "rows"))
            return
        for k, pair in enumerate(self.neighbours or []):
            _check(all(1 <= c <= n for c in pair), f"neighbours item {k + 1} names a cell outside 1..{n}",
                   ("layout", "neighbours", k))
        for k, c in enumerate(self.wall):
            _check(1 <= c <= n, f"wall item {k + 1} names a cell outside 1..{n}", ("layout", "wall", k))
        if self.positions is not None:
            _check(len(self.positions) == n, f"positions has {len(self.positions)} entries but the pack series x "
                   f"parallel = {n} cells", ("layout", "positions"))


class SpreadSpec(_Section):
    """Relative standard deviations of the cells' capacity and resistances, truncated normal, seeded."""

    capacity: Dimensionless = 0.0
    r0: Dimensionless = 0.0
    rc: Dimensionless = 0.0
    seed: int = 0
    truncation: Dimensionless = 3.0

    @model_validator(mode="after")
    def _spread(self):
        _check(self.truncation > 0, f"truncation must be > 0 standard deviations, got {self.truncation:g}",
               "truncation")
        for key in ("capacity", "r0", "rc"):
            value = getattr(self, key)
            _check(value >= 0, f"{key} is a relative standard deviation and must be >= 0, got {value:g}", key)
            _check(value * self.truncation < 1, f"{key} times truncation ({value * self.truncation:g}) must stay "
                   "below 1: a cell's factor would reach zero", key)
        _check(self.seed >= 0, f"seed must be >= 0, got {self.seed}", "seed")
        return self


#: The serpentine coolant paths of a grid layout (``physics.pack.serpentine_order``).
COOLANT_PATHS = ("rows", "columns")


def _coolant_order(v: Any) -> Any:
    """``"rows"``, ``"columns"`` or a list of cell numbers (whole numbers)."""
    if v is None or v in COOLANT_PATHS:
        return v
    if isinstance(v, list) and all(isinstance(c, int) and not isinstance(c, bool) for c in v):
        return v
    raise ValueError(f"expected {' or '.join(repr(p) for p in COOLANT_PATHS)} (a serpentine along the grid) or a "
                     f"list of cell numbers in flow order, got {v!r}")


class PackThermalSpec(_Section):
    """The thermal paths of each cell of a resolved pack (per cell, W/K)."""

    neighbour_conductance: Conductance = 0.0
    cell_to_sink: Conductance | None = None
    cell_to_ambient: Conductance | None = None
    wall_to_ambient: Conductance = 0.0
    coolant_order: Annotated[Any, BeforeValidator(_coolant_order)] = None
    plate_conductance: Conductance | None = None

    @model_validator(mode="after")
    def _paths(self):
        for key in ("neighbour_conductance", "cell_to_sink", "cell_to_ambient", "wall_to_ambient",
                    "plate_conductance"):
            _positive(getattr(self, key), key, allow_zero=True)
        order = self.coolant_order
        if isinstance(order, list):
            _check(len(order) > 0, "coolant_order is empty", "coolant_order")
            seen: set[int] = set()
            for k, c in enumerate(order):
                _check(c not in seen, f"coolant_order names cell {c} twice (items {order.index(c) + 1} and {k + 1})",
                       ("coolant_order", k))
                seen.add(c)
        _check(self.plate_conductance is None or order is not None,
               "plate_conductance is the conductance of each cell's segment of the coolant path: give "
               "coolant_order", "plate_conductance")
        return self


class CellOverrideSpec(_Section):
    """One cell of a resolved pack that differs: factors on the nominal cell (times its spread) and its own paths."""

    cell: int
    capacity_factor: Dimensionless = 1.0
    r0_factor: Dimensionless = 1.0
    rc_factor: Dimensionless = 1.0
    tab_resistance: Resistance = 0.0
    initial_soc: Soc | None = None
    cell_to_sink: Conductance | None = None
    cell_to_ambient: Conductance | None = None
    plate_conductance: Conductance | None = None

    @model_validator(mode="after")
    def _cell(self):
        for key in ("capacity_factor", "r0_factor", "rc_factor"):
            _positive(getattr(self, key), key)
        for key in ("tab_resistance", "cell_to_sink", "cell_to_ambient", "plate_conductance"):
            _positive(getattr(self, key), key, allow_zero=True)
        _check(self.initial_soc is None or 0.0 <= self.initial_soc <= 1.0,
               f"initial_soc must lie within 0..1, got {self.initial_soc}", "initial_soc")
        return self


#: The keys of ``[pack]`` that belong to a resolved pack (``model = "resolved"``).
RESOLVED_KEYS = ("layout", "spread", "thermal", "cell")


class PackSpec(_Section):
    series: Count = 1
    parallel: Count = 1
    interconnect_resistance: Resistance = 0.0
    model: Literal["lumped", "resolved"] = "lumped"
    layout: LayoutSpec | None = None
    spread: SpreadSpec | None = None
    thermal: PackThermalSpec | None = None
    cell: list[CellOverrideSpec] = []

    @model_validator(mode="after")
    def _pack(self):
        _positive(self.interconnect_resistance, "interconnect_resistance", allow_zero=True)
        if self.model == "lumped":
            for key in RESOLVED_KEYS:
                _check(not getattr(self, key), f"pack.{key} describes the cells of a resolved pack: set "
                       'pack.model = "resolved" (the default lumped pack has identical cells in one node)', key)
            return self
        n = self.series * self.parallel
        if self.layout is not None:
            self.layout.check_cells(n)
        seen: dict[int, int] = {}
        for k, override in enumerate(self.cell):
            _check(1 <= override.cell <= n, f"cell {override.cell} is outside the pack's cells 1..{n} "
                   f"(series x parallel = {self.series} x {self.parallel})", ("cell", k, "cell"))
            _check(override.cell not in seen, f"cell {override.cell} is given twice (pack.cell items "
                   f"{seen.get(override.cell, 0) + 1} and {k + 1})", ("cell", k, "cell"))
            seen[override.cell] = k
        order = self.thermal.coolant_order if self.thermal is not None else None
        if isinstance(order, list):
            for k, c in enumerate(order):
                _check(1 <= c <= n, f"coolant_order names cell {c}, outside the pack's cells 1..{n}",
                       ("thermal", "coolant_order", k))
        elif order is not None:
            _check(self.layout is None or self.layout.rows is not None,
                   f'coolant_order = "{order}" follows the rows or columns of a grid layout: give the cells in '
                   "flow order for a list layout", ("thermal", "coolant_order"))
        return self


class ConvectionSpec(_Section):
    """A given coefficient, or correlations from geometry and air speed."""

    area: Area
    coefficient: Coefficient | None = None
    forced: Literal[FORCED_CORRELATION_NAMES] | None = None  # physics.correlations.CORRELATIONS
    natural: Literal[NATURAL_CORRELATION_NAMES] | None = None
    length: Length | None = None
    air_speed: Speed = 0.0

    @model_validator(mode="after")
    def _convection(self):
        _positive(self.area, "area", allow_zero=True)
        if self.coefficient is not None:
            _positive(self.coefficient, "coefficient", allow_zero=True)
            _check(self.forced is None and self.natural is None and self.length is None,
                   "give coefficient, or forced / natural correlations with a length, not both", "coefficient")
            _check(self.air_speed == 0.0, "air_speed goes with a forced correlation, not a coefficient",
                   "air_speed")
            return self
        _check(self.forced is not None or self.natural is not None,
               "give coefficient, or a forced and / or natural correlation (with length)", "coefficient")
        _check(self.length is not None, "a correlation needs length (diameter, plate length or height)", "length")
        _positive(self.length, "length")
        _positive(self.air_speed, "air_speed", allow_zero=True)
        _check(self.forced is not None or self.air_speed == 0.0, "air_speed needs a forced correlation",
               "air_speed")
        return self

    def model(self) -> Convection | None:
        if self.coefficient is not None:
            return None
        return Convection(self.area, float(self.length), self.forced, self.natural, self.air_speed)


class RadiationSpec(_Section):
    emissivity: Dimensionless
    area: Area
    surroundings_temperature: Temperature | None = None

    @model_validator(mode="after")
    def _radiation(self):
        _check(0.0 < self.emissivity <= 1.0, f"emissivity must lie within 0..1, got {self.emissivity:g}",
               "emissivity")
        _positive(self.area, "area")
        return self


class CoolantSpec(_Section):
    """A cold plate on the sink: a coolant flow through a plate of conductance UA, or a given conductance."""

    inlet_temperature: Temperature
    flow_rate: MassFlow | None = None
    specific_heat: SpecificHeat = 4179.0  # water near 300 K (Incropera et al., 6th ed., Table A.6, from memory)
    plate_conductance: Conductance | None = None
    conductance: Conductance | None = None
    heat_capacity: HeatCapacity = 0.0
    initial_temperature: Temperature | None = None  # of the coolant node; default: build._initial_coolant_temperature

    @model_validator(mode="after")
    def _coolant(self):
        flow = self.flow_rate is not None
        _check(flow != (self.conductance is not None),
               "give flow_rate and plate_conductance (a coolant flow), or conductance (to the inlet), not both",
               "conductance" if flow else "flow_rate")
        if flow:
            _positive(self.flow_rate, "flow_rate")
            _check(self.plate_conductance is not None, "a coolant flow needs plate_conductance (UA of the plate)",
                   "plate_conductance")
            _positive(self.plate_conductance, "plate_conductance")
        else:
            _positive(self.conductance, "conductance", allow_zero=True)
            _check(self.heat_capacity == 0.0, "heat_capacity needs a coolant flow (flow_rate)", "heat_capacity")
        _check(self.initial_temperature is None or self.heat_capacity > 0.0,
               "initial_temperature is that of the coolant node: it needs heat_capacity > 0", "initial_temperature")
        _check(self.initial_temperature is None or self.initial_temperature > 0,
               "initial_temperature is below absolute zero", "initial_temperature")
        _positive(self.specific_heat, "specific_heat")
        _positive(self.heat_capacity, "heat_capacity", allow_zero=True)
        return self

    def model(self) -> Coolant:
        rate = (self.flow_rate or 0.0) * self.specific_heat
        return Coolant(self.inlet_temperature, rate, self.plate_conductance or 0.0, self.conductance or 0.0,
                       self.heat_capacity)


class CoolingSwitchSpec(_Section):
    on_above: Temperature
    off_below: Temperature

    @model_validator(mode="after")
    def _switch(self):
        _check(self.off_below < self.on_above, "off_below must be below on_above (the hysteresis band)",
               "off_below")
        return self

    def switch(self) -> Switch:
        return Switch(self.on_above, self.off_below)


class FanCurveSpec(_Section):
    """A fan's electrical power over its air speed (a table, linear between its points)."""

    air_speed: SpeedList
    power: PowerList

    @model_validator(mode="after")
    def _curve(self):
        _increasing(self.air_speed, "air_speed")
        _check(len(self.power) == len(self.air_speed),
               f"power has {len(self.power)} values but air_speed has {len(self.air_speed)}", "power")
        _check(all(p >= 0 for p in self.power), "power values must be >= 0", "power")
        return self


class PumpCurveSpec(_Section):
    """A pump's electrical power over the coolant flow rate (a table, linear between its points)."""

    flow_rate: MassFlowList
    power: PowerList

    @model_validator(mode="after")
    def _curve(self):
        _increasing(self.flow_rate, "flow_rate")
        _check(len(self.power) == len(self.flow_rate),
               f"power has {len(self.power)} values but flow_rate has {len(self.flow_rate)}", "power")
        _check(all(p >= 0 for p in self.power), "power values must be >= 0", "power")
        return self


def _curve_power(curve: FanCurveSpec | PumpCurveSpec | float, at: float | None, what: str) -> float:
    """The power of a constant or of a curve at its fan's air speed or pump's flow [W]."""
    if not isinstance(curve, (FanCurveSpec, PumpCurveSpec)):
        return float(curve)
    xs = curve.air_speed if isinstance(curve, FanCurveSpec) else curve.flow_rate
    _check(at is not None, f"a power curve over {what} needs the {what} it runs at", "power")
    _check(xs[0] <= at <= xs[-1], f"the {what} ({at:g}) lies outside the power curve's "
           f"{xs[0]:g}..{xs[-1]:g}: extend the table rather than extrapolate", "power")
    return float(np.interp(at, xs, curve.power))


class FanSpec(CoolingSwitchSpec):
    air_speed: Speed | None = None
    conductance: Conductance = 0.0
    power: Power | FanCurveSpec = 0.0  # drawn from the pack terminals while on

    @model_validator(mode="after")
    def _fan(self):
        _check(self.air_speed is not None or self.conductance > 0.0,
               "a fan needs air_speed (with a forced convection correlation) or conductance", "air_speed")
        _positive(self.air_speed, "air_speed", allow_zero=True)
        _positive(self.conductance, "conductance", allow_zero=True)
        if not isinstance(self.power, FanCurveSpec):
            _positive(self.power, "power", allow_zero=True)
        self.electrical_power()
        return self

    def electrical_power(self) -> float:
        """The power the fan draws while on [W] (its curve at its air speed)."""
        return _curve_power(self.power, self.air_speed, "air_speed")


class PumpSpec(_Section):
    """The coolant pump: a thermostat (both thresholds, or neither: always on) and its electrical power."""

    on_above: Temperature | None = None
    off_below: Temperature | None = None
    power: Power | PumpCurveSpec = 0.0  # drawn from the pack terminals while the coolant flows

    @model_validator(mode="after")
    def _pump(self):
        _check((self.on_above is None) == (self.off_below is None),
               "give both on_above and off_below (a thermostat), or neither (always on)",
               "off_below" if self.off_below is None else "on_above")
        if self.on_above is not None:
            _check(self.off_below < self.on_above, "off_below must be below on_above (the hysteresis band)",
                   "off_below")
        if not isinstance(self.power, PumpCurveSpec):
            _positive(self.power, "power", allow_zero=True)
        return self

    def switch(self) -> Switch | None:
        return None if self.on_above is None else Switch(self.on_above, self.off_below)


class HeaterSpec(_Section):
    power: Power
    on_below: Temperature
    off_above: Temperature
    source: Literal["pack", "external"] = "external"

    @model_validator(mode="after")
    def _heater(self):
        _positive(self.power, "power")
        _check(self.on_below < self.off_above, "on_below must be below off_above (the hysteresis band)",
               "on_below")
        return self


class ThermalSpec(_Section):
    ambient_temperature: Temperature | None = None
    initial_cell_temperature: Temperature | None = None
    initial_sink_temperature: Temperature | None = None
    sink_heat_capacity: HeatCapacity
    cell_to_sink: Conductance
    sink_to_ambient: Conductance | None = None
    convection: ConvectionSpec | None = None
    cell_to_ambient: Conductance = 0.0
    ambient_profile: str | None = None
    radiation: RadiationSpec | None = None
    coolant: CoolantSpec | None = None
    fan: FanSpec | None = None
    heater: HeaterSpec | None = None
    pump: PumpSpec | None = None

    @model_validator(mode="after")
    def _thermal(self):
        _positive(self.sink_heat_capacity, "sink_heat_capacity")
        for key in ("cell_to_sink", "sink_to_ambient", "cell_to_ambient"):
            _positive(getattr(self, key), key, allow_zero=True)
        _check((self.sink_to_ambient is None) != (self.convection is None),
               "give exactly one of sink_to_ambient and [thermal.convection]")
        for key in ("ambient_temperature", "initial_cell_temperature", "initial_sink_temperature"):
            value = getattr(self, key)
            _check(value is None or value > 0, f"{key} is below absolute zero")
        _check(self.ambient_profile is None or self.ambient_temperature is None,
               "give ambient_temperature or ambient_profile, not both", "ambient_profile")
        _check(self.pump is None or self.coolant is not None, "a pump needs [thermal.coolant]", "pump")
        if self.fan is not None and self.fan.air_speed is not None:
            _check(self.convection is not None and self.convection.forced is not None,
                   "a fan's air_speed needs [thermal.convection] with a forced correlation (or give its "
                   "conductance instead)", "fan")
        if self.pump is not None:
            try:
                self.pump_power()
            except KeyedError as exc:
                raise KeyedError(f"pump.{exc.key}", str(exc)) from None
        return self

    def pump_power(self) -> float:
        """The power the pump draws while the coolant flows [W] (its curve at the coolant's flow rate)."""
        if self.pump is None:
            return 0.0
        return _curve_power(self.pump.power, self.coolant.flow_rate if self.coolant else None, "flow_rate")

    def network(self) -> ThermalNetwork:
        convection = self.convection.model() if self.convection is not None else None
        if self.convection is None:
            g_sa = self.sink_to_ambient
        elif convection is None:
            g_sa = convection_conductance(self.convection.coefficient, self.convection.area)
        else:
            g_sa = 0.0
        fan = None if self.fan is None else Fan(self.fan.switch(), self.fan.air_speed, self.fan.conductance,
                                                 self.fan.electrical_power())
        heater = None if self.heater is None else Heater(Switch(self.heater.on_below, self.heater.off_above),
                                                         self.heater.power, self.heater.source == "pack")
        radiation = None if self.radiation is None else Radiation(
            self.radiation.emissivity, self.radiation.area, self.radiation.surroundings_temperature)
        return ThermalNetwork(self.sink_heat_capacity, self.cell_to_sink, g_sa, self.cell_to_ambient,
                              convection=convection, radiation=radiation,
                              coolant=None if self.coolant is None else self.coolant.model(),
                              fan=fan, heater=heater, pump=None if self.pump is None else self.pump.switch(),
                              pump_power=self.pump_power())


class SegmentSpec(_Section):
    name: str | None = None  # shown on the dashboard and in events
    mode: Literal[SEGMENT_MODES] | None = None  # the load modes and the composite ones (physics.loads)
    value: Any = None
    duration: Duration | None = None
    voltage_below: Voltage | None = None
    voltage_above: Voltage | None = None
    soc_below: Soc | None = None
    soc_above: Soc | None = None
    current: Current | None = None
    voltage: Voltage | None = None
    cutoff_current: Current | None = None
    file: str | None = None
    ambient_temperature: Temperature | None = None

    @model_validator(mode="after")
    def _segment(self):
        _positive(self.duration, "duration")
        _check(self.ambient_temperature is None or self.ambient_temperature > 0,
               "ambient_temperature is below absolute zero", "ambient_temperature")
        _check(self.name is None or self.name.strip() != "", "name is empty: give a name or drop the key", "name")
        if self.file is not None:
            _check(self.mode is None and self.value is None and self.duration is None,
                   "a file segment takes its mode, values and times from the file: drop mode, value and duration")
            _check(not self.file.strip() == "", "file is empty")
            _check(self.ambient_temperature is None, "a file segment takes its ambient from the file's "
                   f"{AMBIENT_COLUMN} column", "ambient_temperature")
            return self
        _check(self.mode is not None, f"give mode ({', '.join(SEGMENT_MODES)}) or file")
        if self.mode == "cccv":
            _check(self.value is None, "a cccv segment takes current, voltage and cutoff_current, not value")
            _check(self.current is not None and self.voltage is not None and self.cutoff_current is not None,
                   "a cccv segment needs current, voltage and cutoff_current")
            _check(self.current < 0, f"current is the charge current and must be negative, got {self.current:g} A",
                   "current")
            _positive(self.voltage, "voltage")
            _positive(self.cutoff_current, "cutoff_current")
            _check(self.cutoff_current < abs(self.current),
                   "cutoff_current must be smaller than the charge current")
            return self
        for key in ("current", "voltage", "cutoff_current"):
            _check(getattr(self, key) is None, f"{key} belongs to a cccv segment; use value for mode {self.mode}")
        _check(self.duration is not None, f"a {self.mode} segment needs a duration", "duration")
        if self.mode not in LOAD_MODES:  # rest, soak: no demand
            _check(self.value is None, f"a {self.mode} segment takes no value")
            if self.mode == "soak":
                for key in ("voltage_below", "voltage_above", "soc_below", "soc_above"):
                    _check(getattr(self, key) is None, "a soak segment takes no end conditions", key)
            return self
        _check(self.value is not None, f"a {self.mode} segment needs a value", "value")
        load = LOAD_MODES[self.mode]
        try:
            value = to_si(self.value, load.unit, load.unit)
        except ValueError as exc:
            raise KeyedError("value", str(exc), form=True) from None
        if load.positive:
            _positive(value, "value")
        object.__setattr__(self, "value", value)
        return self


class ProfileSpec(_Section):
    repeat: Count = 1
    scale: Dimensionless = 1.0
    segment: list[SegmentSpec]

    @model_validator(mode="after")
    def _profile(self):
        _check(len(self.segment) > 0, "the profile has no segments")
        _check(self.scale > 0, f"scale must be > 0, got {self.scale:g}", "scale")
        modes = [seg.mode for seg in self.segment]
        soaks = [i for i, mode in enumerate(modes) if mode == "soak"]
        _check(soaks == list(range(len(soaks))), "soak segments come first, before the mission's segments",
               "segment")
        _check(len(soaks) < len(modes), "the profile has only soak segments: add the mission", "segment")
        return self


class LimitTableSpec(_Section):
    """A limit or an allowance over cell temperature and SoC, in one of four forms: ``value`` (a
    constant; a bare quantity for the key stands for it), ``temperature`` + ``values`` (one value per
    temperature), ``soc`` + ``values`` (one per SoC), or ``soc`` + ``temperature`` + ``values`` (one row
    over SoC per temperature). Bilinear between the breakpoints, held at the edge values beyond them;
    every value >= 0."""

    #: The unit of a bare number (set by each kind of limit).
    unit: ClassVar[str] = ""
    value: float | None = None  # each kind of limit gives its unit (and the values' unit) to these two
    values: list[list[float]] | None = None
    soc: SocList | None = None
    temperature: TemperatureList | None = None

    @model_validator(mode="before")
    @classmethod
    def _constant(cls, data: Any) -> Any:
        """A bare quantity for the key is the table's ``value`` (read here, so its error names the key)."""
        if isinstance(data, dict):
            return data
        value = to_si(data, cls.unit, cls.unit)
        if value < 0.0:
            raise ValueError(f"a limit must be >= 0 (a negative allowance is none at all: give 0), got {data!r}")
        return {"value": value}

    @model_validator(mode="after")
    def _table(self):
        value, values = self.value, self.values
        if value is not None:
            _check(values is None and self.soc is None and self.temperature is None,
                   "give value (a constant), or a table of values over temperature and / or soc, not both", "value")
            _check(value >= 0.0, f"the limit must be >= 0, got {value:g} {self.unit}".rstrip(), "value")
            return self
        _check(values is not None and (self.soc is not None or self.temperature is not None),
               "give value (a constant), or values with temperature and / or soc (a table)", "values")
        for axis in ("soc", "temperature"):
            grid = getattr(self, axis)
            if grid is not None:
                _check(all(b > a for a, b in itertools.pairwise(grid)),
                       f"{axis} breakpoints must be strictly increasing", axis)
        if self.soc is not None:
            _check(self.soc[0] >= 0.0 and self.soc[-1] <= 1.0, "soc values must lie within 0..1", "soc")
        _table_rows(values, self.soc, self.temperature)
        for r, row in enumerate(values):
            for k, x in enumerate(row):
                where = f"row {r + 1}, item {k + 1}" if len(values) > 1 else f"item {k + 1}"
                _check(x >= 0.0, f"values {where} is {x:g}: a limit must be >= 0 (a negative allowance is none "
                       "at all: give 0)", "values")
        return self

    def table(self) -> LimitTable:
        """The limit for the engine, in SI units (one row per temperature)."""
        value, values = self.value, self.values
        if value is not None:
            return LimitTable.constant(value)
        rows = _table_rows(values, self.soc, self.temperature)
        soc = tuple(self.soc) if self.soc is not None else (0.0,)
        temperature = tuple(self.temperature) if self.temperature is not None else (REFERENCE_TEMPERATURE,)
        return LimitTable(soc, temperature, tuple(float(x) for row in rows for x in row))


def _table_rows(values: list[list[float]], soc: list[float] | None, temperature: list[float] | None) -> list:
    """A limit table's values as one row over SoC per temperature; :class:`KeyedError` where the sizes disagree."""
    if soc is None:  # over temperature: one value per temperature
        flat = [x for row in values for x in row]
        _check(len(values) == 1 and len(flat) == len(temperature),
               f"values needs one value per temperature ({len(temperature)}), got {len(flat)}", "values")
        return [[x] for x in flat]
    if temperature is None:  # over SoC: one row
        _check(len(values) == 1 and len(values[0]) == len(soc),
               f"values needs one value per soc point ({len(soc)}), got {sum(len(r) for r in values)}", "values")
        return values
    _check(len(values) == len(temperature), f"values has {len(values)} rows but temperature has "
           f"{len(temperature)} values: give one row over soc per temperature", "values")
    for r, row in enumerate(values):
        _check(len(row) == len(soc), f"values row {r + 1} has {len(row)} values but soc has {len(soc)}", "values")
    return values


class CurrentLimitSpec(LimitTableSpec):
    """A current of one cell [A] over its temperature and SoC."""

    unit: ClassVar[str] = "A"
    value: Current | None = None
    values: Annotated[list[list[float]], _quantity_table("A"), Unit("A", "A")] | None = None


class RateLimitSpec(LimitTableSpec):
    """A C-rate of one cell (its current over its capacity in Ah) [1/h] over its temperature and SoC."""

    unit: ClassVar[str] = ""
    value: Dimensionless | None = None
    values: Annotated[list[list[float]], _quantity_table(""), Unit("", "")] | None = None


class PowerLimitSpec(LimitTableSpec):
    """A power of the pack [W] over the cells' temperature and SoC (read at each cell, the least binds)."""

    unit: ClassVar[str] = "W"
    value: Power | None = None
    values: Annotated[list[list[float]], _quantity_table("W"), Unit("W", "W")] | None = None


def _current_or_rate(spec: BaseModel, current: str, rate: str, capacity: float) -> LimitTable | None:
    """A current limit given in amperes or as a C-rate (times the cell's capacity [C]), for the engine [A]."""
    if getattr(spec, current) is not None:
        return getattr(spec, current).table()
    if getattr(spec, rate) is not None:
        return getattr(spec, rate).table().scaled(capacity / SECONDS_PER_HOUR)
    return None


class LimitsSpec(_Section):
    cell_temperature_max: Temperature = ZERO_CELSIUS + 60.0  # 60 degC, common practice for Li-ion cells
    charge_temperature_min: Temperature = ZERO_CELSIUS  # no charging below 0 degC (lithium plating; common practice)
    discharge_current_max: CurrentLimitSpec | None = None
    discharge_c_rate_max: RateLimitSpec | None = None
    charge_current_max: CurrentLimitSpec | None = None
    charge_c_rate_max: RateLimitSpec | None = None
    discharge_power_max: PowerLimitSpec | None = None
    charge_power_max: PowerLimitSpec | None = None
    discharge_temperature_min: Temperature | None = None
    charge_temperature_max: Temperature | None = None
    sink_temperature_max: Temperature | None = None

    @model_validator(mode="after")
    def _limits(self):
        _check(self.charge_temperature_min < self.cell_temperature_max,
               f"charge_temperature_min ({self.charge_temperature_min - ZERO_CELSIUS:.4g} degC) must be below "
               f"cell_temperature_max ({self.cell_temperature_max - ZERO_CELSIUS:.4g} degC)", "charge_temperature_min")
        for direction in ("discharge", "charge"):
            _check(getattr(self, f"{direction}_current_max") is None or getattr(self, f"{direction}_c_rate_max")
                   is None, f"give {direction}_current_max or {direction}_c_rate_max, not both",
                   f"{direction}_c_rate_max")
        if self.discharge_temperature_min is not None:
            _check(self.discharge_temperature_min < self.cell_temperature_max,
                   f"discharge_temperature_min ({self.discharge_temperature_min - ZERO_CELSIUS:.4g} degC) must be "
                   f"below cell_temperature_max ({self.cell_temperature_max - ZERO_CELSIUS:.4g} degC)",
                   "discharge_temperature_min")
        if self.charge_temperature_max is not None:
            _check(self.charge_temperature_max > self.charge_temperature_min,
                   f"charge_temperature_max ({self.charge_temperature_max - ZERO_CELSIUS:.4g} degC) must be above "
                   f"charge_temperature_min ({self.charge_temperature_min - ZERO_CELSIUS:.4g} degC)",
                   "charge_temperature_max")
        return self

    def limits(self, capacity: float) -> Limits:
        """The engine's limits, C-rates in amperes for a cell of ``capacity`` [C]."""
        return Limits(
            self.cell_temperature_max, self.charge_temperature_min,
            discharge_current_max=_current_or_rate(self, "discharge_current_max", "discharge_c_rate_max", capacity),
            charge_current_max=_current_or_rate(self, "charge_current_max", "charge_c_rate_max", capacity),
            discharge_power_max=None if self.discharge_power_max is None else self.discharge_power_max.table(),
            charge_power_max=None if self.charge_power_max is None else self.charge_power_max.table(),
            discharge_temperature_min=self.discharge_temperature_min,
            charge_temperature_max=self.charge_temperature_max, sink_temperature_max=self.sink_temperature_max)


#: The default cutoff of the derating, a twentieth of the 1 C current (where a CC-CV charge ends too; common practice).
DEFAULT_CUTOFF_C_RATE = 1.0 / 20.0


class DeratingSpec(_Section):
    """The battery management system's derating: allowances over the cells' state, a ramp, the voltage limiter."""

    discharge_current: CurrentLimitSpec | None = None
    discharge_c_rate: RateLimitSpec | None = None
    charge_current: CurrentLimitSpec | None = None
    charge_c_rate: RateLimitSpec | None = None
    discharge_power: PowerLimitSpec | None = None
    charge_power: PowerLimitSpec | None = None
    ramp_rate: Annotated[float, _quantity("A/s"), Unit("A/s", "A/s")] | None = None
    voltage_limiter: bool = True
    cutoff_current: Current | None = None

    @model_validator(mode="after")
    def _derating(self):
        for direction in ("discharge", "charge"):
            _check(getattr(self, f"{direction}_current") is None or getattr(self, f"{direction}_c_rate") is None,
                   f"give {direction}_current or {direction}_c_rate, not both", f"{direction}_c_rate")
        _positive(self.ramp_rate, "ramp_rate")
        _positive(self.cutoff_current, "cutoff_current", allow_zero=True)
        return self

    def derating(self, capacity: float) -> Derating:
        """The engine's derating, C-rates in amperes for a cell of ``capacity`` [C]; the cutoff C/20 by default."""
        cutoff = self.cutoff_current if self.cutoff_current is not None else \
            DEFAULT_CUTOFF_C_RATE * capacity / SECONDS_PER_HOUR
        return Derating(
            discharge_current=_current_or_rate(self, "discharge_current", "discharge_c_rate", capacity),
            charge_current=_current_or_rate(self, "charge_current", "charge_c_rate", capacity),
            discharge_power=None if self.discharge_power is None else self.discharge_power.table(),
            charge_power=None if self.charge_power is None else self.charge_power.table(),
            ramp_rate=self.ramp_rate or 0.0, voltage_limiter=self.voltage_limiter, cutoff_current=cutoff)


class StressSpec(_Section):
    activation_energy: Energy = StressSettings.activation_energy
    reference_temperature: Temperature = StressSettings.reference_temperature
    hot_temperature: Temperature = StressSettings.hot_temperature

    @model_validator(mode="after")
    def _stress(self):
        _activation_energy(self.activation_energy)
        for key in ("reference_temperature", "hot_temperature"):
            _check(getattr(self, key) > 0, f"{key} is below absolute zero", key)
        return self

    def settings(self) -> StressSettings:
        return StressSettings(self.activation_energy, self.reference_temperature, self.hot_temperature)


class SolverSpec(_Section):
    backend: str = "cvode"
    rtol: Dimensionless = 1e-6
    output_interval: Duration = 1.0
    atol_soc: Dimensionless | None = None
    atol_voltage: Voltage | None = None
    atol_temperature: Kelvin | None = None
    max_steps: Count = 50_000
    scipy_method: Literal["LSODA", "BDF", "Radau", "RK45", "DOP853", "RK23"] = "LSODA"

    @model_validator(mode="after")
    def _solver(self):
        _check(self.backend in BACKENDS, f"unknown backend {self.backend!r}; valid: {', '.join(BACKENDS)}",
               "backend")
        _check(MIN_RTOL <= self.rtol < 0.1, f"rtol must lie within {MIN_RTOL:g}..0.1, got {self.rtol:g}", "rtol")
        _check(self.max_steps <= MAX_STEPS, f"max_steps must be at most {MAX_STEPS}", "max_steps")
        _positive(self.output_interval, "output_interval")
        for key in ("atol_soc", "atol_voltage", "atol_temperature"):
            _positive(getattr(self, key), key)
        return self

    def options(self) -> SolverOptions:
        extra = {k: getattr(self, k) for k in ("atol_soc", "atol_voltage", "atol_temperature")
                 if getattr(self, k) is not None}
        return SolverOptions(backend=self.backend, rtol=self.rtol, output_interval=self.output_interval,
                             max_steps=self.max_steps, scipy_method=self.scipy_method, **extra)


class CaseSpec(BaseModel):
    """A named variant for the compare command: dotted keys to values."""

    model_config = ConfigDict(extra="allow", frozen=True)
    name: str


class OptionSpec(BaseModel):
    """One option of a design group (``[[option.cooling]]``): a name, dotted keys to values, and attributes.

    The attributes (``cost``, ``added_mass``: numbers with or without a unit) are read, with the
    names and the overrides, by :mod:`thermoelec.scenario.options`.
    """

    model_config = ConfigDict(extra="allow", frozen=True)
    name: str
    description: str = ""
    attributes: dict[str, Any] = {}

    @model_validator(mode="after")
    def _option(self):
        _check(self.name.strip() != "", "name is empty: every option needs a name", "name")
        return self


class ReviewSpec(_Section):
    """The design-review question of a sweep (``[review]``); read by :mod:`thermoelec.analysis.sweep.review`."""

    requirement: str | None = None  # "METRIC >= VALUE at KEY = VALUE", e.g. "temperature_margin_K >= 2 at ..."
    group: str | None = None  # the option group compared (default: the only one)
    over: str = "thermal.ambient_temperature"  # the key whose highest passing value is reported
    rank_by: str | None = None  # an attribute; the least first
    refine: bool = False  # refine each highest passing value by the design search
def _all_optional(model: type[_Section], name: str) -> type[_Section]:
    """``model`` with every key optional (default None), the same types, units and checks."""
    fields = {key: (Annotated[field.annotation | None, *field.metadata] if field.metadata else field.annotation | None,
                    None) for key, field in model.model_fields.items()}
    validators = {f"_check_{key}": model_validator(mode="after")(decorator.func)
                  for key, decorator in model.__pydantic_decorators__.model_validators.items()}
    return create_model(name, __base__=_Section, __validators__=validators, __doc__=model.__doc__, **fields)


#: A cell file's ``[cell]`` (``include = "cell.toml"``, ``fit --cell``): the scenario's keys, units and
#: checks, each key optional (the scenario that includes it gives the rest).
CellFileCell = _all_optional(CellSpec, "CellFileCell")


class CellFileSpec(_Section):
    """A cell file: one ``[cell]`` table, validated as the scenario's with every key optional."""

    cell: CellFileCell  # type: ignore[valid-type]


class ScenarioSpec(_Section):
    format: Literal[FORMAT_VERSION]
    scenario: ScenarioInfo
    cell: CellSpec
    pack: PackSpec = PackSpec()
    thermal: ThermalSpec
    profile: ProfileSpec
    limits: LimitsSpec = LimitsSpec()
    derating: DeratingSpec | None = None
    solver: SolverSpec = SolverSpec()
    stress: StressSpec = StressSpec()
    sweep: dict[str, Any] = {}
    case: list[CaseSpec] = []
    option: dict[str, list[OptionSpec]] = {}
    review: ReviewSpec | None = None

    @model_validator(mode="after")
    def _resolved_coolant(self):
        """A coolant path needs a coolant flow, and a massless one (it is quasi-steady along its path)."""
        if self.pack.thermal is None or self.pack.thermal.coolant_order is None:
            return self
        coolant = self.thermal.coolant
        key = ("pack", "thermal", "coolant_order")
        _check(coolant is not None and coolant.flow_rate is not None,
               "a coolant path needs [thermal.coolant] with flow_rate and plate_conductance", key)
        _check(coolant.heat_capacity == 0.0, "a coolant path takes a massless coolant (its transit is quick "
               "against the cells): drop thermal.coolant.heat_capacity", key)
        return self




def _leaf_types(annotation: Any) -> list[Any]:
    """The alternatives of an annotation, Optional and Annotated unwrapped."""
    import types
    import typing

    origin = typing.get_origin(annotation)
    if origin is Annotated:
        return _leaf_types(typing.get_args(annotation)[0])
    if origin in (typing.Union, types.UnionType):
        return [t for a in typing.get_args(annotation) if a is not type(None) for t in _leaf_types(a)]
    return [annotation]


def key_kind(parts: list[str | int]) -> str | None:
    """What the schema takes at a key path (``['thermal', 'fan', 'air_speed']``, list items as ints).

    Returns
    -------
    str or None
        ``"number"``, ``"text"`` (a name, a file, a choice), ``"table"``, ``"list"`` or ``"other"``;
        None for a path the schema does not declare.
    """
    import typing

    node: Any = ScenarioSpec
    for part in parts:
        alternatives = _leaf_types(node)
        if isinstance(part, int):
            lists = [a for a in alternatives if typing.get_origin(a) is list]
            if not lists:
                return None
            node = typing.get_args(lists[0])[0]
            continue
        models = [a for a in alternatives if isinstance(a, type) and issubclass(a, BaseModel)]
        if not models or part not in models[0].model_fields:
            return None
        node = models[0].model_fields[part].annotation
    kinds = set()
    for leaf in _leaf_types(node):
        if leaf in (float, int) or leaf is Any:
            kinds.add("number")
        elif leaf is str or typing.get_origin(leaf) is typing.Literal:
            kinds.add("text")
        elif isinstance(leaf, type) and issubclass(leaf, BaseModel):
            kinds.add("table")
        elif typing.get_origin(leaf) is list:
            kinds.add("list")
        else:
            kinds.add("other")
    for kind in ("number", "text", "table", "list"):
        if kind in kinds:
            return kind
    return "other"
