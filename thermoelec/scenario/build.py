"""A validated scenario as the engine's problem: cell, pack, thermal network, segments, limits (SI).

Owns :func:`build_problem` and the making of the mission's segments from the
``[[profile.segment]]`` tables and the CSV profiles they name: scaled,
repeated, soak segments apart. Files are read and segment tuples built through
the scenario family's :class:`~thermoelec.scenario.cache.ScenarioCache`, so
the variants of a sweep with one profile share one segment tuple.

Imports the schema, series, cache and resolved-pack modules of :mod:`thermoelec.scenario`,
:mod:`thermoelec.engine` and :mod:`thermoelec.physics`; never the loading module
(the scenario object calls this one) nor the layers above.
"""

from __future__ import annotations

import math
from dataclasses import replace
from functools import lru_cache
from pathlib import Path

import numpy as np
from pydantic import BaseModel

from thermoelec.engine.problem import Problem
from thermoelec.engine.profile import Segment, expand_repeats, segments_from_series
from thermoelec.inputs.errors import ScenarioError
from thermoelec.physics.cell import Cell, Pack
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.loads import LOAD_MODES
from thermoelec.scenario.cache import ScenarioCache, file_version
from thermoelec.scenario.resolved import resolved_pack
from thermoelec.scenario.schema import CellSpec, ProfileSpec, ScenarioSpec, SegmentSpec
from thermoelec.scenario.series import AMBIENT_COLUMN, read_ambient_csv, read_profile_csv

__all__ = ["SCALED_MODES", "build_problem", "scale_demand"]

#: Segment modes whose value a profile's ``scale`` multiplies: the signed demands of the
#: load-mode registry (currents and powers, the flows of the duty cycle) and the CC-CV charge
#: current; a positive set point (a load resistance, a terminal voltage) belongs to the circuit.
SCALED_MODES: frozenset[str] = frozenset({*(name for name, mode in LOAD_MODES.items() if not mode.positive), "cccv"})


def build_problem(spec: ScenarioSpec, base_dir: Path, source: str, cache: ScenarioCache | None = None) -> Problem:
    """The engine's :class:`~thermoelec.engine.problem.Problem` for a validated scenario.

    Parameters
    ----------
    spec : ScenarioSpec
        The validated scenario (SI values).
    base_dir : pathlib.Path
        Folder the CSV file names are relative to.
    source : str
        The scenario file, for the messages.
    cache : ScenarioCache, optional
        The scenario family's cache (files read, segment tuples built); a new one when not given.

    Returns
    -------
    Problem
        The problem [SI: K, s, A, V, Ω, W, J, C].

    Raises
    ------
    ScenarioError
        For a CSV profile that does not read, or an ambient that no key or file gives.
    """
    cache = ScenarioCache() if cache is None else cache
    first_ambient: float | None = None
    ambient_profile = None
    if spec.thermal.ambient_profile is not None:
        ambient_profile = cache.read(read_ambient_csv, base_dir / spec.thermal.ambient_profile,
                                     "thermal.ambient_profile")
        first_ambient = float(ambient_profile[1][0])
    segments, soak, ambient = _profile_segments(spec, base_dir, source, cache, first_ambient)
    # before a soak the pack sits at the scenario's ambient; without one, at the first segment's
    first = segments[0]
    start_ambient = ambient if soak or first.ambient_temperature is None else first.ambient_temperature
    t_cell = spec.thermal.initial_cell_temperature or start_ambient
    t_sink = spec.thermal.initial_sink_temperature or t_cell
    return Problem(
        cell=_cell(spec.cell), pack=Pack(spec.pack.series, spec.pack.parallel, spec.pack.interconnect_resistance),
        thermal=spec.thermal.network(),
        segments=segments,
        ambient_temperature=ambient, initial_soc=spec.cell.initial_soc,
        initial_cell_temperature=t_cell, initial_sink_temperature=t_sink,
        limits=spec.limits.limits(spec.cell.capacity),
        derating=None if spec.derating is None else spec.derating.derating(spec.cell.capacity),
        name=spec.scenario.name, stress=spec.stress.settings(),
        ambient_profile=ambient_profile, soak=soak,
        initial_coolant_temperature=_initial_coolant_temperature(spec, t_cell, t_sink),
        notes=_ambient_notes(spec, base_dir, cache, soak, t_cell), resolved=resolved_pack(spec, source),
    )


