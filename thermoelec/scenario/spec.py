"""Scenario files (TOML, format 1): schema, units, validation, overrides.

This is the only module that knows file formats and units. It reads a scenario
(and the CSV profiles it names), converts every quantity to SI with pint,
validates it with pydantic, and builds a :class:`thermoelec.engine.model.Problem`.
Every problem is reported as a :class:`ScenarioError` naming the file, the
dotted key (list items counted from 1, as ``profile.segment[2].value``) and,
where the text shows it, the line.
"""

from __future__ import annotations

import hashlib
import itertools
import math
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path
from typing import Annotated, Any, Literal

import numpy as np
from pydantic import BaseModel, BeforeValidator, ConfigDict, ValidationError, model_validator

from thermoelec.engine.backends import BACKENDS
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Limits, Problem, StressSettings
from thermoelec.engine.profile import Segment, expand_repeats, segments_from_series
from thermoelec.physics.cell import Cell, CellGeometry, Pack, RCPair, ResistanceLaw
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

__all__ = ["Scenario", "ScenarioError", "apply_override", "load_scenario", "scenario_from_dict"]

FORMAT_VERSION = 1


class ScenarioError(ValueError):
    """An invalid scenario or profile: one message naming the file and the key."""

    def __init__(self, file: str, key: str, message: str, line: int | None = None):
        self.file, self.key, self.message, self.line = file, key, message, line
        where = f"{file}, line {line}" if line else file
        super().__init__(f"{where}: {key}: {message}" if key else f"{where}: {message}")


# ---------------------------------------------------------------------------
# Quantities
# ---------------------------------------------------------------------------

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@lru_cache(maxsize=1)
def _registry():
    import pint

    return pint.UnitRegistry()


