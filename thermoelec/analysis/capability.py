"""Power capability: the largest constant power and current a pack gives and takes for a pulse, and what binds.

For each pulse duration, temperature and SoC of a grid, and for each of the four
capabilities (:data:`thermoelec.engine.pulse.PULSE_KINDS`: power and current,
discharge and charge), the capability is the largest constant demand whose pulse,
from a rested state at that SoC and temperature, stays inside every limit of the
pack specification and the cells' voltage limits through the whole pulse — RC
pairs charging and self-heating included, not the instantaneous ``U²/4R`` alone.
The limit met just beyond it is reported as binding.

Method. Each pulse is simulated on the batched solver (:mod:`thermoelec.engine.pulse`),
and its *pulse margin* (the least limit's distance at the pulse's end, or minus the
share of the pulse it missed when a limit stopped it) falls through zero at the
capability. The grid's demands are solved for together with scipy's vectorized
bracketing root finder (``scipy.optimize.elementwise.find_root``, Chandrupatla's
method): every iteration is one call of the batched kernel over the entries not yet
converged. The bracket runs from almost nothing to just past the instantaneous
voltage-limited demand (at which the pulse fails at once); a pulse that fails even
at almost nothing (an empty pack, a cell below its minimum discharge temperature)
has no capability, and the limit that stopped it binds. Charging below
``limits.charge_temperature_min`` gives no charge capability (that limit is the
verdict's, not an event). :func:`solo_pulse_margin` is the same margin on the
engine's CVODE driver, the reference the benchmark and the tests compare with.

Owns :class:`CapabilityGrid` (with :func:`default_grid`), :class:`Capability`
(values, binding limits, the dataset, the tidy table, the files) and
:func:`capability`; :func:`state_pulses` gives the operating-region chart its pulse
curves. Imports from engine/, physics/ and scipy; the heat maps and the report are
the output layer's (:mod:`thermoelec.output.capability_figures`).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.engine import layout as L
from thermoelec.engine.driver import integrate_problem
from thermoelec.engine.events import EVENT_NAMES, EVENT_SCALES, STOP_EVENTS
from thermoelec.engine.model import Kernels, evaluate_rows
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Problem
from thermoelec.engine.profile import Segment
from thermoelec.engine.pulse import PULSE_KINDS, PulseSet, prepare_pulses, run_pulses
from thermoelec.physics.constants import ZERO_CELSIUS
from thermoelec.physics.loads import maximum_power, terminal_power
from thermoelec.version import __version__

__all__ = ["BINDING_NONE", "DEFAULT_PULSES", "DEFAULT_TEMPERATURES", "Capability", "CapabilityGrid",
           "bracket_ends", "capability", "default_grid", "solo_pulse_margin", "state_pulses"]

#: Pulse durations of a capability by default [s] (the 2 s, 10 s and 30 s of pack specifications, common practice).
DEFAULT_PULSES = (2.0, 10.0, 30.0)
#: Temperatures of the grid where the cell's tables have no temperature axis [K] (the discharge window of
#: Li-ion cells, about -20..60 degC, common practice).
DEFAULT_TEMPERATURES = tuple(ZERO_CELSIUS + t for t in (-20.0, 0.0, 25.0, 45.0))
#: The most SoC points of a default grid: an OCV table with more gives 11 points from 0 to 1.
MAX_DEFAULT_SOCS = 21
#: The bracket's upper end: this many times the instantaneous voltage-limited demand (the pulse then fails at once).
BRACKET_FACTOR = 1.05
#: The bracket's lower end, relative to its upper end: a pulse that fails already there has no capability.
NEAR_ZERO = 1e-9
#: Relative tolerance of the capability on the demand [-] (well inside the events' own accuracy).
DEMAND_RTOL = 1e-10
#: The binding limit of an entry with no pulse solved (the solver gave up).
BINDING_NONE = "not_solved"
#: Why charging below the charge temperature limit has no capability (a check of the verdict, not an event).
COLD_CHARGE = "charge_temperature_min"


@dataclass(frozen=True)
class CapabilityGrid:
    """The pulse durations, temperatures and SoC a capability is computed for.

    Attributes
    ----------
    durations : float64 array
        Pulse durations [s], > 0.
    temperatures : float64 array
        Temperatures of the cells, the sink and the ambient at the pulse start [K].
    socs : float64 array
        State of charge at the pulse start [-], within 0..1.
    """

    durations: np.ndarray
    temperatures: np.ndarray
    socs: np.ndarray

    @property
    def shape(self) -> tuple[int, int, int]:
        """``(durations, temperatures, socs)`` [-]."""
        return len(self.durations), len(self.temperatures), len(self.socs)

    @property
    def size(self) -> int:
        """Entries of the grid, each with four capabilities [-]."""
        return int(np.prod(self.shape))


def default_grid(problem: Problem, durations: tuple[float, ...] = DEFAULT_PULSES) -> CapabilityGrid:
    """The grid a scenario's cell suggests: its OCV table's SoC points and its resistance tables' temperatures.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].
    durations : tuple of float
        Pulse durations [s].

    Returns
    -------
    CapabilityGrid
        SoC: the OCV table's points (11 points 0..1 for a table of more than
        :data:`MAX_DEFAULT_SOCS`); temperatures: the breakpoints of the R0 and RC
        resistance tables over temperature, else :data:`DEFAULT_TEMPERATURES`.
    """
    cell = problem.cell
    socs = np.asarray(cell.ocv_soc, float)
    if len(socs) > MAX_DEFAULT_SOCS:
        socs = np.linspace(0.0, 1.0, 11)
    axes = [np.asarray(law.temperature, float) for law in (cell.r0, *(pair.resistance for pair in cell.rc))
            if len(law.temperature) > 1]
    temperatures = np.unique(np.concatenate(axes)) if axes else np.array(DEFAULT_TEMPERATURES)
    return CapabilityGrid(np.asarray(durations, float), temperatures, socs)


@dataclass
class Capability:
    """The capability of a pack over a grid.

    Attributes
    ----------
    grid : CapabilityGrid
        Durations [s], temperatures [K], SoC [-].
    values : dict of str to float64 array, shape grid.shape
        For each kind of :data:`~thermoelec.engine.pulse.PULSE_KINDS` the largest demand's magnitude
        [W or A]; NaN where no pulse was solved.
    binding : dict of str to object array, shape grid.shape
        The limit met just beyond it (a stop reason of :data:`thermoelec.engine.events.STOP_REASONS`,
        ``charge_temperature_min``, or :data:`BINDING_NONE`).
    end_power : dict of str to float64 array, shape grid.shape
        Power to the load at the end of the pulse at the capability [W] (negative while charging).
    metadata : dict
        Scenario, version, tolerance.
    """

    grid: CapabilityGrid
    values: dict[str, np.ndarray]
    binding: dict[str, np.ndarray]
    end_power: dict[str, np.ndarray]
    metadata: dict[str, Any]

    def to_dataset(self):
        """An xarray Dataset: dimensions ``duration`` x ``temperature`` x ``soc``, ``units`` attributes."""
        import xarray as xr

        g = self.grid
        coords = {"duration": ("duration", g.durations, {"units": "s", "long_name": "pulse duration"}),
                  "temperature": ("temperature", g.temperatures - ZERO_CELSIUS,
                                  {"units": "degC", "long_name": "cell, sink and ambient temperature at the start"}),
                  "soc": ("soc", g.socs, {"units": "1", "long_name": "state of charge at the start"})}
        dims = ("duration", "temperature", "soc")
        data = {}
        for kind in PULSE_KINDS:
            data[f"{kind.name}_{kind.unit}"] = (dims, self.values[kind.name], {
                "units": kind.unit, "long_name": f"largest constant {kind.mode} of a {kind.name.split('_')[0]} pulse"})
            data[f"{kind.name}_limit"] = (dims, self.binding[kind.name].astype(str), {
                "long_name": f"the limit that binds the {kind.name.replace('_', ' ')}"})
        ds = xr.Dataset(data, coords=coords)
        ds.attrs.update({k: v if isinstance(v, (str, int, float)) else str(v) for k, v in self.metadata.items()})
        return ds

    def table(self):
        """The tidy table: one row per duration, temperature and SoC, a column per capability and its limit."""
        import pandas as pd

        d, t, z = np.meshgrid(self.grid.durations, self.grid.temperatures - ZERO_CELSIUS, self.grid.socs,
                              indexing="ij")
        frame = {"duration_s": d.ravel(), "temperature_degC": t.ravel(), "soc": z.ravel()}
        for kind in PULSE_KINDS:
            frame[f"{kind.name}_{kind.unit}"] = self.values[kind.name].ravel()
            frame[f"{kind.name}_limit"] = self.binding[kind.name].ravel()
        return pd.DataFrame(frame)

    def write(self, out_dir: str | Path) -> list[Path]:
        """Write ``capability.csv`` (tidy) and ``capability.nc`` into ``out_dir``."""
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        written = [out / "capability.csv", out / "capability.nc"]
        self.table().to_csv(written[0], index=False, float_format="%.9g")
        self.to_dataset().to_netcdf(written[1])
        return written


def _limit_name(event: int) -> str:
    """The limit an event stands for: its stop reason (``soc_empty`` -> ``soc_limit``), else its name."""
    return STOP_EVENTS.get(int(event), EVENT_NAMES[int(event)]) if event >= 0 else BINDING_NONE


def _instantaneous(pulses: PulseSet) -> tuple[np.ndarray, ...]:
    """At each rested start (temperature x SoC): the pack currents that put a cell at voltage_min and at
    voltage_max at once, and the pack's source and resistance [A, A, V, Ω] (the kernels' voltage-limiter
    currents, read with the derating's flag set on a copy)."""
    nt, nz, n = pulses.starts.shape
    params = np.repeat(pulses.params, nz, axis=0)
    params[:, L.H_DERATE] = 1.0  # no tables: the hold currents alone
    alg = np.empty((nt * nz, L.N_ALGEBRAICS))
    evaluate_rows(pulses.starts.reshape(nt * nz, n), params, alg)
    shape = (nt, nz)
    return (alg[:, L.A_HOLD_DISCHARGE].reshape(shape), alg[:, L.A_HOLD_CHARGE].reshape(shape),
            alg[:, L.A_EMF].reshape(shape), alg[:, L.A_RESISTANCE].reshape(shape))


