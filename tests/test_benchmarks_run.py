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