def to_si(value: Any, default_unit: str, si_unit: str) -> float:
    """A scenario quantity (bare number in ``default_unit`` or ``"value unit"``) in ``si_unit``.

    Pure, so repeated conversions (a sweep validates thousands of variants of one
    file) come from a cache.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ValueError(f"expected a number or a quantity string like '1.5 {default_unit}', got {value!r}")
    return _to_si_cached(value, type(value), default_unit, si_unit)


@lru_cache(maxsize=65536)
def _to_si_cached(value: Any, kind: type, default_unit: str, si_unit: str) -> float:
    return _to_si(value, default_unit, si_unit)


def _to_si(value: Any, default_unit: str, si_unit: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ValueError(f"expected a number or a quantity string like '1.5 {default_unit}', got {value!r}")
    if isinstance(value, str):
        match = _NUMBER.match(value)
        if not match:
            raise ValueError(f"{value!r} is not a quantity: write a number and a unit, like '1.5 {default_unit}'")
        number, unit = float(match.group(1)), match.group(2) or default_unit
    else:
        number, unit = float(value), default_unit
    if not math.isfinite(number):
        raise ValueError(f"{value!r} is not a finite number")
    import pint

    ureg = _registry()
    try:
        quantity = ureg.Quantity(number, unit)
    except (pint.UndefinedUnitError, pint.errors.DefinitionSyntaxError, AttributeError, TypeError, ValueError):
        raise ValueError(f"unknown unit {unit!r} in {value!r}") from None
    try:
        return float(quantity.to(si_unit).magnitude)
    except pint.DimensionalityError:
        raise ValueError(f"{value!r} has the wrong dimension: expected a quantity in {default_unit}") from None


def _quantity(default_unit: str, si_unit: str | None = None):
    si = si_unit or default_unit
    return BeforeValidator(lambda v: to_si(v, default_unit, si))


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


Soc = Annotated[float, _quantity("", "")]
Voltage = Annotated[float, _quantity("V")]
Current = Annotated[float, _quantity("A")]
Power = Annotated[float, _quantity("W")]
Resistance = Annotated[float, _quantity("ohm")]
Capacity = Annotated[float, _quantity("Ah", "C")]
Mass = Annotated[float, _quantity("kg")]
SpecificHeat = Annotated[float, _quantity("J/kg/K")]
Temperature = Annotated[float, _quantity("degC", "K")]
HeatCapacity = Annotated[float, _quantity("J/K")]
Conductance = Annotated[float, _quantity("W/K")]
Coefficient = Annotated[float, _quantity("W/m^2/K")]
Area = Annotated[float, _quantity("m^2")]
Energy = Annotated[float, _quantity("J/mol")]
Length = Annotated[float, _quantity("m")]
Speed = Annotated[float, _quantity("m/s")]
MassFlow = Annotated[float, _quantity("kg/s")]
Conductivity = Annotated[float, _quantity("W/m/K")]
Capacitance = Annotated[float, _quantity("F")]
Duration = Annotated[float, _quantity("s")]
Dimensionless = Annotated[float, _quantity("", "")]
SocList = Annotated[list[float], _quantity_list("", "")]
VoltageList = Annotated[list[float], _quantity_list("V")]
EntropicList = Annotated[list[float], _quantity_list("V/K")]
TemperatureList = Annotated[list[float], _quantity_list("degC", "K")]
ResistanceTable = Annotated[list[list[float]], _quantity_table("ohm")]
Count = Annotated[int, BeforeValidator(_positive_int)]


class KeyedError(ValueError):
    """A validation error that knows which key of its section is at fault."""

    def __init__(self, key: str | None, message: str):
        super().__init__(message)
        self.key = key


def _check(condition: bool, message: str, key: str | None = None) -> None:
    if not condition:
        raise KeyedError(key, message)


def _increasing(values: list[float], what: str) -> None:
    _check(all(b > a for a, b in itertools.pairwise(values)),
           f"{what} must be strictly increasing", what)


def _positive(value: float | None, what: str, allow_zero: bool = False) -> None:
    if value is None:
        return
    if allow_zero:
        _check(value >= 0.0, f"{what} must be >= 0", what)
    else:
        _check(value > 0.0, f"{what} must be > 0", what)


# ---------------------------------------------------------------------------
# Schema (pydantic), SI values after validation
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
    reference_temperature: Temperature = 298.15

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
    reference_temperature: Temperature = 298.15

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
        if self.activation_energy is not None:
            _check(self.activation_energy >= 0, "activation_energy must be >= 0")
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
    reference_temperature: Temperature = 298.15

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
        _check(self.voltage_min < self.voltage_max,
               f"voltage_min ({self.voltage_min:g} V) must be below voltage_max ({self.voltage_max:g} V)",
               "voltage_min")
        _check(0.0 <= self.initial_soc <= 1.0, f"initial_soc must lie within 0..1, got {self.initial_soc:g}",
               "initial_soc")
        return self


    def geometry(self) -> CellGeometry | None:
        if self.thermal_conductivity is None:
            return None
        return CellGeometry(self.thermal_conductivity, **{k: getattr(self, k) for k in _GEOMETRY_KEYS})


_GEOMETRY_KEYS = ("diameter", "length", "thickness", "width", "height")


class PackSpec(_Section):
    series: Count = 1
    parallel: Count = 1
    interconnect_resistance: Resistance = 0.0

    @model_validator(mode="after")
    def _pack(self):
        _positive(self.interconnect_resistance, "interconnect_resistance", allow_zero=True)
        return self


class ConvectionSpec(_Section):
    """A given coefficient, or correlations from geometry and air speed."""

    area: Area
    coefficient: Coefficient | None = None
    forced: Literal["cylinder_crossflow", "flat_plate"] | None = None
    natural: Literal["horizontal_cylinder", "vertical_plate", "horizontal_plate_up",
                     "horizontal_plate_down"] | None = None
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


class FanSpec(CoolingSwitchSpec):
    air_speed: Speed | None = None
    conductance: Conductance = 0.0

    @model_validator(mode="after")
    def _fan(self):
        _check(self.air_speed is not None or self.conductance > 0.0,
               "a fan needs air_speed (with a forced convection correlation) or conductance", "air_speed")
        _positive(self.air_speed, "air_speed", allow_zero=True)
        _positive(self.conductance, "conductance", allow_zero=True)
        return self


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
    pump: CoolingSwitchSpec | None = None

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
        return self

    def network(self) -> ThermalNetwork:
        convection = self.convection.model() if self.convection is not None else None
        if self.convection is None:
            g_sa = self.sink_to_ambient
        elif convection is None:
            g_sa = convection_conductance(self.convection.coefficient, self.convection.area)
        else:
            g_sa = 0.0
        fan = None if self.fan is None else Fan(self.fan.switch(), self.fan.air_speed, self.fan.conductance)
        heater = None if self.heater is None else Heater(Switch(self.heater.on_below, self.heater.off_above),
                                                         self.heater.power, self.heater.source == "pack")
        radiation = None if self.radiation is None else Radiation(
            self.radiation.emissivity, self.radiation.area, self.radiation.surroundings_temperature)
        return ThermalNetwork(self.sink_heat_capacity, self.cell_to_sink, g_sa, self.cell_to_ambient,
                              convection=convection, radiation=radiation,
                              coolant=None if self.coolant is None else self.coolant.model(),
                              fan=fan, heater=heater, pump=None if self.pump is None else self.pump.switch())


_SEGMENT_VALUE_UNITS = {"current": "A", "power": "W", "resistance": "ohm", "voltage": "V"}


class SegmentSpec(_Section):
    mode: Literal["current", "power", "resistance", "voltage", "rest", "cccv", "soak"] | None = None
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
        if self.file is not None:
            _check(self.mode is None and self.value is None and self.duration is None,
                   "a file segment takes its mode, values and times from the file: drop mode, value and duration")
            _check(not self.file.strip() == "", "file is empty")
            _check(self.ambient_temperature is None, "a file segment takes its ambient from the file's "
                   "ambient_temperature_degC column", "ambient_temperature")
            return self
        _check(self.mode is not None, "give mode (current, power, resistance, voltage, rest, cccv, soak) or file")
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
        if self.mode in ("rest", "soak"):
            _check(self.value is None, f"a {self.mode} segment takes no value")
            if self.mode == "soak":
                for key in ("voltage_below", "voltage_above", "soc_below", "soc_above"):
                    _check(getattr(self, key) is None, "a soak segment takes no end conditions", key)
            return self
        _check(self.value is not None, f"a {self.mode} segment needs a value", "value")
        unit = _SEGMENT_VALUE_UNITS[self.mode]
        try:
            value = to_si(self.value, unit, unit)
        except ValueError as exc:
            raise KeyedError("value", str(exc)) from None
        if self.mode in ("resistance", "voltage"):
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


class LimitsSpec(_Section):
    cell_temperature_max: Temperature = 333.15
    charge_temperature_min: Temperature = 273.15


class StressSpec(_Section):
    activation_energy: Energy = StressSettings.activation_energy
    reference_temperature: Temperature = StressSettings.reference_temperature
    hot_temperature: Temperature = StressSettings.hot_temperature

    @model_validator(mode="after")
    def _stress(self):
        _positive(self.activation_energy, "activation_energy", allow_zero=True)
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
    atol_temperature: Annotated[float, _quantity("K")] | None = None
    max_steps: Count = 50_000
    scipy_method: Literal["LSODA", "BDF", "Radau", "RK45", "DOP853", "RK23"] = "LSODA"

    @model_validator(mode="after")
    def _solver(self):
        _check(self.backend in BACKENDS, f"unknown backend {self.backend!r}; valid: {', '.join(BACKENDS)}",
               "backend")
        _check(0 < self.rtol < 0.1, f"rtol must lie within 0..0.1, got {self.rtol:g}", "rtol")
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


class ScenarioSpec(_Section):
    format: Literal[1]
    scenario: ScenarioInfo
    cell: CellSpec
    pack: PackSpec = PackSpec()
    thermal: ThermalSpec
    profile: ProfileSpec
    limits: LimitsSpec = LimitsSpec()
    solver: SolverSpec = SolverSpec()
    stress: StressSpec = StressSpec()
    sweep: dict[str, Any] = {}
    case: list[CaseSpec] = []


# ---------------------------------------------------------------------------
# Errors: pydantic locations -> dotted keys and lines
# ---------------------------------------------------------------------------


def dotted(loc: tuple) -> str:
    """``('profile', 'segment', 2, 'value')`` -> ``profile.segment[3].value`` (items counted from 1)."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part + 1}]"
        elif part in ("float", "function-before", "function-after", "list[float]", "ResistanceSpec") or \
                str(part).startswith(("function-", "constrained-")):
            continue
        else:
            out += ("." if out else "") + str(part)
    return out