def bracket_ends(pulses: PulseSet, kinds: np.ndarray, ti: np.ndarray, zi: np.ndarray) -> np.ndarray:
    """Each entry's bracket end: :data:`BRACKET_FACTOR` times the instantaneous voltage-limited current, or the
    power there (at most the maximum power ``E^2 / 4R``) [A or W]; 0 where a cell is past its limit at rest.

    The batched search brackets from :data:`NEAR_ZERO` times this; the benchmark's solo loop uses the same
    bracket, so the two searches start alike.

    Parameters
    ----------
    pulses : PulseSet
        The rested starts of the grid (:func:`thermoelec.engine.pulse.prepare_pulses`).
    kinds, ti, zi : int arrays
        Per entry: its index into :data:`~thermoelec.engine.pulse.PULSE_KINDS`, the temperature's and the
        SoC's index into the grid [-].

    Returns
    -------
    float64 array
        The upper end of each entry's bracket [A or W].
    """
    hold_dis, hold_ch, emf, resistance = _instantaneous(pulses)
    current = np.where([PULSE_KINDS[k].sign > 0 for k in kinds], hold_dis[ti, zi], -hold_ch[ti, zi])
    current = np.maximum(current, 0.0)
    e, r = emf[ti, zi], resistance[ti, zi]
    sign = np.array([PULSE_KINDS[k].sign for k in kinds])
    power = np.abs(terminal_power(e, r, sign * current))
    power = np.where((sign > 0) & (current > 0.5 * e / r), maximum_power(e, r), power)
    is_power = np.array([PULSE_KINDS[k].mode == "power" for k in kinds])
    return BRACKET_FACTOR * np.where(is_power, power, current)


