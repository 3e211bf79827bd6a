"""The metrics of a mission, defined once: the sweep's contract and the energy accounting.

Owns :data:`METRICS` (the per-scenario numbers a sweep keeps: the numeric keys
of the output contract and a few more), :func:`mission_metrics` (the one
function that computes them, with the verdict of
:mod:`thermoelec.analysis.verdict`), the energy accounting
(:func:`energy_totals`, :func:`efficiencies`) and the pack limits
(:func:`pack_limits`).
The solo summary (:mod:`thermoelec.analysis.results`) and the batched rows
(:func:`batch_metrics`) both call :func:`mission_metrics`, from the same pieces:
the problem, the start and final states (with the quadratures), and the running
extremes (:class:`Extremes`) — the solo path takes its extremes from the output
rows, the batch from the extremes its kernel keeps over every accepted step.

Energy accounting (pack level, as areas under the voltage-charge curves):
battery energy ``∫ Ns U I dt``, load energy ``∫ V I dt``, their difference the
energy dissipated (Bernardi, Pawlikowski & Newman, J. Electrochem. Soc. 132
(1985) 5). Discharge and charge are kept apart (the quadratures integrate
``I > 0`` and ``I < 0`` separately), so a recharge never nets out a ride.

Imports only from engine/, physics/ and analysis/verdict; never from output/,
fit/, the API or the command line.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from thermoelec.analysis.verdict import failed_checks, limit_checks, verdict
from thermoelec.engine import layout as L
from thermoelec.engine.batch import EXTREMES, BatchOutcome
from thermoelec.engine.problem import Problem
from thermoelec.physics.constants import COULOMBS_PER_AH, JOULES_PER_WH, ZERO_CELSIUS

__all__ = ["METRICS", "PACK_METRICS", "VERDICT_KEYS", "Extremes", "batch_metrics", "efficiencies", "energy_totals",
           "metric_names", "mission_metrics", "pack_limits", "pack_soc", "round_trip_efficiency"]

#: Summary metrics kept per scenario of a sweep (the numeric keys of the output contract and a few more: the
#: energies apart, the efficiencies and what the verdict of :mod:`thermoelec.analysis.verdict` reads).
METRICS: tuple[str, ...] = (
    "completed", "duration_s", "cell_temperature_max_degC", "cell_temperature_rise_K", "sink_temperature_max_degC",
    "voltage_min_V", "cell_voltage_min_V", "cell_voltage_max_V", "current_max_A", "power_max_W",
    "energy_battery_Wh", "energy_load_Wh", "energy_dissipated_Wh",
    "energy_discharged_Wh", "energy_to_load_Wh", "energy_auxiliary_Wh", "energy_battery_discharged_Wh",
    "energy_dissipated_discharge_Wh", "energy_charged_Wh", "energy_battery_charged_Wh", "energy_dissipated_charge_Wh",
    "heat_generated_Wh", "heat_to_ambient_Wh",
    "efficiency", "efficiency_discharge", "efficiency_charge", "efficiency_round_trip",
    "charge_throughput_Ah", "soc_end", "voltage_margin_min_V", "voltage_margin_max_V", "temperature_margin_K",
    "time_charging_below_limit_s", "equivalent_time_at_reference_s",
    # the demand and the BMS's derating (0 without derating)
    "energy_demanded_Wh", "energy_not_delivered_Wh", "energy_not_accepted_Wh", "time_derated_s",
    "power_shortfall_max_W",
    # the limits of the pack specification: worst values, and margins (None where a limit is not set)
    "cell_discharge_current_max_A", "cell_charge_current_max_A", "charge_power_max_W",
    "cell_temperature_min_discharging_degC", "cell_temperature_max_charging_degC",
    "discharge_current_margin_A", "charge_current_margin_A", "discharge_power_margin_W", "charge_power_margin_W",
    "discharge_temperature_margin_K", "charge_temperature_margin_K", "sink_temperature_margin_K",
)
#: The metrics a resolved pack adds (``pack.model = "resolved"``): the largest difference between the
#: hottest and the coldest cell and when, the SoC spread at the end, the largest current of a cell over
#: its group's mean, the hottest cell (numbered from 1) and when it peaked, the cell at the limit that
#: stopped the mission (None when none did). A lumped pack's rows do not have them.
PACK_METRICS: tuple[str, ...] = (
    "cell_temperature_spread_max_K", "cell_temperature_spread_time_s", "soc_spread_end", "current_share_max",
    "hottest_cell", "hottest_cell_time_s", "first_limit_cell",
)


def metric_names(problem: Problem) -> tuple[str, ...]:
    """The metrics of a problem's rows: :data:`METRICS`, and :data:`PACK_METRICS` for a resolved pack.

    Parameters
    ----------
    problem : Problem
        The problem.

    Returns
    -------
    tuple of str
        Metric names in order.
    """
    return METRICS + (PACK_METRICS if problem.resolved is not None else ())


def pack_soc(problem: Problem, state: np.ndarray) -> tuple[float, float]:
    """The pack's SoC (capacity-weighted over the cells) and the spread of the cells' SoC in a state.

    Parameters
    ----------
    problem : Problem
        The problem (its resolved pack's capacities).
    state : array
        A state vector (``layout``) [-, V, K, J, C].

    Returns
    -------
    soc : float
        The pack's SoC [-] (the one cell's for a lumped pack).
    spread : float
        Highest minus lowest cell SoC [-] (0 for a lumped pack).
    """
    if problem.resolved is None:
        return float(state[0]), 0.0
    z = state[L.cell_state_indices(problem.n_rc, problem.n_cells)[0]]
    q = problem.resolved.capacity_factor
    return float(np.sum(q * z) / np.sum(q)), float(z.max() - z.min())
#: Text kept per scenario of a sweep besides the numbers: the verdict and the checks it failed.
VERDICT_KEYS: tuple[str, ...] = ("verdict", "failed_checks")


@dataclass(frozen=True)
class Extremes:
    """The running extremes of a mission (field names and order: :data:`thermoelec.engine.batch.EXTREMES`).

    Attributes
    ----------
    cell_temperature_max : float
        Highest cell temperature [K].
    sink_temperature_max : float
        Highest heat-sink temperature [K].
    voltage_min : float
        Lowest pack terminal voltage [V].
    cell_voltage_min : float
        Lowest cell terminal voltage [V].
    current_abs_max : float
        Largest pack current magnitude [A].
    equivalent_time_at_reference : float
        Arrhenius-weighted time at the ageing reference temperature [s] (of the hottest
        cell): a trapezoid over the output rows on the solo path, over the accepted steps
        in the batch.
    cell_voltage_max : float
        Highest cell terminal voltage [V].
    power_max : float
        Highest power to the load [W].
    cold_charging_time : float
        Time spent charging below the charge temperature limit [s] (of the coldest cell),
        the crossings interpolated over the output rows (solo) or the accepted steps (batch).
    cell_temperature_spread_max : float
        Largest difference between the hottest and the coldest cell [K] (0 for a lumped pack).
    cell_temperature_spread_time : float
        When it was largest [s].
    current_share_max : float
        Largest current of one cell over its group's mean [-] (1 for a lumped pack).
    hottest_cell : float
        The cell that reached the highest temperature, from 0 [-].
    hottest_time : float
        When it did [s].
    auxiliary_energy : float
        Energy the running auxiliaries (fans, pumps, a pack-fed heater) drew at the pack
        terminals [J]; their power is constant within a phase, so both paths sum it exactly.
    auxiliary_energy_discharge : float
        The part of it while the pack discharged (mean current of a row interval or a step
        positive) [J].
    cell_discharge_current_max, cell_charge_current_max : float
        Largest discharge current of a cell, largest charge current of a cell (a magnitude) [A].
    charge_power_max : float
        Largest power into the terminals while charging (a magnitude) [W].
    discharge_current_margin, charge_current_margin : float
        Least margin to the cell current limits [A] (``inf`` without one).
    discharge_power_margin, charge_power_margin : float
        Least margin to the pack power limits [W] (``inf`` without one).
    discharging_temperature_min : float
        The coldest cell while the pack discharged [K] (``inf`` if it never did).
    charging_temperature_max : float
        The hottest cell while the pack charged [K] (``-inf`` if it never did).
    derated_time : float
        Time the delivered current differed from the demand's [s], the crossings interpolated.
    shortfall_max : float
        Largest difference between the demanded and the delivered power [W].
    """

    cell_temperature_max: float
    sink_temperature_max: float
    voltage_min: float
    cell_voltage_min: float
    current_abs_max: float
    equivalent_time_at_reference: float
    cell_voltage_max: float
    power_max: float
    cold_charging_time: float
    cell_temperature_spread_max: float = 0.0
    cell_temperature_spread_time: float = 0.0
    current_share_max: float = 1.0
    hottest_cell: float = 0.0
    hottest_time: float = 0.0
    auxiliary_energy: float = 0.0
    auxiliary_energy_discharge: float = 0.0
    cell_discharge_current_max: float = 0.0
    cell_charge_current_max: float = 0.0
    charge_power_max: float = 0.0
    discharge_current_margin: float = math.inf
    charge_current_margin: float = math.inf
    discharge_power_margin: float = math.inf
    charge_power_margin: float = math.inf
    discharging_temperature_min: float = math.inf
    charging_temperature_max: float = -math.inf
    derated_time: float = 0.0
    shortfall_max: float = 0.0

    @classmethod
    def from_batch(cls, extras: np.ndarray) -> Extremes:
        """The extremes of one scenario from the batched kernel's ``extras`` row (order of ``EXTREMES``)."""
        return cls(**{name: float(value) for name, value in zip(EXTREMES, extras, strict=True)})