_HEADER = re.compile(r"^\s*(\[\[?)\s*([^\]]+?)\s*\]\]?\s*(#.*)?$")
_KEY = re.compile(r"^\s*(\"[^\"]+\"|'[^']+'|[A-Za-z0-9_\-]+)\s*=")


def find_line(text: str, loc: tuple) -> int | None:
    """Best-effort line number of a key in TOML text (the table header when the key is missing)."""
    keys = [p for p in loc if isinstance(p, str)]
    indices = [p for p in loc if isinstance(p, int)]
    counters: dict[str, int] = {}
    table: list = []
    best, best_len = None, 0
    for number, line in enumerate(text.splitlines(), start=1):
        header = _HEADER.match(line)
        if header:
            name = [k.strip().strip('"') for k in header.group(2).split(".")]
            if header.group(1) == "[[":
                joined = ".".join(name)
                counters[joined] = counters.get(joined, -1) + 1
                table = [*name, counters[joined]]
            else:
                table = name
            path = table
        else:
            key = _KEY.match(line)
            if not key:
                continue
            path = [*table, key.group(1).strip("\"'")]
        flat_keys = [p for p in path if isinstance(p, str)]
        flat_idx = [p for p in path if isinstance(p, int)]
        if flat_keys == keys[:len(flat_keys)] and flat_idx == indices[:len(flat_idx)] and len(path) > best_len:
            best, best_len = number, len(path)
    return best