def capability(problem: Problem, grid: CapabilityGrid, options: SolverOptions,
               metadata: dict[str, Any] | None = None, kinds: tuple[str, ...] | None = None) -> Capability:
    """The capabilities of a pack over a grid, solved together on the batched solver.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units (its segments are not used) [SI].
    grid : CapabilityGrid
        Pulse durations [s], temperatures [K], SoC [-].
    options : SolverOptions
        Tolerances of the pulses [-, and per state -, V, K, J, C].
    metadata : dict, optional
        What the outputs should carry besides the version and the tolerance.
    kinds : tuple of str, optional
        Names of :data:`~thermoelec.engine.pulse.PULSE_KINDS` to solve for (default all four;
        the others are left NaN, bound by :data:`BINDING_NONE`).

    Returns
    -------
    Capability
        Largest demands [W, A], their binding limits, the power at each pulse's end [W].
    """
    from scipy.optimize import elementwise

    pulses = prepare_pulses(problem, grid.temperatures, grid.socs, options)
    shape = (len(PULSE_KINDS), *grid.shape)
    k, d, ti, zi = (a.ravel() for a in np.indices(shape))
    wanted = np.array([kinds is None or PULSE_KINDS[j].name in kinds for j in k])
    k, d, ti, zi = k[wanted], d[wanted], ti[wanted], zi[wanted]
    durations = grid.durations[d]
    values, binding, end_power = np.zeros(k.size), np.full(k.size, BINDING_NONE, dtype=object), np.zeros(k.size)
    charging = np.array([PULSE_KINDS[j].sign < 0 for j in k])
    cold = charging & (grid.temperatures[ti] < problem.limits.charge_temperature_min)
    binding[cold] = COLD_CHARGE
    # a cell at its voltage limit at rest (an empty cell's OCV at voltage_min) takes no pulse that way
    high = bracket_ends(pulses, k, ti, zi)
    at_limit = ~cold & ~(high > 0.0)
    binding[at_limit] = np.where(charging[at_limit], "voltage_max", "voltage_min")
    todo = np.flatnonzero(~cold & ~at_limit)
    high = high[todo]
    low = high * NEAR_ZERO

    def margin(demand: np.ndarray, entry: np.ndarray) -> np.ndarray:
        e = todo[entry.astype(np.int64)]
        return run_pulses(pulses, demand, ti[e], zi[e], k[e], durations[e])[0]

    at_low, low_events, _ = run_pulses(pulses, low, ti[todo], zi[todo], k[todo], durations[todo])
    none = ~(at_low > 0.0)
    binding[todo[none]] = [_limit_name(e) for e in low_events[none]]
    values[todo[np.isnan(at_low)]] = np.nan
    search = np.flatnonzero(~none)
    if search.size:
        res = elementwise.find_root(margin, (low[search], high[search]), args=(search.astype(float),),
                                    tolerances={"xrtol": DEMAND_RTOL, "xatol": 0.0})
        found = res.bracket[0]
        _, events, _ = run_pulses(pulses, res.bracket[1], ti[todo[search]], zi[todo[search]], k[todo[search]],
                                  durations[todo[search]])
        _, _, power = run_pulses(pulses, found, ti[todo[search]], zi[todo[search]], k[todo[search]],
                                 durations[todo[search]])
        values[todo[search]], end_power[todo[search]] = found, power
        binding[todo[search]] = [_limit_name(e) for e in events]
        values[todo[search[~res.success]]] = np.nan
        binding[todo[search[~res.success]]] = BINDING_NONE
    info = {"thermoelec_version": __version__, "rtol": options.rtol, "scenario": problem.name,
            "method": "batched pulses, scipy.optimize.elementwise.find_root (Chandrupatla) on the pulse margin",
            **(metadata or {})}
    return Capability(grid, *(_by_kind(a, wanted, shape, fill) for a, fill in
                              ((values, np.nan), (binding, BINDING_NONE), (end_power, np.nan))), info)


