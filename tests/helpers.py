"""Shared helpers: small scenario dicts built for analytic checks."""

from __future__ import annotations

import copy
from pathlib import Path
from typing import Any

import thermoelec


def cell_section(**changes: Any) -> dict:
    """A one-cell section with a flat OCV, constant R0 and no RC pair (analytic cases)."""
    cell = {
        "capacity": "1000 Ah",  # large: the SoC hardly moves, so the OCV stays put
        "voltage_max": "4.5 V",
        "voltage_min": "1.0 V",
        "mass": "0.070 kg",
        "specific_heat": "900 J/kg/K",
        "initial_soc": 0.5,
        "ocv": {"soc": [0.0, 1.0], "voltage": [3.7, 3.7]},
        "r0": {"value": "20 mohm"},
    }
    cell.update(changes)
    return cell


def scenario(cell: dict | None = None, thermal: dict | None = None, segments: list | None = None,
             **sections: Any) -> dict:
    """A complete scenario dict; sections given by keyword replace the defaults."""
    data = {
        "format": 1,
        "scenario": {"name": "test"},
        "cell": cell or cell_section(),
        "thermal": thermal or {"ambient_temperature": "25 degC", "sink_heat_capacity": "200 J/K",
                               "cell_to_sink": "0.5 W/K", "sink_to_ambient": "0.5 W/K"},
        "profile": {"segment": segments or [{"mode": "current", "value": "1 A", "duration": "60 s"}]},
        "solver": {"rtol": 1e-9, "output_interval": "1 s"},
    }
    data.update(copy.deepcopy(sections))
    return data


def rc_current_phase(current: float = 5.0):
    """A one-RC-pair cell (10 mohm, 20 s) under a constant current: its problem and parameter vector with the
    phase's mode and demand written in, as a driver would (``current`` in A)."""
    from thermoelec.engine import layout
    from thermoelec.engine.problem import pack_parameters
    from thermoelec.physics.loads import MODE_CURRENT

    data = scenario(cell={**scenario()["cell"], "rc": [{"resistance": "10 mohm", "time_constant": "20 s"}]},
                    segments=[{"mode": "current", "value": f"{current} A", "duration": "60 s"}])
    problem = thermoelec.scenario_from_dict(data).problem()
    p = pack_parameters(problem)
    p[layout.H_MODE], p[layout.H_VALUE] = MODE_CURRENT, current
    return problem, p


def simulate(data: dict, **overrides: Any) -> thermoelec.SimulationResult:
    """Simulate scenario data, with dotted-path overrides."""
    result = thermoelec.simulate(data, overrides=overrides or None)
    assert result.status == "ok", result.message
    return result


def value_at(result: thermoelec.SimulationResult, column: str, t: float, side: str = "last") -> float:
    """A series value at an output time (the last row at that time: after a jump)."""
    import numpy as np

    times = result.series["time_s"]
    rows = np.flatnonzero(np.isclose(times, t, rtol=0, atol=1e-9))
    assert rows.size, f"no output at t = {t}"
    return float(result.series[column][rows[-1] if side == "last" else rows[0]])


SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"