def _clean(msg: str) -> str:
    for prefix in ("Value error, ", "Assertion failed, "):
        if msg.startswith(prefix):
            msg = msg[len(prefix):]
    if msg == "Field required":
        return "required key is missing"
    return msg


def _first_error(exc: ValidationError, file: str, text: str | None) -> ScenarioError:
    errors = exc.errors()
    # prefer an error that names a specific key over a union's alternatives
    err = errors[0]
    loc = tuple(err["loc"])
    msg = _clean(err["msg"])
    cause = (err.get("ctx") or {}).get("error")
    if isinstance(cause, KeyedError) and cause.key:
        loc = (*loc, cause.key)
        msg = str(cause)
    if err["type"] == "extra_forbidden":
        msg = f"unknown key {loc[-1]!r}"
        parent = _model_at(ScenarioSpec, loc[:-1])
        if parent is not None:
            msg += f" (valid keys: {', '.join(parent.model_fields)})"
    elif err["type"] == "literal_error":
        msg = f"{err['input']!r} is not allowed: {msg[len('Input should be '):] if msg.startswith('Input') else msg}"
    more = len(errors) - 1
    if more:
        msg += f" (and {more} more problem{'s' if more > 1 else ''})"
    line = find_line(text, loc) if text else None
    return ScenarioError(file, dotted(loc), msg, line)


def _model_at(model: type[BaseModel], loc: tuple) -> type[BaseModel] | None:
    """The pydantic model class found at a location, for listing its valid keys."""
    import typing

    current: Any = model
    for part in loc:
        if isinstance(part, int):
            continue
        if not (isinstance(current, type) and issubclass(current, BaseModel)) or part not in current.model_fields:
            return None
        annotation = current.model_fields[part].annotation
        candidates = [annotation, *typing.get_args(annotation)]
        nxt = None
        for c in candidates:
            for cc in [c, *typing.get_args(c)]:
                if isinstance(cc, type) and issubclass(cc, BaseModel):
                    nxt = cc
        current = nxt
    return current if isinstance(current, type) and issubclass(current, BaseModel) else None


# ---------------------------------------------------------------------------
# Overrides by dotted path
# ---------------------------------------------------------------------------

_PART = re.compile(r"([^.\[\]]+)|\[(\d+)\]")


def split_path(path: str) -> list[str | int]:
    """``profile.segment[2].value`` -> ``['profile', 'segment', 1, 'value']`` (0-based inside)."""
    parts: list[str | int] = []
    pos = 0
    for match in _PART.finditer(path):
        between = path[pos:match.start()]
        if between not in ("", "."):
            raise ValueError(f"cannot read the key path {path!r}")
        pos = match.end()
        if match.group(2) is not None:
            index = int(match.group(2))
            if index < 1:
                raise ValueError(f"list items are counted from 1 in {path!r}")
            parts.append(index - 1)
        else:
            parts.append(match.group(1).strip().strip('"'))
    if not parts or path[pos:] not in ("",):
        raise ValueError(f"cannot read the key path {path!r}")
    return parts


def parse_value(text: str) -> Any:
    """A command-line value: TOML syntax when it parses (``1.5``, ``[1, 2]``, ``"x"``), else the bare string."""
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def apply_override(data: dict, path: str, value: Any) -> None:
    """Set ``value`` at a dotted ``path`` in raw scenario data (in place); a missing table is created."""
    parts = split_path(path)
    node: Any = data
    for i, part in enumerate(parts[:-1]):
        nxt = parts[i + 1]
        if isinstance(part, int):
            if not isinstance(node, list) or part >= len(node):
                raise ValueError(f"{dotted(tuple(parts[:i + 1]))} does not exist")
            node = node[part]
        else:
            if not isinstance(node, dict):
                raise ValueError(f"{dotted(tuple(parts[:i]))} is not a table")
            if part not in node:
                node[part] = [] if isinstance(nxt, int) else {}
            node = node[part]
    last = parts[-1]
    if isinstance(last, int):
        if not isinstance(node, list) or last >= len(node):
            raise ValueError(f"{dotted(tuple(parts))} does not exist")
        node[last] = value
    else:
        if not isinstance(node, dict):
            raise ValueError(f"{dotted(tuple(parts[:-1]))} is not a table")
        node[last] = value


# ---------------------------------------------------------------------------
# CSV profiles
# ---------------------------------------------------------------------------

_CSV_DEMAND_COLUMNS = {f"{mode}_{unit}": mode for mode, unit in
                       (("current", "A"), ("power", "W"), ("resistance", "ohm"), ("voltage", "V"))}