def finite_or_none(x: float) -> float | None:
    """``x`` as a float, or None where it is not finite (JSON has no NaN)."""
    return float(x) if math.isfinite(x) else None


def _wh(joules: float) -> float:
    """Joules as watt-hours, with no negative zero (``-0.0 + 0.0`` is ``0.0``)."""
    return float(joules) / JOULES_PER_WH + 0.0


def energy_totals(q: np.ndarray) -> dict[str, float]:
    """Battery and load energies and the losses, discharge and charge apart, and the contract's net values.

    Parameters
    ----------
    q : array
        Final quadratures of the integration (indices ``layout.Q_*``) [J, C].

    Returns
    -------
    dict of str to float
        In Wh: the contract's net ``energy_battery_Wh`` (∫ Ns U I dt), ``energy_load_Wh`` (∫ V I dt) and
        ``energy_dissipated_Wh`` (their difference, the sum of both losses); then the discharge
        (``energy_discharged_Wh`` to the load, ``energy_battery_discharged_Wh`` from the cells,
        ``energy_dissipated_discharge_Wh`` lost between them) and the charge (``energy_charged_Wh``
        into the terminals, ``energy_battery_charged_Wh`` stored in the cells,
        ``energy_dissipated_charge_Wh`` lost between them), never netted, never -0.0.
    """
    battery_out, battery_in = q[L.Q_BATTERY_DISCHARGE], -q[L.Q_BATTERY_CHARGE]
    load_out, load_in = q[L.Q_LOAD_DISCHARGE], -q[L.Q_LOAD_CHARGE]
    return {
        "energy_battery_Wh": _wh(battery_out - battery_in),
        "energy_load_Wh": _wh(load_out - load_in),
        "energy_dissipated_Wh": _wh(battery_out - battery_in) - _wh(load_out - load_in) + 0.0,
        "energy_discharged_Wh": _wh(load_out),
        "energy_battery_discharged_Wh": _wh(battery_out),
        "energy_dissipated_discharge_Wh": _wh(battery_out - load_out),
        "energy_charged_Wh": _wh(load_in),
        "energy_battery_charged_Wh": _wh(battery_in),
        "energy_dissipated_charge_Wh": _wh(load_in - battery_in),
    }


