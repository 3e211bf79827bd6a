"""Fits that refuse nonsense: fitted parameters checked against what a cell and a test can be.

A least-squares fit always returns numbers; a log that does not hold the
answer (a truncated discharge, a temperature that never responds, pulses
without an ohmic step) gives numbers that mean nothing, often with tight
intervals. Each check here either refuses (a
:class:`~thermoelec.inputs.errors.ScenarioError`, exit 2, naming the log and
the reason) or returns a warning the report and the terminal show:

- OCV: the discharge and the charge moved the same charge to within their
  coulombic efficiency (above 0.99 for Li-ion cells, common practice): refused
  outside 0.8..1.25, a warning outside 0.97..1.03; a rate faster than C/10 is
  warned of (the current-weighted average cancels a linear resistance only).
- Pulses: R0 and every RC resistance and time constant positive and finite; a
  time constant at a bound of its search, or an interval wider than the value,
  is warned of; two logs at one temperature are refused (the table needs
  distinct rows); with ``--arrhenius`` a negative activation energy is refused.
- Thermal: the cell temperature must respond to the heat input (a rise of at
  least :data:`MIN_RISE`); the heat capacity and conductances must be finite and
  determined by the log (95 % interval below half the value); a specific heat
  outside 100..5000 J/(kg K) is refused (no solid: lead is about 130, lithium
  metal about 3600, water 4180; Incropera et al., Tables A.1 and A.6, from
  memory), outside the plausible range of Li-ion cells
  (:data:`thermoelec.analysis.diagnostics.PLAUSIBLE_RANGES`) warned of.

Imports from fit/, analysis/ (the plausible ranges) and inputs/.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from thermoelec.analysis.diagnostics import PLAUSIBLE_RANGES
from thermoelec.fit.fitting import OcvFit, PulseFit, ThermalFit
from thermoelec.inputs import ScenarioError

__all__ = ["MIN_RISE", "check_arrhenius", "check_ocv", "check_pulses", "check_thermal"]

#: Coulombic ratio (discharge over charge) refused outside, and warned of outside [-].
COULOMBIC_REFUSED, COULOMBIC_WARNED = (0.8, 1.25), (0.97, 1.03)
#: The fastest rate of an OCV log not warned of [1/h]: C/10.
OCV_RATE_MAX = 0.1
#: The least rise of the cell temperature a thermal fit accepts [K]: ten times a cycler's 0.05 K resolution.
MIN_RISE = 0.5
#: Specific heats no cell can have [J/(kg K)].
SPECIFIC_HEAT_REFUSED = (100.0, 5000.0)
#: A 95 % interval wider than this fraction of its value: the log does not determine the parameter [-].
UNDETERMINED = 0.5


def check_ocv(result: OcvFit, discharge: str, charge: str) -> list[str]:
    """Refuse an OCV fit whose logs are not one full discharge and one full charge; warnings otherwise.

    Parameters
    ----------
    result : OcvFit
        The fit.
    discharge, charge : str
        The logs, for the messages.

    Returns
    -------
    list of str
        Warnings.

    Raises
    ------
    ScenarioError
        For a coulombic ratio no cell has, or an OCV that is not finite and positive.
    """
    warnings = []
    q_dis, q_ch = result.capacity_C / 3600.0, result.charge_capacity_C / 3600.0
    if not (q_dis > 0 and q_ch > 0):
        raise ScenarioError(discharge if q_dis <= 0 else charge, "current", "the log moves no charge")
    ratio = q_dis / q_ch
    low, high = COULOMBIC_REFUSED
    if not low <= ratio <= high:
        raise ScenarioError(discharge, "current", f"the discharge moved {q_dis:.3g} Ah but the charge ({charge}) "
                            f"{q_ch:.3g} Ah, a coulombic ratio of {ratio:.3g} no cell has (about 0.99 to 1): one of "
                            "the logs is not a full discharge or charge (truncated, or another cell)")
    if not COULOMBIC_WARNED[0] <= ratio <= COULOMBIC_WARNED[1]:
        warnings.append(f"coulombic ratio {ratio:.4f} (discharge {q_dis:.4g} Ah over charge {q_ch:.4g} Ah) is "
                        "outside 0.97..1.03: check that both logs run from full to empty and back")
    if not (np.all(np.isfinite(result.voltage)) and np.all(result.voltage > 0)):
        raise ScenarioError(discharge, "voltage", "the fitted OCV is not a positive number at every SoC point: "
                            "the logs do not cover the SoC range")
    rate = result.discharge_current_A / q_dis
    if rate > OCV_RATE_MAX:
        warnings.append(f"the discharge runs at C/{1 / rate:.3g}, faster than C/10: the OCV carries the "
                        "non-linear part of the resistive drop (use C/20 or slower)")
    return warnings


def _positive(values: Sequence[float], what: str, where: str, log: str) -> None:
    for value in values:
        if not (math.isfinite(value) and value > 0):
            raise ScenarioError(log, "voltage", f"the fitted {what} {where} is {value:.3g}: the pulses do not "
                                "determine it (check the current column, its sign and the rests between pulses)")


def check_pulses(per_log: Sequence[Sequence[PulseFit]], logs: Sequence[str], n_rc: int) -> list[str]:
    """Refuse pulse fits with parameters no cell has; warnings for the doubtful.

    Parameters
    ----------
    per_log : sequence of sequence of PulseFit
        The fitted windows of each log.
    logs : sequence of str
        The logs, in the same order.
    n_rc : int
        RC pairs fitted [-].

    Returns
    -------
    list of str
        Warnings.

    Raises
    ------
    ScenarioError
        For a resistance or time constant that is not positive and finite, or two logs at one temperature.
    """
    warnings = []
    seen: dict[float, str] = {}
    for fits, log in zip(per_log, logs, strict=True):
        temperature = round(float(np.mean([f.temperature for f in fits])) - 273.15, 2)
        if temperature in seen:
            raise ScenarioError(log, "temperature", f"this log and {seen[temperature]} are both at {temperature:.2f} "
                                "degC: a table over temperature needs one log per temperature")
        seen[temperature] = log
        for f in fits:
            where = f"at SoC {f.soc:.3f}, {f.temperature - 273.15:.1f} degC"
            _positive([f.r0], "R0", where, log)
            _positive(list(f.rc_resistance) + list(f.rc_time_constant), "RC resistance or time constant", where, log)
            for k in range(n_rc):
                tau, ci = f.rc_time_constant[k], f.rc_time_constant_ci[k]
                span = float(f.time[-1] - f.time[0])
                if tau >= 0.99 * 10.0 * span or tau <= 1.01 * 0.5 * float(np.min(np.diff(f.time))):
                    warnings.append(f"{log}: the RC {k + 1} time constant {where} ({tau:.3g} s) sits at a bound of "
                                    "its search: the window does not show it")
                elif not ci < tau:
                    warnings.append(f"{log}: the RC {k + 1} time constant {where} ({tau:.3g} ± {ci:.2g} s) is not "
                                    "determined by the window")
    return warnings


def check_arrhenius(activation_energy: float, logs: Sequence[str], written: bool) -> list[str]:
    """Refuse a negative activation energy where it would be written; warn where it is only reported.

    Parameters
    ----------
    activation_energy : float
        The fitted value [J/mol].
    logs : sequence of str
        The logs, for the message.
    written : bool
        Whether it goes into the cell file (``--arrhenius``).

    Returns
    -------
    list of str
        Warnings.

    Raises
    ------
    ScenarioError
        For a negative value to be written.
    """
    if activation_energy >= 0:
        return []
    message = (f"the fitted activation energy of R0 is negative ({activation_energy / 1e3:.3g} kJ/mol): the "
               "resistance rises with temperature in these logs")
    if written:
        raise ScenarioError(logs[0], "temperature", message + "; write the 2-D table instead (drop --arrhenius), "
                            "and check each log's temperature")
    return [message + ", unlike a cell's: check each log's temperature"]


def check_thermal(result: ThermalFit, log: str, mass: float | None) -> list[str]:
    """Refuse a thermal fit the log does not determine, or whose cell cannot exist; warnings otherwise.

    Parameters
    ----------
    result : ThermalFit
        The fit.
    log : str
        The log, for the messages.
    mass : float or None
        The cell mass [kg], when the specific heat is written.

    Returns
    -------
    list of str
        Warnings.

    Raises
    ------
    ScenarioError
        For a temperature that does not respond, a parameter that is not finite or not
        determined, or a specific heat no solid has.
    """
    rise = float(np.max(result.temperature) - np.min(result.temperature))
    if rise < MIN_RISE:
        raise ScenarioError(log, "temperature", f"the cell temperature moves by {rise:.3g} K over the log: it does "
                            f"not respond to the heat input (at least {MIN_RISE:g} K is needed); check the heater "
                            "power and temperature columns")
    pairs = [("heat capacity", result.heat_capacity, result.heat_capacity_ci),
             ("conductance", result.conductance, result.conductance_ci)]
    if result.sink_heat_capacity is not None:
        pairs += [("sink heat capacity", result.sink_heat_capacity, result.sink_heat_capacity_ci),
                  ("sink-to-ambient conductance", result.sink_conductance, result.sink_conductance_ci)]
    for name, value, ci in pairs:
        if not (math.isfinite(value) and value > 0):
            raise ScenarioError(log, "temperature", f"the fitted {name} is {value:.3g}: the log does not determine it")
        if not ci <= UNDETERMINED * value:
            raise ScenarioError(log, "temperature", f"the fitted {name} ({value:.3g} ± {ci:.2g}) is not determined "
                                "by the log: heat it longer, or let it cool back towards the ambient")
    warnings = []
    if mass is not None:
        cp = result.heat_capacity / mass
        low, high = SPECIFIC_HEAT_REFUSED
        if not low <= cp <= high:
            raise ScenarioError(log, "heater_power_W", f"the specific heat comes out at {cp:.3g} J/(kg K) for a "
                                f"mass of {mass:.4g} kg, which no solid has ({low:g}..{high:g}): check the mass (kg "
                                "unless a unit is given) and the heater power column")
        plausible = PLAUSIBLE_RANGES["specific_heat"]
        if not plausible[0] <= cp <= plausible[1]:
            warnings.append(f"the specific heat {cp:.4g} J/(kg K) is outside the plausible range of Li-ion cells "
                            f"({plausible[0]:g}..{plausible[1]:g}): check the mass and the heater power")
    return warnings