def _by_kind(flat: np.ndarray, wanted: np.ndarray, shape: tuple[int, ...], fill: Any) -> dict[str, np.ndarray]:
    """The solved entries (``wanted`` of the full (kind, duration, temperature, SoC) grid) as one array per kind,
    ``fill`` where not solved for."""
    full = np.full(int(np.prod(shape)), fill, dtype=flat.dtype)
    full[wanted] = flat
    full = full.reshape(shape)
    return {kind.name: full[j] for j, kind in enumerate(PULSE_KINDS)}


def state_pulses(problem: Problem, states: list[tuple[float, float]], durations: tuple[float, ...],
                 options: SolverOptions) -> list[dict[str, np.ndarray]]:
    """The discharge pulse capability from rest at given states: for the operating-region chart.

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].
    states : list of (float, float)
        SoC [-] and cell temperature [K] of each state.
    durations : tuple of float
        Pulse durations [s].
    options : SolverOptions
        Tolerances of the pulses.

    Returns
    -------
    list of dict
        Per state: ``duration_s``, ``current_A`` (the largest constant current of each
        pulse), ``power_W`` (the power to the load at its end), ``binding`` (its limit).
    """
    socs = np.unique([soc for soc, _ in states])
    temperatures = np.unique([temperature for _, temperature in states])
    grid = CapabilityGrid(np.asarray(durations, float), temperatures, socs)
    result = capability(problem, grid, options, kinds=("discharge_current",))
    out = []
    for soc, temperature in states:
        ti, zi = int(np.searchsorted(temperatures, temperature)), int(np.searchsorted(socs, soc))
        out.append({"duration_s": grid.durations, "current_A": result.values["discharge_current"][:, ti, zi],
                    "power_W": result.end_power["discharge_current"][:, ti, zi],
                    "binding": result.binding["discharge_current"][:, ti, zi]})
    return out


