"""The verdict of a mission, computed once: each limit's check (limit, worst value, margin, pass / fail).

Owns :data:`LIMIT_CHECKS` (the registry of checks, in the order a report lists
them), :func:`limit_checks` and :func:`verdict`. Every place that says pass or
fail reads them: ``summary.json`` (``verdict``, ``checks``), the terminal
summary, ``comparison.csv`` / ``.json``, ``sweep.nc`` / ``sweep.csv`` and the
HTML report, which only render what these functions return.

A check reads the mission's metrics (the keys of the summary, or of a sweep's
row: :func:`thermoelec.analysis.metrics.mission_metrics`) and the pack's limits
(:func:`thermoelec.analysis.metrics.pack_limits`). A limit that stopped the run
fails even at zero margin: the mission did not get through.

Imports nothing of thermoelec: the rules are plain functions of numbers.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

__all__ = ["FAIL", "LIMIT_CHECKS", "PASS", "LimitCheck", "failed_checks", "limit_checks", "verdict"]

PASS, FAIL = "pass", "fail"
#: A voltage within this of its limit still passes [V]: the events are located to about this, and a CV
#: phase holds the cells at their maximum voltage within a relative 1e-9 (``engine.mission.IMPOSED_VOLTAGE_SLACK``).
VOLTAGE_TOLERANCE = 1e-6
#: Likewise for a current [A], a power [W] and a temperature [K] of the pack specification's limits: a derated
#: current sits on its allowance exactly, an event is located to a fraction of these.
CURRENT_TOLERANCE, POWER_TOLERANCE, TEMPERATURE_TOLERANCE = 1e-6, 1e-4, 1e-6


@dataclass(frozen=True)
class LimitCheck:
    """One limit a mission must stay inside.

    Attributes
    ----------
    name : str
        Its identifier in ``checks`` (``check``) and in a sweep's ``failed_checks``.
    description : str
        What it checks, in words, for tables.
    limit_key : str or None
        Key of the limit in the pack limits (:func:`thermoelec.analysis.metrics.pack_limits`).
    limit_unit : str
        Unit of the limit.
    worst_key : str
        Metric holding the worst value of the mission.
    unit : str
        Unit of the worst value.
    margin_key : str or None
        Metric holding the margin to the limit (> 0 inside).
    margin_unit : str
        Unit of the margin.
    stop_reason : str or None
        The stop reason that fails the check whatever the margin.
    inside : callable
        ``inside(metrics) -> bool``: the mission stayed inside the limit (the stop aside).
    optional : bool
        The check applies only where its limit is set (its ``limit_key`` is in the pack
        limits; a limit given as a table shows ``table`` for its value).
    """

    name: str
    description: str
    limit_key: str | None
    limit_unit: str
    worst_key: str
    unit: str
    margin_key: str | None
    margin_unit: str
    stop_reason: str | None
    inside: Callable[[Mapping[str, Any]], bool]
    optional: bool = False

    def applies(self, limits: Mapping[str, Any]) -> bool:
        """Whether the check applies to a pack with these limits (:func:`thermoelec.analysis.metrics.pack_limits`)."""
        return not self.optional or (self.limit_key is not None and self.limit_key in limits)


def _at_least(key: str, floor: float) -> Callable[[Mapping[str, Any]], bool]:
    return lambda m: m.get(key) is not None and float(m[key]) >= floor


def _above(key: str) -> Callable[[Mapping[str, Any]], bool]:
    return lambda m: m.get(key) is not None and float(m[key]) > 0.0


def _always(_: Mapping[str, Any]) -> bool:
    return True


def _unset_or_at_least(key: str, floor: float) -> Callable[[Mapping[str, Any]], bool]:
    """Inside when the margin is at least ``floor``, or when there is none (the pack never ran that way)."""
    return lambda m: m.get(key) is None or float(m[key]) >= floor


#: The checks of every mission, in report order (a check's name is its key in ``checks``).
LIMIT_CHECKS: tuple[LimitCheck, ...] = (
    LimitCheck("voltage_min", "cell voltage >= voltage_min", "cell_voltage_min_V", "V", "cell_voltage_min_V", "V",
               "voltage_margin_min_V", "V", "voltage_min", _at_least("voltage_margin_min_V", -VOLTAGE_TOLERANCE)),
    LimitCheck("voltage_max", "cell voltage <= voltage_max", "cell_voltage_max_V", "V", "cell_voltage_max_V", "V",
               "voltage_margin_max_V", "V", "voltage_max", _at_least("voltage_margin_max_V", -VOLTAGE_TOLERANCE)),
    LimitCheck("temperature_max", "cell temperature <= cell_temperature_max", "cell_temperature_max_degC", "degC",
               "cell_temperature_max_degC", "degC", "temperature_margin_K", "K", "temperature_max",
               _above("temperature_margin_K")),
    LimitCheck("power_limit", "demanded power deliverable (E^2 >= 4 R P)", None, "", "power_max_W", "W", None, "",
               "power_limit", _always),
    LimitCheck("soc_limit", "SoC within 0..1", None, "", "soc_end", "", None, "", "soc_limit", _always),
    LimitCheck("charge_temperature_min", "no charging below charge_temperature_min", "charge_temperature_min_degC",
               "degC", "time_charging_below_limit_s", "s", None, "", None,
               lambda m: m.get("time_charging_below_limit_s") is not None
               and float(m["time_charging_below_limit_s"]) == 0.0),
    # the limits of a pack specification ([limits]), each where it is set
    LimitCheck("discharge_current_max", "cell discharge current <= discharge_current_max", "discharge_current_max_A",
               "A", "cell_discharge_current_max_A", "A", "discharge_current_margin_A", "A", "discharge_current_max",
               _at_least("discharge_current_margin_A", -CURRENT_TOLERANCE), optional=True),
    LimitCheck("charge_current_max", "cell charge current <= charge_current_max", "charge_current_max_A", "A",
               "cell_charge_current_max_A", "A", "charge_current_margin_A", "A", "charge_current_max",
               _at_least("charge_current_margin_A", -CURRENT_TOLERANCE), optional=True),
    LimitCheck("discharge_power_max", "power to the load <= discharge_power_max", "discharge_power_max_W", "W",
               "power_max_W", "W", "discharge_power_margin_W", "W", "discharge_power_max",
               _at_least("discharge_power_margin_W", -POWER_TOLERANCE), optional=True),
    LimitCheck("charge_power_max", "charging power <= charge_power_max", "charge_power_max_W", "W",
               "charge_power_max_W", "W", "charge_power_margin_W", "W", "charge_power_max",
               _at_least("charge_power_margin_W", -POWER_TOLERANCE), optional=True),
    LimitCheck("discharge_temperature_min", "no discharge below discharge_temperature_min",
               "discharge_temperature_min_degC", "degC", "cell_temperature_min_discharging_degC", "degC",
               "discharge_temperature_margin_K", "K", "discharge_temperature_min",
               _unset_or_at_least("discharge_temperature_margin_K", -TEMPERATURE_TOLERANCE), optional=True),
    LimitCheck("charge_temperature_max", "no charge above charge_temperature_max", "charge_temperature_max_degC",
               "degC", "cell_temperature_max_charging_degC", "degC", "charge_temperature_margin_K", "K",
               "charge_temperature_max", _unset_or_at_least("charge_temperature_margin_K", -TEMPERATURE_TOLERANCE),
               optional=True),
    LimitCheck("sink_temperature_max", "sink (housing) temperature <= sink_temperature_max",
               "sink_temperature_max_degC", "degC", "sink_temperature_max_degC", "degC", "sink_temperature_margin_K",
               "K", "sink_temperature_max", _at_least("sink_temperature_margin_K", -TEMPERATURE_TOLERANCE),
               optional=True),
    # the BMS's derating ([derating]): it stops the mission only where nothing more can be delivered
    LimitCheck("nothing_deliverable", "the derated pack delivers more than its cutoff current", "derating", "",
               "energy_not_delivered_Wh", "Wh", None, "", "nothing_deliverable", _always, optional=True),
    LimitCheck("completed", "whole profile completed", None, "", "stop_reason", "", None, "", None,
               lambda m: bool(m.get("completed"))),
)


def limit_checks(metrics: Mapping[str, Any], limits: Mapping[str, Any]) -> list[dict[str, Any]]:
    """One row per check of :data:`LIMIT_CHECKS`: the limit, the worst value, the margin, pass or fail.

    Parameters
    ----------
    metrics : mapping
        The mission's summary or sweep row (``stop_reason``, ``completed`` and the keys the
        checks name; temperatures [degC], voltages [V], power [W], times [s]).
    limits : mapping
        The pack limits (:func:`thermoelec.analysis.metrics.pack_limits`) [V, degC].

    Returns
    -------
    list of dict
        For each check that applies (the optional ones where their limit is set): ``check``
        (name), ``description``, ``limit`` and ``limit_unit`` (``"table"`` for a limit over
        temperature and SoC), ``worst`` and ``unit``, ``margin`` and ``margin_unit`` (None
        where a check has none), ``passed`` (bool).
    """
    stop = metrics.get("stop_reason")
    rows = []
    for check in LIMIT_CHECKS:
        if not check.applies(limits):
            continue
        limit = None if check.limit_key is None else limits.get(check.limit_key)
        table = check.optional and limit is None
        rows.append({
            "check": check.name,
            "description": check.description,
            "limit": "table" if table and check.limit_unit else (None if table else limit),
            "limit_unit": "" if table else check.limit_unit,
            "worst": metrics.get(check.worst_key),
            "unit": check.unit,
            "margin": None if check.margin_key is None else metrics.get(check.margin_key),
            "margin_unit": check.margin_unit,
            "passed": bool(stop != check.stop_reason and check.inside(metrics)),
        })
    return rows


def verdict(checks: Sequence[Mapping[str, Any]]) -> str:
    """``"pass"`` when every check passed, else ``"fail"``.

    Parameters
    ----------
    checks : sequence of mapping
        Rows of :func:`limit_checks` (each with ``passed``).
    """
    return PASS if all(row["passed"] for row in checks) else FAIL


def failed_checks(checks: Sequence[Mapping[str, Any]]) -> list[str]:
    """Names of the checks that failed, in the order of :data:`LIMIT_CHECKS`.

    Parameters
    ----------
    checks : sequence of mapping
        Rows of :func:`limit_checks`.
    """
    return [row["check"] for row in checks if not row["passed"]]
