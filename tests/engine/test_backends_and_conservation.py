"""Back-end agreement and conservation laws on realistic scenarios.

Checks: CVODE and scipy's LSODA agree (two independent integrators); the heat
balance closes (first law, lumped nodes: heat generated = heat stored in both
nodes + heat rejected to ambient); battery energy equals the integral of pack
OCV x current (computed here with scipy.integrate.trapezoid on a fine series);
energy dissipated = battery - load energy.
"""

import numpy as np
import pytest
from scipy.integrate import trapezoid

import thermoelec

from ..helpers import SCENARIOS


def realistic(backend: str = "cvode", rtol: float = 1e-8, output_interval: str = "1 s") -> dict:
    """4s2p pack: OCV and entropic tables, 2-D R0 table, an Arrhenius RC pair, mixed load modes."""
    return {
        "format": 1,
        "scenario": {"name": "4s2p mixed modes"},
        "cell": {
            "capacity": "3 Ah", "voltage_max": "4.2 V", "voltage_min": "2.8 V",
            "mass": "0.048 kg", "specific_heat": "1000 J/kg/K", "initial_soc": 0.95,
            "ocv": {"soc": [0.0, 0.2, 0.5, 0.8, 1.0], "voltage": [3.0, 3.5, 3.68, 3.95, 4.2],
                    "entropic": [-3e-4, 1e-4, 0.0, -1e-4, -2e-4]},
            "r0": {"soc": [0.0, 0.5, 1.0], "temperature": ["0 degC", "25 degC", "50 degC"],
                   "values": [[0.06, 0.05, 0.055], [0.03, 0.025, 0.027], [0.02, 0.017, 0.018]]},
            "rc": [{"resistance": "15 mohm", "time_constant": "30 s", "activation_energy": "30 kJ/mol"}],
        },
        "pack": {"series": 4, "parallel": 2, "interconnect_resistance": "8 mohm"},
        "thermal": {"ambient_temperature": "15 degC", "sink_heat_capacity": "250 J/K",
                    "cell_to_sink": "1.5 W/K", "sink_to_ambient": "0.8 W/K", "cell_to_ambient": "0.1 W/K"},
        "profile": {"repeat": 2, "segment": [
            {"mode": "current", "value": "6 A", "duration": "300 s"},
            {"mode": "power", "value": "60 W", "duration": "200 s"},
            {"mode": "power", "value": "-25 W", "duration": "60 s"},
            {"mode": "resistance", "value": "2.5 ohm", "duration": "120 s"},
            {"mode": "rest", "duration": "120 s"},
            {"mode": "voltage", "value": "15.2 V", "duration": "60 s"},
        ]},
        "solver": {"backend": backend, "rtol": rtol, "output_interval": output_interval},
    }


@pytest.fixture(scope="module")
def both():
    return {b: thermoelec.simulate(realistic(b, rtol=1e-9)) for b in ("cvode", "scipy")}


def test_backends_agree_on_a_realistic_scenario(both):
    a, b = both["cvode"], both["scipy"]
    assert a.completed and b.completed
    np.testing.assert_array_equal(a.series["time_s"], b.series["time_s"])
    # two independent integrators at rtol 1e-9: agreement within a few hundred times rtol
    np.testing.assert_allclose(a.series["voltage_V"], b.series["voltage_V"], atol=1e-6)
    np.testing.assert_allclose(a.series["cell_temperature_degC"], b.series["cell_temperature_degC"], atol=1e-5)
    np.testing.assert_allclose(a.series["soc"], b.series["soc"], atol=1e-8)
    for key in ("energy_battery_Wh", "energy_load_Wh", "heat_generated_Wh", "heat_to_ambient_Wh"):
        assert a.summary[key] == pytest.approx(b.summary[key], rel=1e-6), key


@pytest.mark.parametrize("backend", ["cvode", "scipy"])
def test_heat_balance_closes(both, backend):
    s = both[backend].summary
    stored_plus_rejected = s["heat_stored_Wh"] + s["heat_to_ambient_Wh"]
    assert s["heat_generated_Wh"] == pytest.approx(stored_plus_rejected, rel=1e-4)


def test_heat_balance_closes_on_the_demo_missions():
    for name in ("drone_delivery.toml", "ebike_route.toml"):
        s = thermoelec.simulate_file(SCENARIOS / name).summary
        assert s["heat_generated_Wh"] == pytest.approx(s["heat_stored_Wh"] + s["heat_to_ambient_Wh"], rel=1e-4)


def test_dissipated_identity_is_exact(both):
    s = both["cvode"].summary
    assert s["energy_dissipated_Wh"] == s["energy_battery_Wh"] - s["energy_load_Wh"]
    # generated heat = dissipated + reversible (Bernardi): an identity of the model, to rounding
    assert s["heat_generated_Wh"] == pytest.approx(s["energy_dissipated_Wh"] + s["heat_reversible_Wh"], rel=1e-7)


def test_battery_energy_is_the_integral_of_ocv_times_current():
    result = thermoelec.simulate(realistic(rtol=1e-9, output_interval="0.05 s"))
    t, ocv, i, v = (result.series[k] for k in ("time_s", "ocv_V", "current_A", "voltage_V"))
    # duplicated time stamps at each jump make the trapezoid rule exact across discontinuities
    battery = trapezoid(ocv * i, t) / 3600
    load = trapezoid(v * i, t) / 3600
    assert result.summary["energy_battery_Wh"] == pytest.approx(battery, rel=1e-5)
    assert result.summary["energy_load_Wh"] == pytest.approx(load, rel=1e-5)


def test_charge_throughput_is_the_integral_of_current_magnitude():
    result = thermoelec.simulate(realistic(rtol=1e-9, output_interval="0.05 s"))
    t, i = result.series["time_s"], result.series["current_A"]
    assert result.summary["charge_throughput_Ah"] == pytest.approx(trapezoid(np.abs(i), t) / 3600, rel=1e-5)


def test_results_do_not_depend_on_the_output_interval():
    coarse = thermoelec.simulate(realistic(rtol=1e-9, output_interval="10 s")).summary
    fine = thermoelec.simulate(realistic(rtol=1e-9, output_interval="0.5 s")).summary
    for key in ("energy_battery_Wh", "heat_generated_Wh", "soc_end"):
        assert coarse[key] == pytest.approx(fine[key], rel=1e-7), key
