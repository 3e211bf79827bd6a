"""What a mission profile asks of the pack, before it is run: duration, energy and charge, peak power, C-rates.

Owns :func:`profile_demand`, which ``thermoelec check`` prints. Exact for
power demands (energy, peak power) and current demands (charge, C-rate); where
a figure depends on the pack's voltage (the current of a power demand, the
energy of a current demand) it is estimated at the initial open-circuit
voltage ``Ns U(SoC_0)`` and says so. Resistance and voltage demands and CC-CV
charges depend on the run itself: they are counted by time only (a CC-CV
charge's current enters the peak charge C-rate).

Imports from engine/ and physics/ only; never from output/, fit/, the API or
the command line.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from thermoelec.engine.mission import plan_mission
from thermoelec.engine.problem import Problem
from thermoelec.physics.constants import COULOMBS_PER_AH, JOULES_PER_WH

__all__ = ["profile_demand"]


def profile_demand(problem: Problem) -> dict[str, Any]:
    """The demand of a mission profile, segment by segment, before running it.

    Parameters
    ----------
    problem : Problem
        The scenario's engine problem (pack level, SI).

    Returns
    -------
    dict
        ``duration_s`` (the mission's segments; a CC-CV charge without a duration at its cap) and
        ``soak_s``; ``segments``; ``energy_discharge_Wh`` and ``energy_charge_Wh`` (power demands exact,
        current demands at the initial OCV); ``charge_discharge_Ah`` and ``charge_charge_Ah`` (current
        demands exact, power demands at the initial OCV); ``power_peak_W`` and ``power_regeneration_peak_W``;
        ``c_rate_discharge_peak`` and ``c_rate_charge_peak`` per cell; ``initial_ocv_V`` (pack);
        ``capacity_Wh`` (the pack's charge times the initial OCV); ``estimated`` (what was estimated at the
        initial OCV); ``run_dependent_s`` (time in resistance, voltage and CC-CV segments, whose demand
        depends on the run).
    """
    cell, pack = problem.cell, problem.pack
    ocv = pack.series * float(np.interp(problem.initial_soc, cell.ocv_soc, cell.ocv_voltage))
    plan = plan_mission(problem)
    out = {"duration_s": float(np.sum(plan.durations)), "soak_s": float(sum(s.duration for s in problem.soak)),
           "segments": len(problem.segments), "initial_ocv_V": ocv, "estimated": [], "run_dependent_s": 0.0}
    energy = {"discharge": 0.0, "charge": 0.0}  # [J]
    charge = {"discharge": 0.0, "charge": 0.0}  # [C]
    peaks = {"power": 0.0, "regeneration": 0.0, "discharge_A": 0.0, "charge_A": 0.0}
    for seg, duration in zip(problem.segments, plan.durations, strict=True):
        if seg.mode == "power":
            current = seg.value / ocv
            if "currents of power demands" not in out["estimated"]:
                out["estimated"].append("currents of power demands")
            peaks["power"] = max(peaks["power"], seg.value)
            peaks["regeneration"] = max(peaks["regeneration"], -seg.value)
            energy["discharge" if seg.value > 0 else "charge"] += abs(seg.value) * duration
        elif seg.mode == "current" and seg.value != 0.0:
            current = seg.value
            if "energies of current demands" not in out["estimated"]:
                out["estimated"].append("energies of current demands")
            energy["discharge" if seg.value > 0 else "charge"] += abs(seg.value) * ocv * duration
        else:  # rest; resistance, voltage and CC-CV: their current and length depend on the run
            current = seg.value if seg.mode == "cccv" else 0.0  # a CC-CV charge's peak is its CC current
            if seg.mode != "rest":
                out["run_dependent_s"] += float(duration)
            peaks["charge_A"] = max(peaks["charge_A"], -current)
            continue
        charge["discharge" if current > 0 else "charge"] += abs(current) * duration
        peaks["discharge_A"] = max(peaks["discharge_A"], current)
        peaks["charge_A"] = max(peaks["charge_A"], -current)
    capacity_ah = cell.capacity / COULOMBS_PER_AH
    out.update(
        energy_discharge_Wh=energy["discharge"] / JOULES_PER_WH, energy_charge_Wh=energy["charge"] / JOULES_PER_WH,
        charge_discharge_Ah=charge["discharge"] / COULOMBS_PER_AH, charge_charge_Ah=charge["charge"] / COULOMBS_PER_AH,
        power_peak_W=peaks["power"], power_regeneration_peak_W=peaks["regeneration"],
        c_rate_discharge_peak=peaks["discharge_A"] / pack.parallel / capacity_ah,
        c_rate_charge_peak=peaks["charge_A"] / pack.parallel / capacity_ah,
        capacity_Wh=pack.parallel * capacity_ah * ocv,
    )
    return out