def round_trip_efficiency(q: np.ndarray) -> float | None:
    """Energy out over energy in [-]: delivered to the load and stored in the cells, over drawn from the
    cells and taken from the charger; ``None`` when nothing flowed (the contract's ``efficiency``).

    Parameters
    ----------
    q : array
        Final quadratures of the integration (indices ``layout.Q_*``) [J, C].
    """
    taken = q[L.Q_BATTERY_DISCHARGE] - q[L.Q_LOAD_CHARGE]
    if taken <= 0:
        return None
    return finite_or_none((q[L.Q_LOAD_DISCHARGE] - q[L.Q_BATTERY_CHARGE]) / taken)


def efficiencies(q: np.ndarray) -> dict[str, float | None]:
    """The contract's ``efficiency`` and the discharge, charge and round-trip efficiencies [-].

    Parameters
    ----------
    q : array
        Final quadratures of the integration (indices ``layout.Q_*``) [J, C].

    Returns
    -------
    dict of str to float or None
        ``efficiency`` (:func:`round_trip_efficiency`: out over in, both directions pooled);
        ``efficiency_discharge`` (to the load over drawn from the cells), ``efficiency_charge``
        (stored in the cells over fed to the terminals) and ``efficiency_round_trip`` (their
        product: of the energy a charge feeds in at these losses, the share a discharge at these
        losses delivers); None where a direction moved no energy.
    """
    battery_out, battery_in = q[L.Q_BATTERY_DISCHARGE], -q[L.Q_BATTERY_CHARGE]
    load_out, load_in = q[L.Q_LOAD_DISCHARGE], -q[L.Q_LOAD_CHARGE]
    discharge = finite_or_none(load_out / battery_out) if battery_out > 0 else None
    charge = finite_or_none(battery_in / load_in) if load_in > 0 else None
    return {
        "efficiency": round_trip_efficiency(q),
        "efficiency_discharge": discharge,
        "efficiency_charge": charge,
        "efficiency_round_trip": discharge * charge if discharge is not None and charge is not None else None,
    }