def solo_pulse_margin(problem: Problem, kind: str, duration: float, temperature: float, soc: float, demand: float,
                      options: SolverOptions) -> tuple[float, str]:
    """The pulse margin of one pulse on the CVODE driver (the reference of the batched one).

    Parameters
    ----------
    problem : Problem
        The scenario in SI units [SI].
    kind : str
        A name of :data:`~thermoelec.engine.pulse.PULSE_KINDS`.
    duration : float
        Pulse duration [s].
    temperature : float
        Cells, sink and ambient at the start [K].
    soc : float
        SoC at the start (every cell) [-].
    demand : float
        Magnitude of the demand [W or A].
    options : SolverOptions
        Back end and tolerances.

    Returns
    -------
    margin : float
        As :func:`thermoelec.engine.pulse.pulse_margins` computes it [-].
    limit : str
        The limit that stopped the pulse, else empty.
    """
    spec = next(k for k in PULSE_KINDS if k.name == kind)
    pulse = replace(problem, derating=None, ambient_profile=None, soak=(), initial_coolant_temperature=None,
                    segments=(Segment(spec.mode, spec.sign * demand, duration, origin="pulse"),),
                    ambient_temperature=temperature, initial_cell_temperature=temperature,
                    initial_sink_temperature=temperature, initial_soc=soc)
    if pulse.resolved is not None:
        pulse = replace(pulse, resolved=replace(pulse.resolved, initial_soc=np.full(pulse.n_cells, soc)))
    trajectory = integrate_problem(pulse, options)
    if trajectory.stop_reason != "end_of_profile":
        return -(duration - float(trajectory.times[-1])) / duration, trajectory.stop_reason
    p = trajectory.parameters
    g = Kernels(p, pulse.n_states).event_values(trajectory.states[-1])
    stops = [e for e in range(len(g)) if p[L.H_ACTIVE + e] != 0.0 and e in STOP_EVENTS]
    return float(min(g[e] / EVENT_SCALES[e] for e in stops)), ""
