"""Sweep speed: ``thermoelec sweep``'s engine against a solve_ivp loop and a fixed-step RK4 floor, same run.

The mission of ``bench_single_mission.py`` (1 h at 1 Hz, 3 600 power segments
with regeneration, one RC pair, 2-D R0 table, entropic heat), swept over
ambient x sink conductance x initial SoC. Three ways to run the batch:

- thermoelec: the chunked sweep runner on one worker process (per core), with
  its batched Dormand-Prince solver (the default) and with solo CVODE runs;
- the loop a user would write: ``solve_ivp`` LSODA restarted at every segment,
  per scenario (timed on a few scenarios, per scenario);
- the practical floor: classical RK4 with fixed steps aligned to the segments,
  over the whole batch in one compiled loop (implemented here, on the engine's
  own right-hand side kernel), with as many sub-steps as it needs to reach the
  engine's accuracy on the first scenario.

Printed: seconds per scenario-hour of each, the speed-up over the LSODA loop
(target >= 100x) and the ratio to the RK4 floor (target <= 2.5x).

Run: ``.venv/bin/python benchmarks/bench_sweep.py`` (``--quick`` for a short
check that the script works).
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numba
import numpy as np
from bench_single_mission import engine_run, errors, mission_scenario, segment_loop

import thermoelec
from thermoelec import model as m
from thermoelec import sweep
from thermoelec.solve import SolverOptions


@numba.njit(cache=True)
def rk4_batch(params, powers, y0, substeps):
    """Classical RK4, ``substeps`` fixed steps per 1 s power segment, every scenario of the batch."""
    n_scen, n = y0.shape
    ends = np.empty((n_scen, powers.size, n))
    alg = np.empty(m.N_ALGEBRAICS)
    k1, k2, k3, k4, tmp = np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n)
    h = 1.0 / substeps
    for s in range(n_scen):
        p = params[s].copy()
        y = y0[s].copy()
        for seg in range(powers.size):
            p[m.H_MODE] = 1.0
            p[m.H_VALUE] = powers[seg]
            for _ in range(substeps):
                m.evaluate(y, p, k1, alg)
                for i in range(n):
                    tmp[i] = y[i] + 0.5 * h * k1[i]
                m.evaluate(tmp, p, k2, alg)
                for i in range(n):
                    tmp[i] = y[i] + 0.5 * h * k2[i]
                m.evaluate(tmp, p, k3, alg)
                for i in range(n):
                    tmp[i] = y[i] + h * k3[i]
                m.evaluate(tmp, p, k4, alg)
                for i in range(n):
                    y[i] += h / 6.0 * (k1[i] + 2.0 * k2[i] + 2.0 * k3[i] + k4[i])
            ends[s, seg] = y
    return ends


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a 2-minute mission and 4 scenarios")
    args = parser.parse_args()
    seconds = 120 if args.quick else 3600
    hours = seconds / 3600.0
    ambients = ["10 degC", "30 degC"] if args.quick else ["-10 degC", "10 degC", "25 degC", "40 degC"]
    sinks = ["1 W/K"] if args.quick else ["0.3 W/K", "1 W/K", "3 W/K"]
    socs = [0.95, 0.8]  # regeneration at full charge would stop on voltage_max at once
    with tempfile.TemporaryDirectory() as folder:
        data = mission_scenario(seconds, Path(folder))
        data["sweep"] = {"thermal.ambient_temperature": ambients, "thermal.sink_to_ambient": sinks,
                         "cell.initial_soc": socs}
        scenario = thermoelec.scenario_from_dict(data, base_dir=folder)
        plan = sweep.plan_sweep(scenario)
        problems = [scenario.with_overrides(plan.overrides(i)).problem() for i in range(plan.size)]
        engine_run(problems[0], 1e-6)  # compile the kernels outside the timings
        sweep.run_chunk(scenario, plan, [0])
        timings = {}
        for engine in ("batch", "solo"):
            started = time.perf_counter()
            rows = sweep.run_sweep(scenario, plan, Path(folder) / engine, workers=1, progress=False, engine=engine,
                                   chunk_size=plan.size)
            timings[engine] = (time.perf_counter() - started) / plan.size
            assert all(r["status"] == "ok" for r in rows)
            assert all(r["engine"] == engine for r in rows)
    t_sweep, t_solo = timings["batch"], timings["solo"]

    atol = SolverOptions(rtol=1e-6).atol_vector(problems[0].n_rc)
    sample = problems[: min(2, len(problems))]
    t_lsoda = float(np.mean([segment_loop(p, "LSODA", 1e-6, atol)[0] for p in sample]))

    first = problems[0]
    _, reference = segment_loop(first, "DOP853", 1e-12, SolverOptions(rtol=1e-12).atol_vector(first.n_rc))
    _, ends_cvode = engine_run(first, 1e-6)
    p0 = m.pack_parameters(first)
    e_cvode = errors(ends_cvode, reference, first, p0)
    powers = np.array([s.value for s in first.segments])
    params = np.array([m.pack_parameters(p) for p in problems])
    y0 = np.array([p.initial_state() for p in problems])
    substeps = 1
    while True:
        ends = rk4_batch(params[:1], powers, y0[:1], substeps)
        e_rk4 = errors(ends[0], reference, first, p0)
        if (e_rk4[0] <= e_cvode[0] and e_rk4[1] <= e_cvode[1]) or substeps >= 64:
            break
        substeps *= 2
    rk4_batch(params, powers, y0, substeps)  # warm
    started = time.perf_counter()
    rk4_batch(params, powers, y0, substeps)
    t_rk4 = (time.perf_counter() - started) / plan.size

    print(f"sweep: {plan.size} scenarios of a {seconds} s mission at 1 Hz (ambient x sink conductance x SoC)")
    print(f"{'method':<52} {'s per scenario-hour':>20}")
    print(f"{'thermoelec sweep, batched Dormand-Prince, 1 worker':<52} {t_sweep / hours:20.5f}")
    print(f"{'thermoelec sweep, solo CVODE per scenario, 1 worker':<52} {t_solo / hours:20.4f}")
    print(f"{'solve_ivp LSODA loop per segment, rtol 1e-6':<52} {t_lsoda / hours:20.4f}")
    print(f"{f'RK4 floor, {substeps} fixed step(s) per segment, batch':<52} {t_rk4 / hours:20.5f}")
    print(f"accuracy on the first scenario: engine {e_cvode[0]:.2e} K / {e_cvode[1]:.2e} V, "
          f"RK4 {e_rk4[0]:.2e} K / {e_rk4[1]:.2e} V")
    print(f"scenario-hours per second per core: batched {hours / t_sweep:.0f}, RK4 floor {hours / t_rk4:.0f}")
    print(f"speed-up over the LSODA loop: {t_lsoda / t_sweep:.1f}x (target >= 100x)")
    print(f"ratio to the RK4 floor: {t_sweep / t_rk4:.1f}x (target <= 2.5x)")


if __name__ == "__main__":
    main()