def pack_limits(problem: Problem) -> dict[str, Any]:
    """Pack-level limits and layout, for the verdict, plots and reports.

    Parameters
    ----------
    problem : Problem
        The simulated problem.

    Returns
    -------
    dict of str to float
        ``voltage_min_V`` and ``voltage_max_V`` (pack, Ns times the cell's) [V], the cell's
        ``cell_voltage_min_V`` and ``cell_voltage_max_V`` [V], ``cell_temperature_max_degC`` and
        ``charge_temperature_min_degC`` [degC], ``series`` and ``parallel`` [-], ``capacity_Ah`` of a cell [Ah];
        and for each limit of the pack specification that is set, its key with the value of a constant (None for
        a table: ``discharge_current_max_A``, ``charge_current_max_A`` per cell [A], ``discharge_power_max_W``,
        ``charge_power_max_W`` [W], ``discharge_temperature_min_degC``, ``charge_temperature_max_degC``,
        ``sink_temperature_max_degC`` [degC]); ``derating`` (True) with a BMS's derating.
    """
    ns, cell, lim = problem.pack.series, problem.cell, problem.limits
    limits: dict[str, Any] = {
        "voltage_min_V": ns * cell.voltage_min,
        "voltage_max_V": ns * cell.voltage_max,
        "cell_voltage_min_V": cell.voltage_min,
        "cell_voltage_max_V": cell.voltage_max,
        "cell_temperature_max_degC": float(lim.cell_temperature_max - ZERO_CELSIUS),
        "charge_temperature_min_degC": float(lim.charge_temperature_min - ZERO_CELSIUS),
        "series": ns,
        "parallel": problem.pack.parallel,
        "capacity_Ah": cell.capacity / COULOMBS_PER_AH,
    }
    # the limits of the pack specification that are set: a constant's value, None for a table
    for key, table in (("discharge_current_max_A", lim.discharge_current_max),
                       ("charge_current_max_A", lim.charge_current_max),
                       ("discharge_power_max_W", lim.discharge_power_max),
                       ("charge_power_max_W", lim.charge_power_max)):
        if table is not None:
            limits[key] = table.values[0] if table.is_constant else None
    for key, temperature in (("discharge_temperature_min_degC", lim.discharge_temperature_min),
                             ("charge_temperature_max_degC", lim.charge_temperature_max),
                             ("sink_temperature_max_degC", lim.sink_temperature_max)):
        if temperature is not None:
            limits[key] = float(temperature - ZERO_CELSIUS)
    if problem.derating is not None:
        limits["derating"] = True
    return limits


def _energies(q: np.ndarray, extremes: Extremes) -> dict[str, float]:
    """:func:`energy_totals`, and the load's and the auxiliaries' shares [Wh]: what the load itself received is
    the terminals' discharge less the auxiliaries' draw meanwhile."""
    energies = energy_totals(q)
    energies["energy_to_load_Wh"] = energies["energy_discharged_Wh"] - _wh(extremes.auxiliary_energy_discharge) + 0.0
    energies["energy_auxiliary_Wh"] = _wh(extremes.auxiliary_energy)
    return energies


