"""The benchmarks run in a quick mode so they never rot (no timing is asserted here)."""

import subprocess
import sys
from pathlib import Path

BENCHMARKS = Path(__file__).resolve().parents[1] / "benchmarks"


def test_single_mission_benchmark_runs_quick():
    proc = subprocess.run([sys.executable, str(BENCHMARKS / "bench_single_mission.py"), "--quick"],
                          capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert "speed-up of CVODE over the LSODA loop" in proc.stdout


def _run_quick(script: str) -> str:
    proc = subprocess.run([sys.executable, str(BENCHMARKS / script), "--quick"], capture_output=True, text=True,
                          timeout=600)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout


def test_sweep_benchmark_runs_quick():
    out = _run_quick("bench_sweep.py")
    assert "speed-up over the LSODA loop" in out and "ratio to the RK4 floor" in out and "peak Tc" in out


def test_sweep_scale_benchmark_runs_quick():
    out = _run_quick("bench_sweep_scale.py")
    assert "linear in scenarios" in out and "peak memory" in out
