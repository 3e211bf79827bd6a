"""Property tests (hypothesis) over random valid profiles and parameters.

Invariants: SoC stays in 0..1 unless a stop says otherwise; no NaN anywhere;
the heat balance closes (first law for the two lumped nodes); with no entropic
term a discharge-only mission never cools the cell below the lowest of ambient
and initial temperature (heat generation I^2 R >= 0, maximum principle).
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import thermoelec
from thermoelec.engine.options import ATOL_SCALES

segment = st.one_of(
    st.builds(lambda v, d: {"mode": "current", "value": v, "duration": d},
              st.floats(-8.0, 15.0), st.floats(1.0, 400.0)),
    st.builds(lambda v, d: {"mode": "power", "value": v, "duration": d},
              st.floats(-30.0, 60.0), st.floats(1.0, 400.0)),
    st.builds(lambda v, d: {"mode": "resistance", "value": v, "duration": d},
              st.floats(0.2, 20.0), st.floats(1.0, 400.0)),
    st.builds(lambda d: {"mode": "rest", "duration": d}, st.floats(1.0, 300.0)),
)
discharge_segment = st.one_of(
    st.builds(lambda v, d: {"mode": "current", "value": v, "duration": d},
              st.floats(0.0, 15.0), st.floats(1.0, 400.0)),
    st.builds(lambda v, d: {"mode": "power", "value": v, "duration": d},
              st.floats(0.0, 60.0), st.floats(1.0, 400.0)),
    st.builds(lambda d: {"mode": "rest", "duration": d}, st.floats(1.0, 300.0)),
)


def cell_and_pack(draw_entropic: bool):
    return st.fixed_dictionaries({
        "capacity": st.floats(0.5, 5.0),
        "r0": st.floats(0.005, 0.08),
        "ea": st.floats(0.0, 50e3),
        "rc_r": st.floats(0.001, 0.03),
        "tau": st.floats(2.0, 600.0),
        "soc0": st.floats(0.05, 1.0),
        "ambient": st.floats(-25.0, 45.0),
        "t0_offset": st.floats(-10.0, 10.0),
        "g_cs": st.floats(0.0, 5.0),
        "g_sa": st.floats(0.0, 5.0),
        "c_sink": st.floats(20.0, 2000.0),
        "entropic": st.floats(-4e-4, 4e-4) if draw_entropic else st.just(0.0),
        "series": st.integers(1, 4),
        "parallel": st.integers(1, 3),
    })


def build(p: dict, segments: list[dict]) -> dict:
    return {
        "format": 1,
        "scenario": {"name": "property"},
        "cell": {"capacity": p["capacity"], "voltage_max": 4.2, "voltage_min": 2.5, "mass": 0.05,
                 "specific_heat": 1000.0, "initial_soc": p["soc0"],
                 "ocv": {"soc": [0.0, 0.3, 1.0], "voltage": [3.0, 3.6, 4.15],
                         "entropic": [p["entropic"], -p["entropic"], p["entropic"]]},
                 "r0": {"value": p["r0"], "activation_energy": p["ea"]},
                 "rc": [{"resistance": p["rc_r"], "time_constant": p["tau"]}]},
        "pack": {"series": p["series"], "parallel": p["parallel"], "interconnect_resistance": 0.002},
        "thermal": {"ambient_temperature": p["ambient"], "initial_cell_temperature": p["ambient"] + p["t0_offset"],
                    "sink_heat_capacity": p["c_sink"], "cell_to_sink": p["g_cs"], "sink_to_ambient": p["g_sa"]},
        "profile": {"segment": [scale(s, p["series"], p["parallel"]) for s in segments]},
        "limits": {"cell_temperature_max": 90.0, "charge_temperature_min": -40.0},
        "solver": {"rtol": 1e-7, "output_interval": 5.0},
    }


def scale(segment: dict, series: int, parallel: int) -> dict:
    """Per-cell demands drawn above, scaled to the pack."""
    s = dict(segment)
    if s["mode"] == "current":
        s["value"] *= parallel
    elif s["mode"] == "power":
        s["value"] *= series * parallel
    elif s["mode"] == "resistance":
        s["value"] *= series / parallel
    return s


SETTINGS = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(cell_and_pack(True), st.lists(segment, min_size=1, max_size=6))
def test_invariants_on_random_missions(params, segments):
    result = thermoelec.simulate(build(params, segments))
    assert result.status == "ok", result.message
    for name, values in result.series.items():
        assert np.isfinite(values).all(), name
    soc = result.series["soc"]
    tol = 1e-9
    if result.stop_reason != "soc_limit":
        assert soc.min() >= -tol and soc.max() <= 1 + tol
    else:
        assert soc.min() >= -1e-6 and soc.max() <= 1 + 1e-6  # stopped on reaching the bound
    s = result.summary
    # The balance closes to the integrator's tolerances: relative 1e-4 of the largest term, and an
    # absolute floor from the absolute tolerances, two temperature endpoints per node times its heat
    # capacity for the stored heat, and one integral tolerance for each of the two quadratures.
    rtol = 1e-7
    capacities = params["series"] * params["parallel"] * 0.05 * 1000.0 + params["c_sink"]  # [J/K]
    floor_wh = (2 * capacities * rtol * ATOL_SCALES["temperature"] + 2 * rtol * ATOL_SCALES["integral"]) / 3600.0
    scale_wh = max(abs(s["heat_generated_Wh"]), abs(s["heat_to_ambient_Wh"]), abs(s["heat_stored_Wh"]))
    assert abs(s["heat_generated_Wh"] - s["heat_stored_Wh"] - s["heat_to_ambient_Wh"]) <= 1e-4 * scale_wh + floor_wh
    assert s["energy_dissipated_Wh"] >= -1e-9  # irreversible losses are never negative


@SETTINGS
@given(cell_and_pack(False), st.lists(discharge_segment, min_size=1, max_size=6))
def test_discharge_never_cools_below_ambient_and_start(params, segments):
    result = thermoelec.simulate(build(params, segments))
    assert result.status == "ok", result.message
    floor = min(params["ambient"], params["ambient"] + params["t0_offset"])
    # numerical slack: the integrator's tolerance on kelvin at rtol 1e-7
    assert result.series["cell_temperature_degC"].min() >= floor - 1e-4
    assert result.series["sink_temperature_degC"].min() >= floor - 1e-4
