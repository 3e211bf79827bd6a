"""Simulation results: the result object, its time series and the solo summary.

Owns :class:`SimulationResult` (series with units, summary, status, solver
counters, events; pandas, xarray and file output) and :func:`build_result`,
which turns the engine's raw trajectory into it. The metrics shared with the
batched sweep come from :func:`thermoelec.analysis.metrics.mission_metrics`;
the warnings and stress indicators from :mod:`thermoelec.analysis.diagnostics`.
Imports from engine/, physics/ and analysis/ only: never from output/ (figures
of a result are :func:`thermoelec.plot_dashboard` and its siblings), fit/, the
API or the command line.

Energy accounting (pack level, as areas under the voltage-charge curves):
battery energy ``∫ Ns U I dt``, load energy ``∫ V I dt``, their difference the
energy dissipated; the heat generated adds the reversible (entropic) heat
``-∫ Ns I T dU/dT dt`` (Bernardi, Pawlikowski & Newman, J. Electrochem. Soc. 132
(1985) 5). The integrals are carried as states of the integration, so they are
as accurate as the states themselves and independent of the output interval.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis import cells as pack_cells
from thermoelec.analysis import diagnostics
from thermoelec.analysis.metrics import Extremes, mission_metrics, pack_limits, pack_soc
from thermoelec.analysis.stops import explain_stop
from thermoelec.analysis.tablefiles import write_csv, write_netcdf
from thermoelec.analysis.verdict import limit_checks
from thermoelec.engine import layout as L
from thermoelec.engine.driver import Trajectory
from thermoelec.engine.events import (
    CCCV_CAP_EVENT,
    CONTROL_EVENTS,
    EV_HOLD_MAX,
    EV_HOLD_MIN,
    EV_HOLD_RELEASE,
    EVENT_NAMES,
)
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Problem
from thermoelec.physics.constants import JOULES_PER_WH, ZERO_CELSIUS
from thermoelec.physics.loads import LOAD_MODES, MODE_CURRENT

__all__ = ["CCCV_MODE", "DEMAND_MODES", "DERATING_ROWS", "ENERGY_KEYS", "ENERGY_ROWS", "LIMIT_KEYS",
           "NET_ENERGY_ROWS", "REST_MODE", "SERIES_UNITS",
           "THERMOSTAT_EVENTS", "SimulationResult",
           "build_result", "charger_segments"]

#: Reported series and their units; the first ten are the output contract.
SERIES_UNITS: dict[str, str] = {
    "time_s": "s",
    "current_A": "A",
    "voltage_V": "V",
    "power_W": "W",
    "soc": "1",
    "ocv_V": "V",
    "cell_temperature_degC": "degC",
    "sink_temperature_degC": "degC",
    "ambient_temperature_degC": "degC",
    "heat_W": "W",
    "cell_voltage_V": "V",
    "reversible_heat_W": "W",
    "heat_to_ambient_W": "W",
    "pack_resistance_ohm": "ohm",
    "pack_emf_V": "V",
    "coolant_temperature_degC": "degC",
    "heater_power_W": "W",
    "auxiliary_power_W": "W",
    "heat_to_coolant_W": "W",
    "heat_radiated_W": "W",
    "sink_to_air_conductance_W_per_K": "W/K",
    "reynolds_number": "1",
    "rayleigh_number": "1",
    "power_demanded_W": "W",
    "current_demanded_A": "A",
    **{k: unit for k, (unit, _) in pack_cells.PACK_SERIES_UNITS.items()},
}
SERIES_DESCRIPTIONS: dict[str, str] = {
    "time_s": "time since the mission start",
    "current_A": "pack current, positive discharging",
    "voltage_V": "pack terminal voltage",
    "power_W": "pack power to the load, positive discharging",
    "soc": "state of charge",
    "ocv_V": "pack open-circuit voltage Ns*U",
    "cell_temperature_degC": "lumped cell temperature",
    "sink_temperature_degC": "heat-sink node temperature",
    "ambient_temperature_degC": "ambient temperature",
    "heat_W": "heat generated in cells and interconnect (irreversible + reversible)",
    "cell_voltage_V": "terminal voltage of one cell",
    "reversible_heat_W": "reversible (entropic) part of the heat",
    "heat_to_ambient_W": "heat rejected to ambient",
    "pack_resistance_ohm": "total series resistance Ns*R0/Np + R_ic",
    "pack_emf_V": "source voltage behind the series resistance, Ns*(U - sum of RC voltages)",
    "coolant_temperature_degC": "coolant temperature leaving the cold plate (the inlet without a coolant loop)",
    "heater_power_W": "heater power on the cells",
    "auxiliary_power_W": "power the running fans, pumps and pack-fed heater draw at the pack terminals",
    "heat_to_coolant_W": "heat carried away by the coolant",
    "heat_radiated_W": "net radiation from the sink to the surroundings (part of heat_to_ambient_W)",
    "sink_to_air_conductance_W_per_K": "sink-to-air convective conductance h*A (with a running fan)",
    "reynolds_number": "Reynolds number of the air flow over the sink (convection correlations only)",
    "rayleigh_number": "Rayleigh number of free convection at the sink (convection correlations only)",
    "power_demanded_W": "power the demand asks at the terminals (power_W is what the derated pack delivers)",
    "current_demanded_A": "pack current the demand asks (current_A is what the derated pack delivers)",
    **{k: meaning for k, (_, meaning) in pack_cells.PACK_SERIES_UNITS.items()},
}

#: Names of the load modes in the order of their codes in the engine.
MODE_NAMES = tuple(sorted(LOAD_MODES, key=lambda name: LOAD_MODES[name].code))
#: The demand label of an output row at zero current: the composite segment mode of a rest
#: (a key of :data:`thermoelec.physics.loads.COMPOSITE_MODES`).
REST_MODE = "rest"
#: The demand label of the rows of a CC-CV segment, both phases
#: (a key of :data:`thermoelec.physics.loads.COMPOSITE_MODES`).
CCCV_MODE = "cccv"
#: Every label :attr:`SimulationResult.demand_mode` can hold: a rest, the load modes in code order, a CC-CV charge.
DEMAND_MODES: tuple[str, ...] = (REST_MODE, *MODE_NAMES, CCCV_MODE)
#: Names of the thermostat switch events (fan, heater, pump), from the event registry.
THERMOSTAT_EVENTS: tuple[str, ...] = tuple(EVENT_NAMES[code] for code in CONTROL_EVENTS)


def _celsius(kelvin: np.ndarray | float) -> np.ndarray | float:
    return kelvin - ZERO_CELSIUS


@dataclass
class SimulationResult:
    """Outcome of one simulated mission.

    Attributes
    ----------
    series : dict of str to array
        Reported time series, keys and units in :data:`SERIES_UNITS` (the coolant
        temperature only with a coolant loop). At a
        discontinuity of the demand the time appears twice: before and after.
    summary : dict
        Summary metrics (the output contract of ``summary.json`` and more).
    status : str
        ``"ok"`` when the integration ran to its end or a stop event, ``"failed"``
        when the solver gave up (the series then runs up to the failure).
    message : str
        Solver message for a failure, else empty.
    statistics : dict
        Solver counters summed over all phases, and the wall time [s].
    events : list of dict
        Located events (stops, CC-CV switches, segment end conditions) with times [s]; in a
        resolved pack a cell limit or thermostat names its ``cell`` (from 1).
    metadata : dict
        Package version, scenario hash, back end and tolerances.
    states : array
        Raw state rows of the integration.
    demand_mode, demand_value : arrays
        Demand of each output row: mode name (one of :data:`DEMAND_MODES`, ``"rest"``
        for zero current, ``"cccv"`` for both phases of a CC-CV charge) and its value in SI
        units (A, W, ohm or V).
    limits : dict
        Pack-level limits and layout for plots and reports (``voltage_min_V``,
        ``voltage_max_V``, ``cell_temperature_max_degC``, ...: :func:`thermoelec.analysis.metrics.pack_limits`).
    segment_name : object array or None
        The name of each row's segment (``[[profile.segment]]`` ``name``), empty where it has none.
    charger : bool array or None
        Each row's segment is a charger's (CC-CV, or a held terminal voltage): charge there comes
        from a charger; elsewhere from the load (regeneration).
    cells : dict of str to array or None
        A resolved pack's per-cell series, shape ``(rows, cells)``, keys and units in
        :data:`thermoelec.analysis.cells.CELL_SERIES_UNITS`; None for a lumped pack.
    cell_coords : dict or None
        The coordinates of the ``cell`` dimension (:func:`thermoelec.analysis.cells.cell_coordinates`).
    problem : Problem or None
        The engine problem simulated (SI): what further analysis of the result starts from (the
        operating-region chart's pulse capabilities).
    """

    series: dict[str, np.ndarray]
    summary: dict[str, Any]
    status: str
    message: str
    statistics: dict[str, float]
    events: list[dict]
    metadata: dict[str, Any] = field(default_factory=dict)
    states: np.ndarray | None = None
    demand_mode: np.ndarray | None = None
    demand_value: np.ndarray | None = None
    limits: dict[str, float] = field(default_factory=dict)
    segment_name: np.ndarray | None = None
    charger: np.ndarray | None = None
    cells: dict[str, np.ndarray] | None = None
    cell_coords: dict[str, tuple] | None = None
    problem: Problem | None = None

    @property
    def verdict(self) -> str:
        """``"pass"`` when the mission stayed inside every limit (:mod:`thermoelec.analysis.verdict`), else
        ``"fail"``."""
        return str(self.summary["verdict"])

    @property
    def completed(self) -> bool:
        """True when the whole profile ran without a stop."""
        return bool(self.summary["completed"])

    @property
    def stop_reason(self) -> str:
        """Why the run ended (``end_of_profile`` or a limit)."""
        return str(self.summary["stop_reason"])

    @property
    def warnings(self) -> list[str]:
        """Warnings raised while simulating."""
        return list(self.summary["warnings"])

    def to_dataframe(self):
        """The time series as a pandas DataFrame (columns with units in their names)."""
        import pandas as pd

        return pd.DataFrame({k: self.series[k] for k in SERIES_UNITS if k in self.series})

    def to_dataset(self):
        """The time series as an xarray Dataset with ``units`` attributes and run metadata.

        The dimension ``time`` holds the output times [s]; a time repeats at each
        jump of the demand (values just before and just after). A resolved pack adds
        the dimension ``cell``: the per-cell series (``time x cell``) with each cell's
        number, group, place in its group and position as coordinates.
        """
        import xarray as xr

        data, coords, attrs = self._dataset_parts()
        ds = xr.Dataset(data, coords=coords)
        ds.attrs.update(attrs)
        return ds

    def _dataset_parts(self) -> tuple[dict[str, Any], dict[str, Any], dict[str, Any]]:
        """The variables, coordinates and attributes of :meth:`to_dataset` (and of ``timeseries.nc``)."""
        data = {k: ("time", self.series[k], {"units": SERIES_UNITS[k], "long_name": SERIES_DESCRIPTIONS[k]})
                for k in SERIES_UNITS if k != "time_s" and k in self.series}
        coords = {"time": ("time", self.series["time_s"], {"units": "s", "long_name": SERIES_DESCRIPTIONS["time_s"]})}
        if self.cells is not None:
            for k, values in self.cells.items():
                unit, meaning = pack_cells.CELL_SERIES_UNITS[k]
                data[k] = (("time", "cell"), values, {"units": unit, "long_name": meaning})
            coords.update(self.cell_coords or {})
        attrs: dict[str, Any] = {}
        for key, value in self.metadata.items():
            attrs[key] = value if isinstance(value, (int, float, str)) else json.dumps(value)
        for key, value in self.statistics.items():
            attrs[f"solver_{key}"] = float(value)
        attrs["status"] = self.status
        attrs["stop_reason"] = self.stop_reason
        attrs["completed"] = int(self.completed)
        attrs["summary_json"] = json.dumps(self.summary)
        return data, coords, attrs

    def summary_json(self) -> str:
        """The summary as JSON text."""
        return json.dumps(self.summary, indent=2, allow_nan=False)

    def write(self, out_dir: str | Path) -> list[Path]:
        """Write ``summary.json``, ``timeseries.csv`` and ``timeseries.nc`` into ``out_dir``.

        The CSV and NetCDF files are those of :meth:`to_dataframe` and :meth:`to_dataset`
        (:mod:`thermoelec.analysis.tablefiles`).
        """
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        written = [out / "summary.json", out / "timeseries.csv", out / "timeseries.nc"]
        written[0].write_text(self.summary_json() + "\n")
        # the files to_dataframe().to_csv(..., float_format="%.9g") and to_dataset().to_netcdf() write,
        # without pandas and xarray: their import and per-value formatting cost more than a short solve
        write_csv(written[1], {k: self.series[k] for k in SERIES_UNITS if k in self.series})
        write_netcdf(written[2], *self._dataset_parts())
        return written


def build_result(problem: Problem, trajectory: Trajectory, options: SolverOptions,
                 metadata: dict[str, Any] | None = None) -> SimulationResult:
    """Series and summary metrics from a raw trajectory (a resolved pack's per-cell series too)."""
    ns = problem.pack.series
    states = trajectory.states
    alg = trajectory.algebraics()
    tc = alg[:, L.A_TEMPERATURE_HIGH]  # the hottest cell (the one cell of a lumped pack)
    ts = states[:, L.sink_temperature_index(problem.n_rc, problem.n_cells)]
    ambient = alg[:, L.A_AMBIENT]
    current = alg[:, L.A_CURRENT]
    voltage = alg[:, L.A_VOLTAGE]
    series = {
        "time_s": trajectory.times,
        "current_A": current,
        "voltage_V": voltage,
        "power_W": voltage * current,
        "soc": alg[:, L.A_SOC],
        "ocv_V": ns * alg[:, L.A_OCV],
        "cell_temperature_degC": _celsius(tc),
        "sink_temperature_degC": _celsius(ts),
        "ambient_temperature_degC": _celsius(ambient),
        "heat_W": alg[:, L.A_HEAT],
        "cell_voltage_V": alg[:, L.A_CELL_VOLTAGE],
        "reversible_heat_W": alg[:, L.A_REVERSIBLE],
        "heat_to_ambient_W": alg[:, L.A_HEAT_AMBIENT],
        "pack_resistance_ohm": alg[:, L.A_RESISTANCE],
        "pack_emf_V": alg[:, L.A_EMF],
        "heater_power_W": alg[:, L.A_HEATER],
        "auxiliary_power_W": alg[:, L.A_AUXILIARY],
        "heat_to_coolant_W": alg[:, L.A_COOLANT],
        "heat_radiated_W": alg[:, L.A_RADIATION],
        "sink_to_air_conductance_W_per_K": alg[:, L.A_SINK_CONDUCTANCE],
    }
    if problem.thermal.coolant is not None:
        series["coolant_temperature_degC"] = _celsius(alg[:, L.A_COOLANT_OUTLET])
    if problem.thermal.convection is not None:
        series["reynolds_number"] = alg[:, L.A_REYNOLDS]
        series["rayleigh_number"] = alg[:, L.A_RAYLEIGH]
    if problem.derating is not None:  # the demand against what the derated pack delivers
        series["power_demanded_W"] = alg[:, L.A_POWER_DEMANDED]
        series["current_demanded_A"] = alg[:, L.A_CURRENT_DEMANDED]
    cells = coords = None
    if problem.resolved is not None:
        series.update(pack_cells.pack_series(alg))
        cells, coords = pack_cells.cell_series(problem, trajectory), pack_cells.cell_coordinates(problem)
    limits = pack_limits(problem)
    temperatures = _Temperatures(tc, alg[:, L.A_TEMPERATURE_LOW], ts)
    summary = _summary(problem, trajectory, series, states, temperatures, options.output_interval, limits, cells,
                       alg)
    stats = dict(trajectory.statistics)
    stats["wall_time_s"] = trajectory.wall_time
    codes = trajectory.demand_modes
    demand_value = trajectory.demand_values
    demand_mode = np.array(MODE_NAMES, dtype=object)[codes]
    demand_mode[(codes == MODE_CURRENT) & (demand_value == 0.0)] = REST_MODE
    rows = trajectory.row_segments
    cccv = np.array([seg.mode == CCCV_MODE for seg in problem.segments], dtype=bool)
    demand_mode[cccv[rows]] = CCCV_MODE  # its CC and CV phases are one charge
    names = np.array([seg.name for seg in problem.segments], dtype=object)
    # cells are numbered from 1 in every output (from 0 in the engine)
    events = [{**e, "cell": e["cell"] + 1} if "cell" in e else e for e in trajectory.events]
    return SimulationResult(series=series, summary=summary, status=trajectory.status,
                            message=trajectory.message, statistics=stats, events=events,
                            metadata=dict(metadata or {}), states=states, demand_mode=demand_mode,
                            demand_value=demand_value, limits=limits, segment_name=names[rows],
                            charger=charger_segments(problem)[rows], cells=cells, cell_coords=coords,
                            problem=problem)


def charger_segments(problem: Problem) -> np.ndarray:
    """Which segments charge from a charger: CC-CV, and the modes that hold the terminal voltage.

    Charge in any other segment (a negative current or power, a profile row) comes from the load:
    regeneration.

    Parameters
    ----------
    problem : Problem
        The simulated problem.

    Returns
    -------
    bool array, shape (n_segments,)
        True for a charger's segment.
    """
    return np.array([seg.mode == "cccv" or (seg.mode in LOAD_MODES and LOAD_MODES[seg.mode].imposes_voltage)
                     for seg in problem.segments], dtype=bool)


def _charge_sources(problem: Problem, trajectory: Trajectory, series: dict[str, np.ndarray],
                    charged_wh: float) -> tuple[float, float]:
    """The energy charged at the terminals [Wh], split into regenerated (from the load) and from a charger.

    Each part is the trapezoid of the charging power over the output rows of its segments;
    the two are scaled to the integrator's total (``energy_charged_Wh``), so they add up to it
    exactly and a part with no rows is exactly zero.
    """
    times, power, current = series["time_s"], series["power_W"], series["current_A"]
    if len(times) < 2 or charged_wh == 0.0:
        return 0.0, 0.0
    charging = 0.5 * (current[:-1] + current[1:]) < 0.0
    energy = np.where(charging, -0.5 * (power[:-1] + power[1:]) * np.diff(times), 0.0)
    charger = charger_segments(problem)[trajectory.row_segments[1:]]
    from_charger, regenerated = float(np.sum(energy[charger])), float(np.sum(energy[~charger]))
    if from_charger + regenerated <= 0.0:
        return 0.0, 0.0
    share = regenerated / (from_charger + regenerated)
    return charged_wh * share + 0.0, charged_wh * (1.0 - share) + 0.0


@dataclass(frozen=True)
class _Temperatures:
    """Temperatures of the output rows [K]: the hottest and the coldest cell (the one cell of a lumped
    pack), the sink."""

    hottest: np.ndarray
    coldest: np.ndarray
    sink: np.ndarray


def _soak_summary(problem: Problem, soak: Trajectory | None) -> dict[str, Any] | None:
    """What the soak before the mission did: its end state (the hottest cell's temperature), stop and heater energy."""
    if soak is None:
        return None
    n_rc, n_cells = problem.n_rc, problem.n_cells
    end = soak.states[-1]
    return {
        "duration_s": float(soak.times[-1]),
        "stop_reason": soak.stop_reason,
        "soc_start": pack_soc(problem, soak.states[0])[0],
        "status": soak.status,
        "cell_temperature_end_degC": float(_celsius(end[L.cell_state_indices(n_rc, n_cells)[1]].max())),
        "sink_temperature_end_degC": float(_celsius(end[L.sink_temperature_index(n_rc, n_cells)])),
        "soc_end": pack_soc(problem, end)[0],
        "heater_energy_Wh": float(end[L.quadrature_index(n_rc, n_cells) + L.Q_HEATER]) / JOULES_PER_WH,
        "events": [{"time_s": float(e["time_s"]), "event": e["event"], **({"state": e["state"]} if "state" in e
                                                                         else {})} for e in soak.events],
    }


def _summary(problem: Problem, trajectory: Trajectory, series: dict[str, np.ndarray], states: np.ndarray,
             temperatures: _Temperatures, output_interval: float, limits: dict[str, float],
             cells: dict[str, np.ndarray] | None, alg: np.ndarray) -> dict[str, Any]:
    """The summary of a solo run: :func:`mission_metrics` from the output rows, and what only a solo run has."""
    tc = temperatures.hottest
    times, current = series["time_s"], series["current_A"]
    stress = diagnostics.stress_indicators(problem, times, current, tc, temperatures.coldest)
    cold_time = _cold_charging_time(problem, times, current, temperatures.coldest)
    stop = pack_cells.stop_event(trajectory) if cells is not None else None
    stop_cell = None if stop is None else stop["cell"]
    shared = mission_metrics(problem, states[0], states[-1],
                             _row_extremes(series, temperatures, stress, cold_time, cells, alg), float(times[-1]),
                             trajectory.stop_reason, trajectory.status, stop_cell=stop_cell)
    biot, biot_warnings = diagnostics.biot_check(problem)
    warnings = _warnings(problem, trajectory, series, states, temperatures, cold_time) + biot_warnings \
        + diagnostics.plausibility_warnings(problem.cell) + diagnostics.resolution_warnings(problem, output_interval) \
        + diagnostics.correlation_warnings(problem, series)
    checks = limit_checks({**shared, "stop_reason": trajectory.stop_reason}, limits)
    return {
        "scenario": problem.name,
        "verdict": shared["verdict"],
        **_extremes_summary(problem, trajectory, shared, series, temperatures.coldest),
        "stop_explanation": explain_stop(problem, trajectory.stop_reason, trajectory.message, trajectory.events,
                                         series, trajectory.row_segments),
        **_energy_summary(problem, shared, trajectory, states, series),
        **_derating_summary(problem, shared, trajectory),
        **{key: shared[key] for key in LIMIT_KEYS},
        "soc_start": float(series["soc"][0]),
        "soc_end": shared["soc_end"],
        "time_charging_below_limit_s": shared["time_charging_below_limit_s"],
        **stress,
        "biot_number": biot,
        "segments_completed": trajectory.segments_completed,
        "segments_total": len(problem.segments),
        "events": [_event(problem, e) for e in trajectory.events],
        "soak": _soak_summary(problem, trajectory.soak),
        **(pack_cells.pack_summary(problem, trajectory, shared, series, cells) if cells is not None else {}),
        "checks": checks,
        "notes": list(problem.notes),
        "warnings": warnings,
    }


def _event(problem: Problem, event: dict[str, Any]) -> dict[str, Any]:
    """An event for the summary: time, name, origin, the segment's name if it has one, a thermostat's state,
    a resolved pack's cell (from 1)."""
    name = problem.segments[event["segment"]].name if 0 <= event.get("segment", -1) < len(problem.segments) else ""
    return {"time_s": float(event["time_s"]), "event": event["event"], "origin": event["origin"],
            **({"segment_name": name} if name else {}), **({"state": event["state"]} if "state" in event else {}),
            **({"cell": event["cell"] + 1} if "cell" in event else {})}


def auxiliary_energies(series: dict[str, np.ndarray]) -> tuple[float, float]:
    """The energy the auxiliaries drew at the terminals over a run, and the part of it while the pack
    discharged [J]: their power is constant within a phase and a phase boundary is a repeated row, so the
    trapezoid over the output rows is exact; an interval discharges when its mean current is positive."""
    times, power, current = series["time_s"], series["auxiliary_power_W"], series["current_A"]
    if len(times) < 2:
        return 0.0, 0.0
    energy = 0.5 * (power[:-1] + power[1:]) * np.diff(times)
    discharging = 0.5 * (current[:-1] + current[1:]) > 0.0
    return float(np.sum(energy)), float(np.sum(energy[discharging]))


def _limit_extremes(times: np.ndarray, alg: np.ndarray) -> dict[str, float]:
    """The extremes against the pack specification's limits and the derating, over the output rows of a solo run."""
    current, power = alg[:, L.A_CURRENT], alg[:, L.A_VOLTAGE] * alg[:, L.A_CURRENT]
    discharging, charging = current > 0.0, current < 0.0
    return {
        "cell_discharge_current_max": max(float(alg[:, L.A_CELL_CURRENT_HIGH].max()), 0.0),
        "cell_charge_current_max": max(-float(alg[:, L.A_CELL_CURRENT_LOW].min()), 0.0),
        "charge_power_max": max(-float(power.min()), 0.0),
        "discharge_current_margin": float(alg[:, L.A_MARGIN_DISCHARGE_CURRENT].min()),
        "charge_current_margin": float(alg[:, L.A_MARGIN_CHARGE_CURRENT].min()),
        "discharge_power_margin": float(alg[:, L.A_MARGIN_DISCHARGE_POWER].min()),
        "charge_power_margin": float(alg[:, L.A_MARGIN_CHARGE_POWER].min()),
        "discharging_temperature_min": float(alg[discharging, L.A_TEMPERATURE_LOW].min()) if discharging.any()
        else math.inf,
        "charging_temperature_max": float(alg[charging, L.A_TEMPERATURE_HIGH].max()) if charging.any() else -math.inf,
        # derated where the delivered current is not the demand's (it is the demand's exactly where not derated)
        "derated_time": diagnostics.time_above(times, np.abs(alg[:, L.A_CURRENT_DEMANDED] - current), 0.0),
        "shortfall_max": float(np.abs(alg[:, L.A_POWER_DEMANDED] - power).max()),
    }


def _row_extremes(series: dict[str, np.ndarray], temperatures: _Temperatures, stress: dict[str, Any],
                  cold_time: float, cells: dict[str, np.ndarray] | None, alg: np.ndarray) -> Extremes:
    """The running extremes of a solo run, over its output rows (the Arrhenius time of ``stress``)."""
    auxiliary, auxiliary_discharge = auxiliary_energies(series)
    return Extremes(
        cell_temperature_max=temperatures.hottest.max(),
        sink_temperature_max=temperatures.sink.max(),
        voltage_min=series["voltage_V"].min(),
        cell_voltage_min=series["cell_voltage_V"].min(),
        current_abs_max=np.abs(series["current_A"]).max(),
        equivalent_time_at_reference=stress["equivalent_time_at_reference_s"],
        cell_voltage_max=series.get("cell_voltage_max_V", series["cell_voltage_V"]).max(),  # the highest cell's
        power_max=series["power_W"].max(),
        cold_charging_time=cold_time,
        auxiliary_energy=auxiliary,
        auxiliary_energy_discharge=auxiliary_discharge,
        **(pack_cells.row_extremes(series, cells) if cells is not None else {}),
        **_limit_extremes(series["time_s"], alg),
    )


def _extremes_summary(problem: Problem, trajectory: Trajectory, shared: dict[str, Any],
                      series: dict[str, np.ndarray], coldest: np.ndarray) -> dict[str, Any]:
    """Completion, temperature, voltage, current and power extremes and margins, in the summary's order."""
    current = series["current_A"]
    return {
        "completed": shared["completed"],
        "stop_reason": trajectory.stop_reason,
        "duration_s": shared["duration_s"],
        "cell_temperature_max_degC": shared["cell_temperature_max_degC"],
        "cell_temperature_min_degC": float(_celsius(coldest.min())),
        "cell_temperature_rise_K": shared["cell_temperature_rise_K"],
        "sink_temperature_max_degC": shared["sink_temperature_max_degC"],
        "voltage_min_V": shared["voltage_min_V"],
        "voltage_max_V": float(series["voltage_V"].max()),
        "cell_voltage_min_V": shared["cell_voltage_min_V"],
        "cell_voltage_max_V": shared["cell_voltage_max_V"],
        "voltage_margin_min_V": shared["voltage_margin_min_V"],
        "voltage_margin_max_V": shared["voltage_margin_max_V"],
        "temperature_margin_K": shared["temperature_margin_K"],
        "current_max_A": shared["current_max_A"],
        "discharge_current_max_A": float(max(current.max(), 0.0)),
        "charge_current_max_A": float(max(-current.min(), 0.0)) + 0.0,  # no -0.0
        "power_max_W": shared["power_max_W"],
    }


#: The energies of a mission as every table shows them (terminal, comparison, report): label, key, unit; each
#: direction apart, load side and cell side, with its losses and efficiency; the contract's net values not among them.
ENERGY_ROWS: tuple[tuple[str, str, str], ...] = (
    ("energy discharged at the terminals", "energy_discharged_Wh", "Wh"),
    ("  to the load", "energy_to_load_Wh", "Wh"),
    ("energy to the auxiliaries (fans, pumps, pack heater)", "energy_auxiliary_Wh", "Wh"),
    ("energy drawn from the cells", "energy_battery_discharged_Wh", "Wh"),
    ("energy lost in discharge", "energy_dissipated_discharge_Wh", "Wh"),
    ("energy charged at the terminals", "energy_charged_Wh", "Wh"),
    ("  regenerated (from the load)", "energy_regenerated_Wh", "Wh"),
    ("  from a charger", "energy_from_charger_Wh", "Wh"),
    ("energy stored in the cells", "energy_battery_charged_Wh", "Wh"),
    ("energy lost in charge", "energy_dissipated_charge_Wh", "Wh"),
    ("efficiency, discharge", "efficiency_discharge", ""),
    ("efficiency, charge", "efficiency_charge", ""),
    ("efficiency, round trip", "efficiency_round_trip", ""),
)
#: The net energies of the output contract (discharge minus charge), for the full summary table only.
NET_ENERGY_ROWS: tuple[tuple[str, str, str], ...] = (
    ("net energy at the terminals (discharged - charged)", "energy_load_Wh", "Wh"),
    ("net energy from the cells (drawn - stored)", "energy_battery_Wh", "Wh"),
    ("energy dissipated, both directions", "energy_dissipated_Wh", "Wh"),
    ("efficiency, out over in (both directions pooled)", "efficiency", ""),
)
#: The energy keys of the summary in its order: each direction apart, then the contract's net values.
ENERGY_KEYS: tuple[str, ...] = (
    "energy_discharged_Wh", "energy_to_load_Wh", "energy_auxiliary_Wh", "energy_battery_discharged_Wh",
    "energy_dissipated_discharge_Wh",
    "energy_charged_Wh", "energy_regenerated_Wh", "energy_from_charger_Wh", "energy_battery_charged_Wh",
    "energy_dissipated_charge_Wh",
    "energy_battery_Wh", "energy_load_Wh", "energy_dissipated_Wh",
)


#: What the BMS's derating cost the mission, as every table names it: label, key, unit.
DERATING_ROWS: tuple[tuple[str, str, str], ...] = (
    ("energy demanded (discharge)", "energy_demanded_Wh", "Wh"),
    ("energy not delivered", "energy_not_delivered_Wh", "Wh"),
    ("energy not accepted (charge refused)", "energy_not_accepted_Wh", "Wh"),
    ("time derated", "time_derated_s", "s"),
    ("  of it held at a voltage limit", "time_voltage_held_s", "s"),
    ("largest shortfall", "power_shortfall_max_W", "W"),
)
#: The summary keys of the pack specification's limits: the worst values, and the margins (None where not set).
LIMIT_KEYS: tuple[str, ...] = (
    "cell_discharge_current_max_A", "cell_charge_current_max_A", "charge_power_max_W",
    "cell_temperature_min_discharging_degC", "cell_temperature_max_charging_degC",
    "discharge_current_margin_A", "charge_current_margin_A", "discharge_power_margin_W", "charge_power_margin_W",
    "discharge_temperature_margin_K", "charge_temperature_margin_K", "sink_temperature_margin_K",
)


def _held_time(trajectory: Trajectory) -> float:
    """Time the voltage limiter held the cells at a voltage limit [s]: from each hold to its release or the end."""
    held, since = 0.0, None
    for event in trajectory.events:
        if event["event"] in (EVENT_NAMES[EV_HOLD_MIN], EVENT_NAMES[EV_HOLD_MAX]) and since is None:
            since = event["time_s"]
        elif event["event"] == EVENT_NAMES[EV_HOLD_RELEASE] and since is not None:
            held, since = held + event["time_s"] - since, None
    if since is not None and len(trajectory.times):
        held += float(trajectory.times[-1]) - since
    return held + 0.0


def _derating_summary(problem: Problem, shared: dict[str, Any], trajectory: Trajectory) -> dict[str, Any]:
    """Whether the BMS derated, what the demand asked and what the derating withheld (zero without derating)."""
    row: dict[str, Any] = {"derating": problem.derating is not None}
    for _, key, _ in DERATING_ROWS:
        row[key] = _held_time(trajectory) if key == "time_voltage_held_s" else shared[key]
    return row


def _energy_summary(problem: Problem, shared: dict[str, Any], trajectory: Trajectory, states: np.ndarray,
                    series: dict[str, np.ndarray]) -> dict[str, Any]:
    """Energies, heat balance, heater and thermostats, efficiencies and throughput, in the summary's order."""
    q = states[-1, L.quadrature_index(problem.n_rc, problem.n_cells):]
    heater = problem.thermal.heater
    regenerated, from_charger = _charge_sources(problem, trajectory, series, shared["energy_charged_Wh"])
    energies = {**shared, "energy_regenerated_Wh": regenerated, "energy_from_charger_Wh": from_charger}
    return {
        **{key: energies[key] for key in ENERGY_KEYS},
        "heat_generated_Wh": shared["heat_generated_Wh"],
        "heat_reversible_Wh": float(q[L.Q_REVERSIBLE]) / JOULES_PER_WH + 0.0,
        "heat_to_ambient_Wh": shared["heat_to_ambient_Wh"],
        "heat_stored_Wh": float(_heat_stored(problem, states)) / JOULES_PER_WH + 0.0,
        "heat_to_coolant_Wh": float(q[L.Q_COOLANT]) / JOULES_PER_WH + 0.0,
        "heat_radiated_Wh": float(q[L.Q_RADIATION]) / JOULES_PER_WH + 0.0,
        "heater_energy_Wh": float(q[L.Q_HEATER]) / JOULES_PER_WH + 0.0,
        "heater_energy_from_pack_Wh": float(q[L.Q_HEATER]) / JOULES_PER_WH + 0.0
        if heater is not None and heater.from_pack else 0.0,
        "thermostat_switches": sum(1 for e in trajectory.events if e["event"] in THERMOSTAT_EVENTS),
        "efficiency_discharge": shared["efficiency_discharge"],
        "efficiency_charge": shared["efficiency_charge"],
        "efficiency_round_trip": shared["efficiency_round_trip"],
        "efficiency": shared["efficiency"],
        "charge_throughput_Ah": shared["charge_throughput_Ah"],
    }


def _heat_stored(problem: Problem, states: np.ndarray) -> float:
    """Heat stored in the cells (each cell of a resolved pack), the sink and the coolant from the first to the last
    row [J]."""
    n_rc, n_cells, th, pk, cell = problem.n_rc, problem.n_cells, problem.thermal, problem.pack, problem.cell
    tc = states[:, L.cell_state_indices(n_rc, n_cells)[1]]
    ts = states[:, L.sink_temperature_index(n_rc, n_cells)]
    tf = states[:, L.coolant_temperature_index(n_rc, n_cells)]
    c_coolant = th.coolant.heat_capacity if th.coolant is not None else 0.0
    if problem.resolved is None:
        c_cells = pk.series * pk.parallel * cell.mass * cell.specific_heat
        stored_cells = c_cells * (tc[-1, 0] - tc[0, 0])
    else:
        stored_cells = float(np.sum(problem.resolved.heat_capacity * (tc[-1] - tc[0])))
    return (stored_cells + th.sink_heat_capacity * (ts[-1] - ts[0])
            + c_coolant * (tf[-1] - tf[0]))


def _cold_charging_time(problem: Problem, times: np.ndarray, current: np.ndarray, tc: np.ndarray) -> float:
    """Time spent charging below the charge temperature limit [s] (of the coldest cell)."""
    charging = 0.5 * (current[:-1] + current[1:]) < 0.0
    t_charge_min = problem.limits.charge_temperature_min
    return diagnostics.time_above(times, -tc, -t_charge_min, charging)


def _warnings(problem: Problem, trajectory: Trajectory, series: dict[str, np.ndarray], states: np.ndarray,
              temperatures: _Temperatures, cold_time: float) -> list[str]:
    """The warnings about the run itself: a solver failure, cold charging, capped CC-CV, table ranges."""
    times, current = series["time_s"], series["current_A"]
    tc = temperatures.coldest
    warnings: list[str] = []
    if trajectory.status == "failed":
        warnings.append(f"solver failure at t = {times[-1]:.6g} s: {trajectory.message}; "
                        "the results cover the mission up to that time only")
    t_charge_min = problem.limits.charge_temperature_min
    cold_charge = (current < 0) & (tc < t_charge_min)
    if cold_charge.any():
        warnings.append(
            f"charging below charge_temperature_min ({_celsius(t_charge_min):.1f} degC) for {cold_time:.0f} s, "
            f"coldest {float(_celsius(tc[cold_charge].min())):.1f} degC: risk of lithium plating; "
            "follow the cell maker's charge temperature window")
    for ev in trajectory.events:
        if ev["event"] == CCCV_CAP_EVENT:
            warnings.append(f"CC-CV segment {ev['origin']} reached its duration cap at t = {ev['time_s']:.0f} s "
                            "without falling below its cutoff current")
    soc, temperature = L.cell_state_indices(problem.n_rc, problem.n_cells)
    warnings += diagnostics.table_range_warnings(problem.cell, states[:, soc], states[:, temperature])
    return warnings
