"""Synthetic test logs: run a cell through a test procedure with the engine and record it like a cycler.

Used to check the fitting round trip (known parameters in, fitted parameters
out) and to make the invented demo logs. The procedures follow common
practice: a slow (C/20) full discharge and charge for the OCV, a hybrid pulse
(HPPC-style) test of a discharge and a charge pulse at each of several SoC
levels with rests between, and a heat-up / cool-down trace for the thermal
parameters. The recorder adds Gaussian noise and quantises like a cycler's
converters.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from thermoelec.analysis.results import SimulationResult
from thermoelec.physics.constants import SECONDS_PER_HOUR

__all__ = ["Recorder", "hppc_segments", "ocv_test_segments", "record", "thermal_test_segments"]


def ocv_test_segments(capacity_ah: float, c_rate: float = 0.05) -> tuple[list[dict], list[dict]]:
    """A slow full discharge (from full) and a slow full charge (from empty), pack-level dicts.

    Both run until the SoC limit stops them (give a ``voltage_min`` below the
    OCV at empty, and a ``voltage_max`` above it at full, so the cell runs
    through the whole SoC range).
    """
    current = c_rate * capacity_ah
    hours = 1.2 / c_rate
    return ([{"mode": "current", "value": f"{current} A", "duration": f"{hours} h"}],
            [{"mode": "current", "value": f"{-current} A", "duration": f"{hours} h"}])


def hppc_segments(capacity_ah: float, levels: int = 10, pulse_c: float = 2.0, charge_c: float = 1.5,
                  pulse: float = 30.0, between: float = 60.0, relax: float = 300.0, step_rest: float = 1200.0,
                  first_rest: float = 600.0, span: float = 0.8) -> list[dict]:
    """A pulse test from full: at each SoC level a discharge and a charge pulse, then a step to the next level.

    The levels run from full down by ``span`` of the capacity (to 20 % SoC by
    default), each step discharged at 1C.
    """
    segments = [{"mode": "rest", "duration": f"{first_rest} s"}]
    step = SECONDS_PER_HOUR * span / (levels - 1)
    for level in range(levels):
        segments += [
            {"mode": "current", "value": f"{pulse_c * capacity_ah} A", "duration": f"{pulse} s"},
            {"mode": "rest", "duration": f"{between} s"},
            {"mode": "current", "value": f"{-charge_c * capacity_ah} A", "duration": f"{pulse} s"},
            {"mode": "rest", "duration": f"{relax} s"},
        ]
        if level < levels - 1:
            segments += [{"mode": "current", "value": f"{capacity_ah} A", "duration": f"{step} s"},
                         {"mode": "rest", "duration": f"{step_rest} s"}]
    return segments


def thermal_test_segments(heat_for: float = 1800.0, cool_for: float = 5400.0) -> list[dict]:
    """A rest during which a heater runs for ``heat_for`` s (give it in the thermal section), then cooling."""
    return [{"mode": "rest", "duration": f"{heat_for + cool_for} s"}]


@dataclass(frozen=True)
class Recorder:
    """Noise (standard deviations) and resolution of a cycler's channels."""

    interval: float = 1.0
    voltage_noise: float = 1e-3
    voltage_step: float = 1e-3
    current_noise: float = 5e-3
    current_step: float = 10e-3
    temperature_noise: float = 0.05
    temperature_step: float = 0.01


def _quantise(values: np.ndarray, step: float) -> np.ndarray:
    return np.round(values / step) * step if step > 0 else values


def record(result: SimulationResult, recorder: Recorder, rng: np.random.Generator,
           heater_power: bool = False, sink: bool = False):
    """A cycler log (pandas DataFrame) sampled from a result every ``recorder.interval`` seconds.

    At a jump of the demand the sample after it is taken, so each sample's
    current holds until the next sample (the zero-order hold of the fits).
    """
    import pandas as pd

    s = result.series
    times = s["time_s"]
    grid = np.arange(0.0, times[-1] + 1e-9, recorder.interval)
    rows = np.searchsorted(times, grid, side="right") - 1
    exact = np.isclose(times[rows], grid, rtol=0, atol=1e-6)
    rows, grid = rows[exact], grid[exact]
    n = len(rows)
    frame = {
        "time_s": grid,
        "current_A": _quantise(s["current_A"][rows] + rng.normal(0, recorder.current_noise, n),
                               recorder.current_step),
        "voltage_V": _quantise(s["voltage_V"][rows] + rng.normal(0, recorder.voltage_noise, n),
                               recorder.voltage_step),
        "temperature_degC": _quantise(s["cell_temperature_degC"][rows] + rng.normal(0, recorder.temperature_noise, n),
                                      recorder.temperature_step),
        "ambient_temperature_degC": s["ambient_temperature_degC"][rows],
    }
    if heater_power:
        frame["heater_power_W"] = s["heater_power_W"][rows]
    if sink:
        frame["sink_temperature_degC"] = _quantise(
            s["sink_temperature_degC"][rows] + rng.normal(0, recorder.temperature_noise, n), recorder.temperature_step)
    return pd.DataFrame(frame)