_CSV_AMBIENT = "ambient_temperature_degC"
KELVIN_AT_0_DEGC = 273.15


@dataclass(frozen=True)
class SeriesProfile:
    """A CSV profile read from disk, in SI units."""

    path: Path
    mode: str
    time: np.ndarray
    demand: np.ndarray
    ambient: np.ndarray | None


def read_csv_frame(path: Path, key: str, what: str):
    """A CSV file as a pandas DataFrame with stripped column names; ``#`` starts a comment."""
    import pandas as pd

    name = str(path)
    if not path.is_file():
        raise ScenarioError(name, key, f"{what} file not found")
    try:
        frame = pd.read_csv(path, comment="#", skipinitialspace=True)
    except (pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise ScenarioError(name, key, f"not a readable CSV file: {str(exc).strip()}") from None
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def numeric_column(frame, column: str, name: str) -> np.ndarray:
    """A column as finite floats; the first bad row is named (rows counted from 1, line = row + 1)."""
    import pandas as pd

    values = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    bad = np.flatnonzero(~np.isfinite(values))
    if bad.size:
        row = int(bad[0])
        raise ScenarioError(name, column, f"row {row + 1} (line {row + 2}): {frame[column].iloc[row]!r} is not a "
                            "finite number")
    return values


def check_increasing(time: np.ndarray, name: str, column: str) -> None:
    """Raise unless ``time`` is strictly increasing, naming the first row that is not."""
    steps = np.diff(time)
    if (steps <= 0).any():
        row = int(np.flatnonzero(steps <= 0)[0]) + 1
        raise ScenarioError(name, column, f"time must be strictly increasing: row {row + 1} (line {row + 2}) "
                            f"has {time[row]:g} s after {time[row - 1]:g} s")


def read_profile_csv(path: Path, key: str) -> SeriesProfile:
    """Read a zero-order-hold profile: ``time_s`` plus one demand column, optional ambient.

    Read once per file version (a sweep builds thousands of scenarios on one profile).
    """
    try:
        stat = path.stat()
    except OSError:
        return _read_profile_csv(path, key)
    return _read_profile_csv_cached(path, key, stat.st_mtime_ns, stat.st_size)


@lru_cache(maxsize=32)
def _read_profile_csv_cached(path: Path, key: str, mtime_ns: int, size: int) -> SeriesProfile:
    return _read_profile_csv(path, key)


def _read_profile_csv(path: Path, key: str) -> SeriesProfile:
    name = str(path)
    frame = read_csv_frame(path, key, "profile")
    if "time_s" not in frame.columns:
        raise ScenarioError(name, "time_s", f"column time_s is missing (columns: {', '.join(frame.columns)})")
    demand_columns = [c for c in frame.columns if c in _CSV_DEMAND_COLUMNS]
    if len(demand_columns) != 1:
        raise ScenarioError(name, key, "give exactly one demand column of " + ", ".join(_CSV_DEMAND_COLUMNS)
                            + f" (found {', '.join(demand_columns) or 'none'})")
    unknown = [c for c in frame.columns if c not in ("time_s", _CSV_AMBIENT, *_CSV_DEMAND_COLUMNS)]
    if unknown:
        raise ScenarioError(name, unknown[0], "unknown column (valid: time_s, "
                            + ", ".join(_CSV_DEMAND_COLUMNS) + f", {_CSV_AMBIENT})")
    columns = ["time_s", demand_columns[0]] + ([_CSV_AMBIENT] if _CSV_AMBIENT in frame.columns else [])
    arrays = {column: numeric_column(frame, column, name) for column in columns}
    time = arrays["time_s"]
    if len(time) < 2:
        raise ScenarioError(name, "time_s", "a profile file needs at least two rows")
    check_increasing(time, name, "time_s")
    mode = _CSV_DEMAND_COLUMNS[demand_columns[0]]
    demand = arrays[demand_columns[0]]
    if mode in ("resistance", "voltage") and (demand <= 0).any():
        row = int(np.flatnonzero(demand <= 0)[0])
        raise ScenarioError(name, demand_columns[0], f"row {row + 1} (line {row + 2}): must be > 0")
    ambient = arrays.get(_CSV_AMBIENT)
    if ambient is not None:
        ambient = ambient + KELVIN_AT_0_DEGC
        if (ambient <= 0).any():
            raise ScenarioError(name, _CSV_AMBIENT, "temperature below absolute zero")
    return SeriesProfile(path, mode, time, demand, ambient)


def read_ambient_csv(path: Path, key: str) -> tuple[np.ndarray, np.ndarray]:
    """An ambient profile: columns ``time_s`` and ``ambient_temperature_degC``, linear between rows [s, K]."""
    name = str(path)
    frame = read_csv_frame(path, key, "ambient profile")
    for column in ("time_s", _CSV_AMBIENT):
        if column not in frame.columns:
            raise ScenarioError(name, column, f"column {column} is missing (columns: {', '.join(frame.columns)})")
    extra = [c for c in frame.columns if c not in ("time_s", _CSV_AMBIENT)]
    if extra:
        raise ScenarioError(name, extra[0], f"unknown column (valid: time_s, {_CSV_AMBIENT})")
    time, ambient = (numeric_column(frame, column, name) for column in ("time_s", _CSV_AMBIENT))
    if len(time) < 2:
        raise ScenarioError(name, "time_s", "an ambient profile needs at least two rows")
    check_increasing(time, name, "time_s")
    kelvin = ambient + KELVIN_AT_0_DEGC
    if (kelvin <= 0).any():
        raise ScenarioError(name, _CSV_AMBIENT, "temperature below absolute zero")
    return time, kelvin


# ---------------------------------------------------------------------------
# The scenario object
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Scenario:
    """A validated scenario: the raw data, its SI specification and where it came from."""

    spec: ScenarioSpec
    raw: dict
    source: str
    base_dir: Path
    digest: str
    overrides: tuple[tuple[str, Any], ...] = field(default_factory=tuple)

    @property
    def name(self) -> str:
        """The scenario's name."""
        return self.spec.scenario.name

    def with_overrides(self, overrides: Mapping[str, Any]) -> Scenario:
        """A new scenario with values replaced by dotted path (validated again)."""
        # the files were checked when this scenario was loaded: again only if an override may name others
        items = list(overrides.items())
        return _validate(_deep_copy(self.raw), self.source, self.base_dir, None, items, self.digest, self.overrides,
                         check_files=any(_names_files(path) for path, _ in items))

    def problem(self) -> Problem:
        """The SI :class:`~thermoelec.engine.model.Problem` for the simulator (reads CSV profiles)."""
        return build_problem(self)

    def solver_options(self) -> SolverOptions:
        """Integrator settings from ``[solver]``."""
        return self.spec.solver.options()


def _deep_copy(data: Any) -> Any:
    if isinstance(data, dict):
        return {k: _deep_copy(v) for k, v in data.items()}
    if isinstance(data, list):
        return [_deep_copy(v) for v in data]
    return data


def _validate(data: dict, source: str, base_dir: Path, text: str | None, overrides: list[tuple[str, Any]],
              digest: str, previous: tuple = (), check_files: bool = True) -> Scenario:
    for path, value in overrides:
        try:
            apply_override(data, path, value)
        except ValueError as exc:
            raise ScenarioError(source, path, f"cannot override: {exc}") from None
    try:
        spec = ScenarioSpec.model_validate(data)
    except ValidationError as exc:
        raise _first_error(exc, source, text) from None
    if overrides:
        h = hashlib.sha256(digest.encode())
        h.update(repr(overrides).encode())
        digest = h.hexdigest()
    scenario = Scenario(spec, data, source, base_dir, digest, tuple(previous) + tuple(overrides))
    if check_files:
        _check_profile_files(scenario)
    return scenario


def _names_files(path: str) -> bool:
    """Whether an override at this dotted path can change which CSV files the scenario reads."""
    return path.startswith(("profile", "thermal.ambient_profile")) or path in ("thermal", "include")


def _check_profile_files(scenario: Scenario) -> None:
    if scenario.spec.thermal.ambient_profile is not None:
        read_ambient_csv(scenario.base_dir / scenario.spec.thermal.ambient_profile, "thermal.ambient_profile")
    for i, seg in enumerate(scenario.spec.profile.segment):
        if seg.file is not None:
            read_profile_csv(scenario.base_dir / seg.file, f"profile.segment[{i + 1}].file")


def _merge(base: dict, top: Mapping) -> dict:
    """``top`` over ``base``, table by table (lists and values of ``top`` replace)."""
    out = _deep_copy(base)
    for key, value in top.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = _deep_copy(value)
    return out


def _with_includes(data: dict, base_dir: Path, source: str) -> tuple[dict, list[bytes]]:
    """Resolve ``include = "file.toml"`` (or a list): the included tables are the base, the scenario's win.

    Relative paths are relative to the scenario file; an included file cannot include again.
    """
    includes = data.pop("include", None)
    if includes is None:
        return data, []
    if isinstance(includes, str):
        includes = [includes]
    if not isinstance(includes, list) or not all(isinstance(i, str) for i in includes):
        raise ScenarioError(source, "include", "expected a file name or a list of file names")
    merged: dict = {}
    blobs = []
    for name in includes:
        path = base_dir / name
        try:
            blob = path.read_bytes()
            included = tomllib.loads(blob.decode("utf-8"))
        except FileNotFoundError:
            raise ScenarioError(source, "include", f"included file {name!r} not found (looked for {path})") from None
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise ScenarioError(str(path), "", f"included file: {exc}") from None
        if "include" in included:
            raise ScenarioError(str(path), "include", "an included file cannot include others")
        merged = _merge(merged, included)
        blobs.append(blob)
    return _merge(merged, data), blobs


def load_scenario(path: str | Path, overrides: Mapping[str, Any] | None = None) -> Scenario:
    """Read and validate a scenario file; ``overrides`` replace values by dotted path first.

    Raises
    ------
    ScenarioError
        For any problem in the file, its overrides or the CSV profiles it names.
    """
    path = Path(path)
    source = str(path)
    try:
        blob = path.read_bytes()
    except FileNotFoundError:
        raise ScenarioError(source, "", "scenario file not found") from None
    except OSError as exc:
        raise ScenarioError(source, "", f"cannot read the file: {exc.strerror}") from None
    try:
        text = blob.decode("utf-8")
    except UnicodeDecodeError:
        raise ScenarioError(source, "", "the file is not UTF-8 text") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        line_match = re.search(r"line (\d+)", str(exc))
        raise ScenarioError(source, "", f"TOML syntax error: {exc}",
                            int(line_match.group(1)) if line_match else None) from None
    digest = hashlib.sha256(blob).hexdigest()
    data, included = _with_includes(data, path.parent, source)
    for extra in included:
        digest = hashlib.sha256((digest + hashlib.sha256(extra).hexdigest()).encode()).hexdigest()
    return _validate(data, source, path.parent, text, list((overrides or {}).items()), digest)


def scenario_from_dict(data: Mapping[str, Any], base_dir: str | Path = ".", source: str = "<dict>",
                       overrides: Mapping[str, Any] | None = None) -> Scenario:
    """Validate scenario data given as a dict (the parsed TOML structure)."""
    raw = _deep_copy(dict(data))
    raw, _ = _with_includes(raw, Path(base_dir), source)
    digest = hashlib.sha256(repr(sorted(raw.items(), key=lambda kv: kv[0])).encode()).hexdigest()
    return _validate(raw, source, Path(base_dir), None, list((overrides or {}).items()), digest)


# ---------------------------------------------------------------------------
# Scenario -> Problem
# ---------------------------------------------------------------------------


def _segment_from_spec(spec: SegmentSpec, origin: str, default_ambient: float | None) -> Segment:
    common = dict(voltage_below=spec.voltage_below, voltage_above=spec.voltage_above,
                  soc_below=spec.soc_below, soc_above=spec.soc_above, origin=origin,
                  ambient_temperature=spec.ambient_temperature)
    if spec.mode == "soak":
        common["ambient_temperature"] = spec.ambient_temperature or default_ambient
        return Segment("rest", 0.0, spec.duration, **common)
    if spec.mode == "cccv":
        return Segment("cccv", spec.current, spec.duration if spec.duration is not None else math.inf,
                       cv_voltage=spec.voltage, cutoff_current=spec.cutoff_current, **common)
    if spec.mode == "rest":
        return Segment("rest", 0.0, spec.duration, **common)
    return Segment(spec.mode, float(spec.value), spec.duration, **common)


_SERIES_SEGMENTS: dict[int, tuple[SeriesProfile, str, tuple[Segment, ...]]] = {}


def _series_segments(series: SeriesProfile, name: str) -> tuple[Segment, ...]:
    """The segments of a CSV profile, built once per profile read (sweeps share them)."""
    hit = _SERIES_SEGMENTS.get(id(series))
    if hit is None or hit[0] is not series or hit[1] != name:
        if len(_SERIES_SEGMENTS) >= 32:
            _SERIES_SEGMENTS.clear()
        hit = (series, name, tuple(segments_from_series(series.time, series.mode, series.demand, series.ambient,
                                                        name)))
        _SERIES_SEGMENTS[id(series)] = hit
    return hit[2]


def scale_demand(segments: list[Segment], factor: float) -> list[Segment]:
    """Current and power demands (and CC charge currents) times ``factor``; voltages, resistances, rests kept."""
    if factor == 1.0:
        return segments
    return [replace(seg, value=seg.value * factor) if seg.mode in ("current", "power", "cccv") else seg
            for seg in segments]


def _profile_segments(scenario: Scenario, first_ambient: float | None
                      ) -> tuple[tuple[Segment, ...], tuple[Segment, ...], float]:
    """The mission's segments (scaled, repeated), its soak segments and the scenario's ambient [K].

    Cached on what they are made of (the profile section, the CSV series read,
    the ambient): a sweep builds a problem per scenario, and the scenarios of a
    sweep mostly share their profile, so they share one segment tuple, which the
    batched solver then recognises by identity.
    """
    spec = scenario.spec
    series = [read_profile_csv(scenario.base_dir / seg.file, f"profile.segment[{i + 1}].file")
              if seg.file is not None else None for i, seg in enumerate(spec.profile.segment)]
    # the ambient enters only through soak segments (they take it) and where no ambient is given
    has_soak = any(seg.mode == "soak" for seg in spec.profile.segment)
    given = spec.thermal.ambient_temperature
    key = (repr(spec.profile), given if has_soak or given is None else "given", first_ambient,
           tuple(map(id, series)))
    hit = _PROFILE_SEGMENTS.get(key)
    if hit is not None and all(a is b for a, b in zip(hit[0], series, strict=True)):
        segments, soak, ambient = hit[1]
        return segments, soak, given if given is not None else ambient
    segments: list[Segment] = []
    soak: list[Segment] = []
    for i, (seg, table) in enumerate(zip(spec.profile.segment, series, strict=True)):
        key_name = f"profile.segment[{i + 1}]"
        if table is not None:
            if first_ambient is None and table.ambient is not None:
                first_ambient = float(table.ambient[0])
            segments += _series_segments(table, seg.file)
        elif seg.mode == "soak":
            soak.append(_segment_from_spec(seg, key_name, spec.thermal.ambient_temperature or first_ambient))
        else:
            segments.append(_segment_from_spec(seg, key_name, None))
    ambient = spec.thermal.ambient_temperature
    if ambient is None:
        if first_ambient is None:
            raise ScenarioError(scenario.source, "thermal.ambient_temperature",
                                "required unless thermal.ambient_profile or a profile file gives the column "
                                + _CSV_AMBIENT)
        ambient = first_ambient
    for i, seg in enumerate(soak):
        if seg.ambient_temperature is None:
            soak[i] = replace(seg, ambient_temperature=ambient)
    result = (tuple(expand_repeats(scale_demand(segments, spec.profile.scale), spec.profile.repeat)), tuple(soak),
              ambient)
    if len(_PROFILE_SEGMENTS) >= 64:
        _PROFILE_SEGMENTS.clear()
    _PROFILE_SEGMENTS[key] = (series, result)  # the series kept, so their identities stay theirs
    return result


_PROFILE_SEGMENTS: dict[tuple, tuple] = {}


def build_problem(scenario: Scenario) -> Problem:
    """Convert a validated scenario into an SI :class:`Problem` (reads the CSV profiles)."""
    spec = scenario.spec
    first_ambient: float | None = None
    ambient_profile = None
    if spec.thermal.ambient_profile is not None:
        ambient_profile = read_ambient_csv(scenario.base_dir / spec.thermal.ambient_profile,
                                           "thermal.ambient_profile")
        first_ambient = float(ambient_profile[1][0])
    segments, soak, ambient = _profile_segments(scenario, first_ambient)
    cell_spec = spec.cell
    ocv = cell_spec.ocv
    cell = Cell(
        capacity=cell_spec.capacity, voltage_min=cell_spec.voltage_min, voltage_max=cell_spec.voltage_max,
        mass=cell_spec.mass, specific_heat=cell_spec.specific_heat,
        ocv_soc=np.array(ocv.soc), ocv_voltage=np.array(ocv.voltage),
        ocv_entropic=np.array(ocv.entropic if ocv.entropic is not None else [0.0] * len(ocv.soc)),
        ocv_reference_temperature=ocv.reference_temperature,
        r0=cell_spec.r0.law(), rc=tuple(rc.pair() for rc in cell_spec.rc),
        geometry=cell_spec.geometry(),
    )
    pack = Pack(spec.pack.series, spec.pack.parallel, spec.pack.interconnect_resistance)
    # before a soak the pack sits at the scenario's ambient; without one, at the first segment's
    first = segments[0]
    start_ambient = ambient if soak or first.ambient_temperature is None else first.ambient_temperature
    t_cell = spec.thermal.initial_cell_temperature or start_ambient
    t_sink = spec.thermal.initial_sink_temperature or t_cell
    return Problem(
        cell=cell, pack=pack, thermal=spec.thermal.network(),
        segments=segments,
        ambient_temperature=ambient, initial_soc=cell_spec.initial_soc,
        initial_cell_temperature=t_cell, initial_sink_temperature=t_sink,
        limits=Limits(spec.limits.cell_temperature_max, spec.limits.charge_temperature_min),
        name=spec.scenario.name, stress=spec.stress.settings(),
        ambient_profile=ambient_profile, soak=soak,
    )