def mission_metrics(problem: Problem, start: np.ndarray, end: np.ndarray, extremes: Extremes, duration: float,
                    stop_reason: str, status: str = "ok", stop_cell: int | None = None) -> dict[str, Any]:
    """The metrics of one mission (:func:`metric_names`; and the energy parts of :func:`energy_totals`).

    Parameters
    ----------
    problem : Problem
        The simulated problem (layout, cell voltage limits, cell temperature limit).
    start, end : arrays
        State vector at the mission start (after any soak) and at its end, quadratures
        included (``layout``: SoC [-], RC voltages [V], temperatures [K], quadratures [J, C]).
    extremes : Extremes
        Running extremes of the mission [K, V, A, s].
    duration : float
        Mission time from start to end [s].
    stop_reason : str
        Why the mission ended (``end_of_profile`` or a stop reason of ``engine.events``).
    status : str
        ``"ok"`` or ``"failed"`` (a failed run is never ``completed``).
    stop_cell : int, optional
        The cell (from 0) at the limit that stopped a resolved pack's mission.

    Returns
    -------
    dict
        Every key of :data:`METRICS` (in its order); temperatures [degC], differences [K],
        voltages [V], currents [A], power [W], energies [Wh], efficiencies [-], charge [Ah],
        times [s]; then the :data:`VERDICT_KEYS`: ``verdict`` (``"pass"`` / ``"fail"``, from
        :func:`thermoelec.analysis.verdict.limit_checks`) and ``failed_checks`` (their names,
        comma-separated); then those of :data:`PACK_METRICS` for a resolved pack (cells
        numbered from 1).

    Notes
    -----
    The Arrhenius-equivalent time is the one in ``extremes``; the solo and batched paths
    integrate it differently by nature (see :class:`Extremes`), so they agree to the
    resolution of the output rows only.
    """
    q = end[L.quadrature_index(problem.n_rc, problem.n_cells):]
    cell_temperature_start = start[L.cell_state_indices(problem.n_rc, problem.n_cells)[1]].max()
    soc_end, soc_spread = pack_soc(problem, end)
    energies = _energies(q, extremes)
    row = {
        "completed": status == "ok" and stop_reason == "end_of_profile",
        "duration_s": float(duration),
        "cell_temperature_max_degC": float(extremes.cell_temperature_max - ZERO_CELSIUS),
        "cell_temperature_rise_K": float(extremes.cell_temperature_max - cell_temperature_start),
        "sink_temperature_max_degC": float(extremes.sink_temperature_max - ZERO_CELSIUS),
        "voltage_min_V": float(extremes.voltage_min),
        "cell_voltage_min_V": float(extremes.cell_voltage_min),
        "cell_voltage_max_V": float(extremes.cell_voltage_max),
        "current_max_A": float(extremes.current_abs_max),
        "power_max_W": float(extremes.power_max),
        **energies,
        "heat_generated_Wh": _wh(q[L.Q_HEAT]),
        "heat_to_ambient_Wh": _wh(q[L.Q_HEAT_AMBIENT]),
        **efficiencies(q),
        "charge_throughput_Ah": float(q[L.Q_THROUGHPUT]) / COULOMBS_PER_AH,
        "soc_end": soc_end,
        "voltage_margin_min_V": float(extremes.cell_voltage_min - problem.cell.voltage_min),
        "voltage_margin_max_V": float(problem.cell.voltage_max - extremes.cell_voltage_max),
        "temperature_margin_K": float(problem.limits.cell_temperature_max - extremes.cell_temperature_max),
        "time_charging_below_limit_s": float(extremes.cold_charging_time) + 0.0,
        "equivalent_time_at_reference_s": float(extremes.equivalent_time_at_reference),
        **_demand_metrics(q, extremes),
        **_limit_metrics(problem, extremes),
    }
    checks = limit_checks({**row, "stop_reason": stop_reason}, pack_limits(problem))
    row["verdict"] = verdict(checks)
    row["failed_checks"] = ",".join(failed_checks(checks))
    if problem.resolved is not None:
        row.update(_pack_metrics(extremes, soc_spread, stop_cell))
    return row