@lru_cache(maxsize=1024)
def _file(base_dir: Path, name: str) -> Path:
    """A file a scenario names, the same object for every variant (a path keeps its text once made)."""
    return base_dir / name


def _initial_coolant_temperature(spec: ScenarioSpec, t_cell: float, t_sink: float) -> float | None:
    """The coolant node's start [K]: ``thermal.coolant.initial_temperature``, else the sink's when a pump
    starts off (coolant standing in the plate has taken the plate's temperature, so the plate carries no heat
    until the pump starts), else None (the engine starts it at the inlet temperature: the coolant flows)."""
    coolant, pump = spec.thermal.coolant, spec.thermal.pump
    if coolant is None:
        return None
    if coolant.initial_temperature is not None:
        return coolant.initial_temperature
    if pump is not None and pump.switch() is not None and not pump.switch().initially_on(t_cell):
        return t_sink
    return None


def _ambient_notes(spec: ScenarioSpec, base_dir: Path, cache: ScenarioCache, soak: tuple[Segment, ...],
                   t_cell: float) -> tuple[str, ...]:
    """A note for each profile file whose ambient column overrides the scenario's ``thermal.ambient_temperature``."""
    given = spec.thermal.ambient_temperature
    if given is None:
        return ()
    notes = []
    for i, seg in enumerate(spec.profile.segment):
        if seg.file is None:
            continue
        series = cache.read(read_profile_csv, _file(base_dir, seg.file), f"profile.segment[{i + 1}].file")
        if series.ambient is None:
            continue
        low, high = (float(np.min(series.ambient)) - ZERO_CELSIUS, float(np.max(series.ambient)) - ZERO_CELSIUS)
        span = f"{low:.4g} degC" if low == high else f"{low:.4g}..{high:.4g} degC"
        note = (f"profile.segment[{i + 1}].file ({seg.file}) has its own {AMBIENT_COLUMN} column ({span}): it "
                f"overrides thermal.ambient_temperature ({given - ZERO_CELSIUS:.4g} degC) while the file runs")
        if i == 0 and not soak and spec.thermal.initial_cell_temperature is None:
            note += (f", and the mission starts at its first row's {t_cell - ZERO_CELSIUS:.4g} degC (set "
                     "thermal.initial_cell_temperature to start otherwise)")
        notes.append(note)
    return tuple(notes)


def _cell(spec: CellSpec) -> Cell:
    ocv = spec.ocv
    return Cell(
        capacity=spec.capacity, voltage_min=spec.voltage_min, voltage_max=spec.voltage_max,
        mass=spec.mass, specific_heat=spec.specific_heat,
        ocv_soc=np.array(ocv.soc), ocv_voltage=np.array(ocv.voltage),
        ocv_entropic=np.array(ocv.entropic if ocv.entropic is not None else [0.0] * len(ocv.soc)),
        ocv_reference_temperature=ocv.reference_temperature,
        r0=spec.r0.law(), rc=tuple(rc.pair() for rc in spec.rc),
        geometry=spec.geometry(),
    )


def scale_demand(segments: list[Segment], factor: float) -> list[Segment]:
    """Segments with their demands of :data:`SCALED_MODES` times ``factor``; set points and rests kept.

    Parameters
    ----------
    segments : list of Segment
        The profile's segments (pack level, SI).
    factor : float
        The profile's ``scale`` [-], > 0.

    Returns
    -------
    list of Segment
        ``segments`` itself when ``factor`` is 1.
    """
    if factor == 1.0:
        return segments
    return [replace(seg, value=seg.value * factor) if seg.mode in SCALED_MODES else seg for seg in segments]


