"""The benchmarks run in a quick mode so they never rot (no timing is asserted here).

The quick runs take minutes, so they are ``slow`` tests (``make test-all``,
and ``make bench`` runs the benchmarks in full); what ``make test`` keeps is
that every script still imports the package as it is and parses its options.
"""

import subprocess
import sys
from pathlib import Path

import pytest

BENCHMARKS = Path(__file__).resolve().parents[1] / "benchmarks"
SCRIPTS = sorted(path.name for path in BENCHMARKS.glob("bench_*.py"))


def _run(script: str, *arguments: str, timeout: float = 600) -> str:
    proc = subprocess.run([sys.executable, str(BENCHMARKS / script), *arguments], capture_output=True, text=True,
                          timeout=timeout)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout


@pytest.mark.parametrize("script", SCRIPTS)
def test_every_benchmark_imports_and_parses_its_options(script):
    assert "--quick" in _run(script, "--help", timeout=120)


@pytest.mark.slow
def test_single_mission_benchmark_runs_quick():
    assert "speed-up of CVODE over the LSODA loop" in _run("bench_single_mission.py", "--quick")


@pytest.mark.slow
def test_sweep_benchmark_runs_quick():
    out = _run("bench_sweep.py", "--quick")
    assert "speed-up over the LSODA loop" in out and "ratio to the RK4 floor" in out and "peak Tc" in out


@pytest.mark.slow
def test_sweep_scale_benchmark_runs_quick():
    out = _run("bench_sweep_scale.py", "--quick")
    assert "linear in scenarios" in out and "peak memory" in out


@pytest.mark.slow
def test_sweep_figures_benchmark_runs_quick():
    out = _run("bench_sweep_figures.py", "--quick")
    assert "figures' share of the wall time" in out and "reference, --no-figures" in out


@pytest.mark.slow
def test_uncertainty_benchmark_runs_quick():
    out = _run("bench_uncertainty.py", "--quick")
    assert "sampling and statistics add" in out and "reference, the same scenarios zipped" in out


@pytest.mark.slow
def test_options_benchmark_runs_quick():
    out = _run("bench_options.py", "--quick")
    assert "options and review add" in out and "reference, the same plain grid" in out


@pytest.mark.slow
def test_pack_benchmark_runs_quick():
    out = _run("bench_pack.py", "--quick")
    assert "target 14s4p on the batched engine" in out and "solve_ivp LSODA loop, per cell" in out
    assert "thermoelec sweep --workers 2, end to end" in out


@pytest.mark.slow
def test_capability_benchmark_runs_quick():
    out = _run("bench_capability.py", "--quick")
    assert "speed-up of the batched grid over the solo loop" in out and "brentq on solo CVODE pulses" in out


@pytest.mark.slow
def test_end_to_end_benchmark_runs_quick():
    out = _run("bench_end_to_end.py", "--quick")
    assert "thermoelec sweep --workers 2 end to end" in out and "floor process" in out and "figures" in out
    assert "scenario-hours/s on 2 processes" in out


@pytest.mark.slow
def test_fixed_cost_benchmark_runs_quick():
    out = _run("bench_fixed_cost.py", "--quick")
    assert "floor: import numpy, scipy, pandas" in out and "fixed / floor" in out
    assert "run --no-figures" in out and "one-scenario sweep" in out and "target < 1.5 s" in out
    assert "run, numba only" in out and "sweep, numba only" in out and "kernels: " in out


@pytest.mark.slow
def test_two_cores_benchmark_runs_quick():
    out = _run("bench_two_cores.py", "--quick")
    assert "ratio 1 worker / 2 workers" in out and "--workers 2, 2 cores" in out
    assert "fixed start-up, a one-scenario sweep" in out and "CPU time of the solves, 2 workers" in out
