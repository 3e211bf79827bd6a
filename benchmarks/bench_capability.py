"""Pulse capability of a 10 x 11 x 3 grid on one core, against a per-entry root-finding loop over solo runs.

The scenario is the demo drone's 6s2p pack (``scenarios/drone_delivery.toml``):
an OCV table with entropic heat, a 2-D R0(SoC, T) table, one RC pair with an
Arrhenius law, housing convection and a sink. The grid: pulses of 2, 10 and 30 s
x 10 temperatures from -20 to 60 degC x 11 SoC from 0 to 1, the four capabilities
of each entry (discharge and charge, power and current): 1 320 capabilities.

Measured in the same run, each by its best of ``--repeats`` (the machine is noisy):

- ``thermoelec.analysis.capability.capability`` over the whole grid (the batched
  pulses, one vectorised bracketing root finder for every entry; target: under
  2 s on one core);
- the reference a user would write: for each entry, ``scipy.optimize.brentq`` on
  the pulse margin of solo runs on the engine's CVODE driver
  (:func:`~thermoelec.analysis.capability.solo_pulse_margin`), bracketed as the
  batched search is, to the same relative tolerance on the demand. It runs on a
  sample of ``--reference-entries`` entries spread over the grid (a solo pulse
  costs about the same anywhere on it); its time per entry is scaled to the grid,
  and the sample's answers are compared with the batched ones.

Run: ``.venv/bin/python benchmarks/bench_capability.py`` (``--quick`` for a
3 x 3 x 1 grid, 4 reference entries and one repeat, which only checks that the
script works).
"""

from __future__ import annotations

import argparse
import math
import time
from pathlib import Path

import numpy as np
from scipy.optimize import brentq

import thermoelec
from thermoelec.analysis.capability import (
    DEMAND_RTOL,
    NEAR_ZERO,
    CapabilityGrid,
    bracket_ends,
    capability,
    solo_pulse_margin,
)
from thermoelec.engine.pulse import PULSE_KINDS, prepare_pulses
from thermoelec.physics.constants import ZERO_CELSIUS

DEMO = Path(__file__).resolve().parents[1] / "scenarios" / "drone_delivery.toml"
TARGET = 2.0


def the_problem():
    """The demo's pack with a one-second rest for a profile (the capability does not use the mission)."""
    scenario = thermoelec.load_scenario(DEMO)
    rest = scenario.with_overrides({"profile": {"segment": [{"mode": "rest", "duration": "1 s"}]}})
    return rest.problem(), rest.solver_options()


def grid(quick: bool) -> CapabilityGrid:
    if quick:
        return CapabilityGrid(np.array([10.0]), ZERO_CELSIUS + np.array([0.0, 25.0, 45.0]),
                              np.array([0.2, 0.5, 0.8]))
    return CapabilityGrid(np.array([2.0, 10.0, 30.0]), ZERO_CELSIUS + np.linspace(-20.0, 60.0, 10),
                          np.linspace(0.0, 1.0, 11))


def timed_batched(problem, g: CapabilityGrid, options, repeats: int):
    """Best wall time [s] of the whole grid's capability, and the last result."""
    wall, result = math.inf, None
    for _ in range(repeats):
        started = time.perf_counter()
        result = capability(problem, g, options)
        wall = min(wall, time.perf_counter() - started)
    return wall, result


def solo_entry(problem, options, kind: str, duration: float, temperature: float, soc: float,
               high: float) -> float:
    """One capability by ``brentq`` on solo CVODE pulse margins, bracketed from almost nothing to ``high`` as the
    batched search is, or 0 where even almost nothing fails [W or A]."""
    def margin(demand: float) -> float:
        return solo_pulse_margin(problem, kind, duration, temperature, soc, demand, options)[0]

    low = high * NEAR_ZERO
    if not margin(low) > 0.0:
        return 0.0
    if margin(high) > 0.0:  # the bracket did not hold (cannot happen past the instantaneous limit)
        return math.nan
    return brentq(margin, low, high, xtol=1e-12 * high, rtol=max(DEMAND_RTOL, 4 * np.finfo(float).eps))


def reference_sample(g: CapabilityGrid, result, entries: int, seed: int = 1) -> list[tuple]:
    """Entries (kind, d, t, z) spread over the grid whose batched capability is positive (a search to time)."""
    rng = np.random.default_rng(seed)
    found = [(k.name, d, t, z) for k in PULSE_KINDS for d in range(len(g.durations))
             for t in range(len(g.temperatures)) for z in range(len(g.socs))
             if result.values[k.name][d, t, z] > 0.0]
    picks = rng.choice(len(found), size=min(entries, len(found)), replace=False)
    return [found[i] for i in sorted(picks)]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="a 3 x 3 x 1 grid, 4 reference entries, one repeat")
    parser.add_argument("--repeats", type=int, default=3, help="best of this many runs of the batched grid")
    parser.add_argument("--reference-entries", type=int, default=24,
                        help="entries of the grid the solo loop solves (its time per entry is scaled to the grid)")
    args = parser.parse_args()
    repeats = 1 if args.quick else args.repeats
    entries = 4 if args.quick else args.reference_entries
    problem, options = the_problem()
    g = grid(args.quick)
    n_entries = g.size * len(PULSE_KINDS)
    capability(problem, CapabilityGrid(np.array([1.0]), g.temperatures[:1], g.socs[:1]), options)  # compile once
    wall, result = timed_batched(problem, g, options, repeats)

    sample = reference_sample(g, result, entries)
    kinds = [next(j for j, k in enumerate(PULSE_KINDS) if k.name == kind) for kind, *_ in sample]
    highs = bracket_ends(prepare_pulses(problem, g.temperatures, g.socs, options), np.array(kinds, int),
                         np.array([t for *_, t, _ in sample], int), np.array([z for *_, z in sample], int))
    started = time.perf_counter()
    solo = [solo_entry(problem, options, kind, g.durations[d], g.temperatures[t], g.socs[z], high)
            for (kind, d, t, z), high in zip(sample, highs, strict=True)]
    per_entry = (time.perf_counter() - started) / max(len(sample), 1)
    batched = np.array([result.values[kind][d, t, z] for kind, d, t, z in sample])
    agreement = np.nanmax(np.abs(np.array(solo) - batched) / batched) if sample else math.nan

    shape = " x ".join(str(n) for n in (len(g.temperatures), len(g.socs), len(g.durations)))
    print(f"capability of the drone demo's 6s2p pack: {shape} grid (temperature x SoC x pulse), "
          f"{n_entries} capabilities, one core")
    print(f"{'method':<64}{'wall [s]':>12}")
    print(f"{'thermoelec capability, batched pulses (best of ' + str(repeats) + ')':<64}{wall:>12.3f}")
    print(f"{'brentq on solo CVODE pulses, per entry (' + str(len(sample)) + ' entries timed)':<64}"
          f"{per_entry:>12.4f}")
    print(f"{'brentq on solo CVODE pulses, the whole grid (scaled)':<64}{per_entry * n_entries:>12.1f}")
    print(f"batched against the solo loop on the {len(sample)} entries: largest relative difference "
          f"{agreement:.1e} (the pulses' own tolerance, rtol {options.rtol:g})")
    print(f"speed-up of the batched grid over the solo loop: {per_entry * n_entries / wall:.0f}x")
    print(f"the grid's wall time: {wall:.2f} s (target < {TARGET:g} s on one core"
          f"{'' if args.quick else (': met' if wall < TARGET else ': NOT met')})")


if __name__ == "__main__":
    main()