def _profile_segments(spec: ScenarioSpec, base_dir: Path, source: str, cache: ScenarioCache,
                      first_ambient: float | None) -> tuple[tuple[Segment, ...], tuple[Segment, ...], float]:
    """The mission's segments (scaled, repeated), its soak segments and the scenario's ambient [K].

    Built once per what they are made of: the profile section, the versions of
    the CSV files it names and the ambient where it enters (the soak segments
    take it; the first CSV row gives it when no key does).
    """
    profile = spec.profile
    given = spec.thermal.ambient_temperature
    has_soak = any(seg.mode == "soak" for seg in profile.segment)
    files = tuple(None if seg.file is None else file_version(_file(base_dir, seg.file)) for seg in profile.segment)
    key = ("profile", _profile_text(profile, cache), given if has_soak or given is None else "given", first_ambient,
           files)
    segments, soak, ambient = cache.built(
        key, lambda: _make_profile_segments(spec, base_dir, source, cache, first_ambient))
    return segments, soak, given if given is not None else ambient


def _profile_text(profile: ProfileSpec, cache: ScenarioCache) -> tuple:
    """The profile section as a key: each field's text, a segment's once per segment table (variants share them)."""
    return cache.of_object(profile, lambda section: tuple(
        (name, tuple(cache.of_object(item, repr) for item in value) if isinstance(value, list) else
         cache.of_object(value, repr) if isinstance(value, BaseModel) else value) for name, value in section),
        "profile key")


def _make_profile_segments(spec: ScenarioSpec, base_dir: Path, source: str, cache: ScenarioCache,
                           first_ambient: float | None) -> tuple[tuple[Segment, ...], tuple[Segment, ...], float]:
    segments: list[Segment] = []
    soak: list[Segment] = []
    given = spec.thermal.ambient_temperature
    for i, seg in enumerate(spec.profile.segment):
        key_name = f"profile.segment[{i + 1}]"
        if seg.file is not None:
            path = _file(base_dir, seg.file)
            series = cache.read(read_profile_csv, path, f"{key_name}.file")
            if first_ambient is None and series.ambient is not None:
                first_ambient = float(series.ambient[0])
            # a CSV's segments are shared by the profiles that name it (a sweep over another segment)
            rows = cache.built(("series", file_version(path), seg.file), lambda s=series, n=seg.file: tuple(
                segments_from_series(s.time, s.mode, s.demand, s.ambient, n)))
            segments += [replace(row, name=seg.name) for row in rows] if seg.name else rows
        elif seg.mode == "soak":
            soak.append(_segment_from_spec(seg, key_name, given or first_ambient))
        else:
            segments.append(_segment_from_spec(seg, key_name, None))
    ambient = given
    if ambient is None:
        if first_ambient is None:
            raise ScenarioError(source, "thermal.ambient_temperature",
                                "required unless thermal.ambient_profile or a profile file gives the column "
                                + AMBIENT_COLUMN)
        ambient = first_ambient
    soak = [seg if seg.ambient_temperature is not None else replace(seg, ambient_temperature=ambient)
            for seg in soak]
    profile = spec.profile
    return tuple(expand_repeats(scale_demand(segments, profile.scale), profile.repeat)), tuple(soak), ambient


def _segment_from_spec(spec: SegmentSpec, origin: str, default_ambient: float | None) -> Segment:
    """A segment of the engine from a ``[[profile.segment]]`` table (no file)."""
    common = dict(voltage_below=spec.voltage_below, voltage_above=spec.voltage_above,
                  soc_below=spec.soc_below, soc_above=spec.soc_above, origin=origin,
                  ambient_temperature=spec.ambient_temperature, name=spec.name or "")
    if spec.mode == "soak":
        common["ambient_temperature"] = spec.ambient_temperature or default_ambient
        return Segment("rest", 0.0, spec.duration, **common)
    if spec.mode == "cccv":
        return Segment("cccv", spec.current, spec.duration if spec.duration is not None else math.inf,
                       cv_voltage=spec.voltage, cutoff_current=spec.cutoff_current, **common)
    if spec.mode == "rest":
        return Segment("rest", 0.0, spec.duration, **common)
    return Segment(spec.mode, float(spec.value), spec.duration, **common)