def _pack_metrics(extremes: Extremes, soc_spread: float, stop_cell: int | None) -> dict[str, Any]:
    """The :data:`PACK_METRICS` of a resolved pack (cells numbered from 1)."""
    return {
        "cell_temperature_spread_max_K": float(extremes.cell_temperature_spread_max),
        "cell_temperature_spread_time_s": float(extremes.cell_temperature_spread_time),
        "soc_spread_end": soc_spread,
        # no share is counted while the group's mean cell current is below C/5 (physics.pack)
        "current_share_max": float(extremes.current_share_max) if extremes.current_share_max > 0 else None,
        "hottest_cell": int(extremes.hottest_cell) + 1,
        "hottest_cell_time_s": float(extremes.hottest_time),
        "first_limit_cell": None if stop_cell is None or stop_cell < 0 else int(stop_cell) + 1,
    }


def _demand_metrics(q: np.ndarray, extremes: Extremes) -> dict[str, float]:
    """What the demand asked and what the BMS's derating withheld (all zero without derating)."""
    return {
        "energy_demanded_Wh": _wh(q[L.Q_DEMAND_DISCHARGE]),
        "energy_not_delivered_Wh": _wh(q[L.Q_SHORTFALL_DISCHARGE]),
        "energy_not_accepted_Wh": _wh(q[L.Q_SHORTFALL_CHARGE]),
        "time_derated_s": float(extremes.derated_time) + 0.0,
        "power_shortfall_max_W": float(extremes.shortfall_max) + 0.0,
    }


def _limit_metrics(problem: Problem, extremes: Extremes) -> dict[str, float | None]:
    """The worst values against the limits of the pack specification, and the margins to those set (else None)."""
    lim = problem.limits

    def margin(limit: Any, value: float) -> float | None:
        return finite_or_none(value) if limit is not None else None

    cold = finite_or_none(extremes.discharging_temperature_min - ZERO_CELSIUS)
    hot = finite_or_none(extremes.charging_temperature_max - ZERO_CELSIUS)
    return {
        "cell_discharge_current_max_A": float(extremes.cell_discharge_current_max) + 0.0,
        "cell_charge_current_max_A": float(extremes.cell_charge_current_max) + 0.0,
        "charge_power_max_W": float(extremes.charge_power_max) + 0.0,
        "cell_temperature_min_discharging_degC": cold,
        "cell_temperature_max_charging_degC": hot,
        "discharge_current_margin_A": margin(lim.discharge_current_max, extremes.discharge_current_margin),
        "charge_current_margin_A": margin(lim.charge_current_max, extremes.charge_current_margin),
        "discharge_power_margin_W": margin(lim.discharge_power_max, extremes.discharge_power_margin),
        "charge_power_margin_W": margin(lim.charge_power_max, extremes.charge_power_margin),
        "discharge_temperature_margin_K": None if lim.discharge_temperature_min is None or cold is None
        else float(extremes.discharging_temperature_min - lim.discharge_temperature_min),
        "charge_temperature_margin_K": None if lim.charge_temperature_max is None or hot is None
        else float(lim.charge_temperature_max - extremes.charging_temperature_max),
        "sink_temperature_margin_K": None if lim.sink_temperature_max is None
        else float(lim.sink_temperature_max - extremes.sink_temperature_max),
    }


def batch_metrics(problem: Problem, outcome: BatchOutcome, i: int) -> dict[str, Any]:
    """The :data:`METRICS` of scenario ``i`` of a batch, from its final state and running extremes.

    Parameters
    ----------
    problem : Problem
        The scenario's problem.
    outcome : BatchOutcome
        The batch's outcome (:func:`thermoelec.engine.batch.solve_batch`).
    i : int
        Index of the scenario in the batch.

    Returns
    -------
    dict
        :func:`mission_metrics` plus ``status`` (``"ok"``), ``message`` and ``stop_reason``. The
        Arrhenius-equivalent time is the kernel's trapezoid over accepted steps, not
        over output rows as in the solo summary.
    """
    stop_cell = None if outcome.stop_cell is None else int(outcome.stop_cell[i])
    row = mission_metrics(problem, outcome.initial_states[i], outcome.states[i],
                          Extremes.from_batch(outcome.extras[i]), outcome.duration[i], outcome.stop_reason[i],
                          stop_cell=stop_cell)
    row.update(status="ok", message="", stop_reason=outcome.stop_reason[i])
    return row
