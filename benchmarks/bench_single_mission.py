"""Single-mission speed: the CVODE back end against a solve_ivp loop, at equal accuracy.

The mission: one hour at 1 Hz, 3 600 constant-power segments with regeneration,
one RC pair, a 2-D R0 table and entropic heat, on a 4s2p pack.

The reference a user would write: a loop over the segments calling
``scipy.integrate.solve_ivp`` (LSODA, the fastest solve_ivp method on this
problem) on the same right-hand side, restarted at each segment. Accuracy of
both is measured against a tight reference (solve_ivp DOP853 per segment at
rtol 1e-12) at every segment end; LSODA's tolerance is tightened until its
errors are no larger than CVODE's (from rtol 1e-4 down), so the two are timed
at equal accuracy. The machine is noisy, so the two are run alternately, several
times, and each is timed by its best run.

Run: ``.venv/bin/python benchmarks/bench_single_mission.py`` (``--quick`` for a
short mission that only checks the script works).
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

import thermoelec
from thermoelec.engine import layout as L
from thermoelec.engine import model as m
from thermoelec.engine.driver import integrate_problem
from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import pack_parameters
from thermoelec.physics.loads import LOAD_MODES


def mission_scenario(seconds: int, folder: Path) -> dict:
    rng = np.random.default_rng(2026)
    t = np.arange(seconds + 1)
    power = 45.0 + 25.0 * np.sin(t / 47.0) + rng.normal(0.0, 8.0, t.size)
    power[(t % 300) > 260] = -20.0  # regeneration bursts
    csv = folder / "mission.csv"
    with csv.open("w") as f:
        f.write("time_s,power_W\n")
        for ti, pi in zip(t, power, strict=True):
            f.write(f"{ti},{pi:.3f}\n")
    return {
        "format": 1,
        "scenario": {"name": "benchmark: 1 h at 1 Hz"},
        "cell": {
            "capacity": "5 Ah", "voltage_max": "4.2 V", "voltage_min": "2.5 V", "mass": "0.07 kg",
            "specific_heat": "950 J/kg/K", "initial_soc": 1.0,
            "ocv": {"soc": [0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0], "voltage": [3.0, 3.4, 3.58, 3.68, 3.84, 4.05, 4.2],
                    "entropic": [-2e-4, -1e-4, 1e-4, 0.0, -1e-4, -2e-4, -2.5e-4]},
            "r0": {"soc": [0.0, 0.5, 1.0], "temperature": ["-10 degC", "25 degC", "45 degC"],
                   "values": [[0.06, 0.05, 0.055], [0.02, 0.015, 0.016], [0.015, 0.011, 0.012]]},
            "rc": [{"resistance": "10 mohm", "time_constant": "30 s"}],
        },
        "pack": {"series": 4, "parallel": 2},
        "thermal": {"ambient_temperature": "25 degC", "sink_heat_capacity": "300 J/K",
                    "cell_to_sink": "1 W/K", "sink_to_ambient": "0.5 W/K"},
        "profile": {"segment": [{"file": str(csv)}]},
    }


def segment_loop(problem, method: str, rtol: float, atol: np.ndarray) -> tuple[float, np.ndarray]:
    """What a user writes: solve_ivp restarted at every segment on the same equations."""
    p = pack_parameters(problem)
    kernels = m.Kernels(p, L.n_states(problem.n_rc))
    y = problem.initial_state()
    ends = np.empty((len(problem.segments), y.size))
    t = 0.0
    started = time.perf_counter()
    for k, seg in enumerate(problem.segments):
        p[L.H_MODE] = LOAD_MODES[seg.mode].code
        p[L.H_VALUE] = seg.value
        sol = solve_ivp(kernels.scipy_rhs, (t, t + seg.duration), y, method=method, rtol=rtol, atol=atol)
        y = sol.y[:, -1]
        t += seg.duration
        ends[k] = y
    return time.perf_counter() - started, ends


def engine_run(problem, rtol: float) -> tuple[float, np.ndarray]:
    options = SolverOptions(backend="cvode", rtol=rtol, output_interval=1.0)
    trajectory = integrate_problem(problem, options)
    assert trajectory.status == "ok" and trajectory.stop_reason == "end_of_profile", trajectory.message
    # segment ends: the first row at each boundary time is the state before the jump
    times = trajectory.times
    ends = []
    boundary = np.cumsum([s.duration for s in problem.segments])
    idx = np.searchsorted(times, boundary, side="left")
    ends = trajectory.states[idx]
    return trajectory.wall_time, ends


def errors(ends: np.ndarray, reference: np.ndarray, problem, kernels_p) -> tuple[float, float]:
    """Max |dTc| [K] and max |dV| [V] over all segment ends."""
    n_rc = problem.n_rc
    d_tc = np.abs(ends[:, 1 + n_rc] - reference[:, 1 + n_rc]).max()
    alg_a = np.empty((len(ends), L.N_ALGEBRAICS))
    alg_b = np.empty_like(alg_a)
    params = np.repeat(kernels_p[None, :], len(ends), axis=0)
    for k, seg in enumerate(problem.segments):
        params[k, L.H_MODE] = LOAD_MODES[seg.mode].code
        params[k, L.H_VALUE] = seg.value
    m.evaluate_rows(np.ascontiguousarray(ends), params, alg_a)
    m.evaluate_rows(np.ascontiguousarray(reference), params, alg_b)
    return float(d_tc), float(np.abs(alg_a[:, L.A_VOLTAGE] - alg_b[:, L.A_VOLTAGE]).max())


def best_alternating(repeats: int, *jobs) -> list[float]:
    """Best wall time of each job, the jobs run in turn ``repeats`` times (drift hits all alike)."""
    best = [math.inf] * len(jobs)
    for _ in range(repeats):
        for i, job in enumerate(jobs):
            best[i] = min(best[i], job()[0])
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a 2-minute mission, one repeat")
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args()
    seconds = 120 if args.quick else 3600
    repeats = 1 if args.quick else args.repeats
    with tempfile.TemporaryDirectory() as folder:
        problem = thermoelec.scenario_from_dict(mission_scenario(seconds, Path(folder))).problem()
    p = pack_parameters(problem)
    engine_run(problem, 1e-6)  # compile / load the jitted kernels once, outside the timings
    print(f"mission: {len(problem.segments)} power segments of 1 s, 1 RC pair, 2-D R0 table, entropic heat")

    _, reference = segment_loop(problem, "DOP853", 1e-12, SolverOptions(rtol=1e-12).atol_vector(problem.n_rc))
    _, ends_cvode = engine_run(problem, 1e-6)
    e_cvode = errors(ends_cvode, reference, problem, p)

    chosen = None
    for rtol in (1e-4, 3e-5, 1e-5, 3e-6, 1e-6, 3e-7, 1e-7, 3e-8, 1e-8):
        atol = SolverOptions(rtol=rtol).atol_vector(problem.n_rc)
        _, ends = segment_loop(problem, "LSODA", rtol, atol)
        e = errors(ends, reference, problem, p)
        if e[0] <= e_cvode[0] and e[1] <= e_cvode[1]:
            chosen = (rtol, atol, e)
            break
    if chosen is None:
        raise SystemExit("LSODA did not reach CVODE's accuracy at rtol 1e-8")
    rtol_lsoda, atol_lsoda, e_lsoda = chosen
    t_cvode, t_lsoda = best_alternating(repeats, lambda: engine_run(problem, 1e-6),
                                        lambda: segment_loop(problem, "LSODA", rtol_lsoda, atol_lsoda))

    print(f"{'method':<48} {'wall [s]':>9} {'max |dTc| [K]':>14} {'max |dV| [V]':>13}")
    print(f"{'thermoelec CVODE back end, rtol 1e-6':<48} {t_cvode:9.3f} {e_cvode[0]:14.2e} {e_cvode[1]:13.2e}")
    print(f"{f'solve_ivp LSODA per segment, rtol {rtol_lsoda:g}':<48} {t_lsoda:9.3f} "
          f"{e_lsoda[0]:14.2e} {e_lsoda[1]:13.2e}")
    print(f"speed-up of CVODE over the LSODA loop at equal accuracy: {t_lsoda / t_cvode:.2f}x (target >= 2x)")


if __name__ == "__main__":
    main()
