"""The metrics of a mission, defined once: the sweep's contract and the energy accounting.

:data:`METRICS` are the per-scenario numbers a sweep keeps (the numeric keys of
the output contract and a few more). The solo path (:mod:`thermoelec.analysis.results`)
and the batched one (:func:`batch_metrics`) compute them from the same pieces:
the final quadratures of the integration, the running extremes, the problem.

Energy accounting (pack level, as areas under the voltage-charge curves):
battery energy ``∫ Ns U I dt``, load energy ``∫ V I dt``, their difference the
energy dissipated (Bernardi, Pawlikowski & Newman, J. Electrochem. Soc. 132
(1985) 5).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from thermoelec.engine import layout as L
from thermoelec.engine.batch import X_ARRHENIUS, X_I_ABS, X_TC_MAX, X_TS_MAX, X_V_MIN, X_VCELL_MIN, BatchOutcome
from thermoelec.engine.problem import Problem

__all__ = ["METRICS", "batch_metrics", "energy_totals", "round_trip_efficiency"]

KELVIN_AT_0_DEGC = 273.15
JOULES_PER_WH = 3600.0
COULOMBS_PER_AH = 3600.0

#: Summary metrics kept per scenario of a sweep (the numeric keys of the output contract and a few more).
METRICS: tuple[str, ...] = (
    "completed", "duration_s", "cell_temperature_max_degC", "cell_temperature_rise_K", "sink_temperature_max_degC",
    "voltage_min_V", "current_max_A", "energy_battery_Wh", "energy_load_Wh", "energy_dissipated_Wh",
    "energy_discharged_Wh", "heat_generated_Wh", "heat_to_ambient_Wh", "efficiency", "charge_throughput_Ah",
    "soc_end", "voltage_margin_min_V", "temperature_margin_K", "equivalent_time_at_reference_s",
)


def finite_or_none(x: float) -> float | None:
    """``x`` as a float, or None where it is not finite (JSON has no NaN)."""
    return float(x) if math.isfinite(x) else None


def energy_totals(q: np.ndarray) -> dict[str, float]:
    """Battery and load energies [Wh] from the quadratures ``q`` (``layout.Q_*``), discharge and charge apart."""
    battery_out, battery_in = q[L.Q_BATTERY_DISCHARGE], -q[L.Q_BATTERY_CHARGE]
    load_out, load_in = q[L.Q_LOAD_DISCHARGE], -q[L.Q_LOAD_CHARGE]
    energy_battery_wh = float(battery_out - battery_in) / JOULES_PER_WH
    energy_load_wh = float(load_out - load_in) / JOULES_PER_WH
    return {
        "energy_battery_Wh": energy_battery_wh,
        "energy_load_Wh": energy_load_wh,
        "energy_dissipated_Wh": energy_battery_wh - energy_load_wh,
        "energy_discharged_Wh": float(load_out) / JOULES_PER_WH,
        "energy_charged_Wh": float(load_in) / JOULES_PER_WH,
        "energy_battery_discharged_Wh": float(battery_out) / JOULES_PER_WH,
        "energy_battery_charged_Wh": float(battery_in) / JOULES_PER_WH,
    }


def round_trip_efficiency(q: np.ndarray) -> float | None:
    """Energy out over energy in: delivered to the load and stored in the cells, over drawn from the
    cells and taken from the charger; ``None`` when nothing flowed."""
    taken = q[L.Q_BATTERY_DISCHARGE] - q[L.Q_LOAD_CHARGE]
    if taken <= 0:
        return None
    return finite_or_none((q[L.Q_LOAD_DISCHARGE] - q[L.Q_BATTERY_CHARGE]) / taken)


def batch_metrics(problem: Problem, outcome: BatchOutcome, i: int) -> dict[str, Any]:
    """The :data:`METRICS` of scenario ``i`` of a batch, from its final state and running extremes."""
    n_rc = problem.n_rc
    y, x = outcome.states[i], outcome.extras[i]
    q = y[L.quadrature_index(n_rc):]
    tc0 = outcome.initial_states[i, L.cell_temperature_index(n_rc)]
    return {
        "completed": outcome.stop_reason[i] == "end_of_profile", "duration_s": float(outcome.duration[i]),
        "cell_temperature_max_degC": x[X_TC_MAX] - KELVIN_AT_0_DEGC, "cell_temperature_rise_K": x[X_TC_MAX] - tc0,
        "sink_temperature_max_degC": x[X_TS_MAX] - KELVIN_AT_0_DEGC, "voltage_min_V": x[X_V_MIN],
        "current_max_A": x[X_I_ABS], **energy_totals(q), "heat_generated_Wh": q[L.Q_HEAT] / JOULES_PER_WH,
        "heat_to_ambient_Wh": q[L.Q_HEAT_AMBIENT] / JOULES_PER_WH, "efficiency": round_trip_efficiency(q),
        "charge_throughput_Ah": q[L.Q_THROUGHPUT] / COULOMBS_PER_AH, "soc_end": float(y[0]),
        "voltage_margin_min_V": x[X_VCELL_MIN] - problem.cell.voltage_min,
        "temperature_margin_K": problem.limits.cell_temperature_max - x[X_TC_MAX],
        "equivalent_time_at_reference_s": x[X_ARRHENIUS],
        "status": "ok", "message": "", "stop_reason": outcome.stop_reason[i],
    }
