"""Electrical behaviour through the whole engine against closed forms.

Sources: circuit theory (Thevenin equivalent, maximum power transfer) and the
CC-CV taper with a linear OCV, all derived and tabulated in the project's
validation notes (§4); Coulomb counting; cases derived here where an event time
is known in closed form.
"""

import numpy as np
import pytest
from scipy.integrate import quad

from ..helpers import cell_section, scenario, simulate, value_at

BACKENDS = ["cvode", "scipy"]


def thevenin_case(backend: str) -> dict:
    cell = cell_section(
        r0={"value": "0.02 ohm"},
        rc=[{"resistance": "0.015 ohm", "capacitance": "2000 F"},
            {"resistance": "0.010 ohm", "capacitance": "20000 F"}],
    )
    return scenario(cell=cell, segments=[{"mode": "current", "value": "5 A", "duration": "600 s"},
                                         {"mode": "rest", "duration": "600 s"}],
                    solver={"rtol": 1e-10, "backend": backend})


@pytest.mark.parametrize("backend", BACKENDS)
def test_thevenin_step_and_rest(backend):
    # U = 3.7, R0 = 0.02, R1 = 0.015 / C1 = 2000 F, R2 = 0.010 / C2 = 20 000 F, I = 5 A from rest
    result = simulate(thevenin_case(backend))
    pulse = {0: 3.600000, 10: 3.576301, 30: 3.545626, 100: 3.508002}
    for t, v in pulse.items():
        assert value_at(result, "voltage_V", t) == pytest.approx(v, abs=1e-6)
    assert value_at(result, "voltage_V", 600, side="first") == pytest.approx(3.477489, abs=1e-6)
    rest = {600: 3.577489, 630: 3.631516, 700: 3.668508, 1200: 3.697635}
    for t, v in rest.items():
        assert value_at(result, "voltage_V", t) == pytest.approx(v, abs=1e-6)


@pytest.mark.parametrize("backend", BACKENDS)
def test_cccv_taper(backend):
    # Q = 5 Ah, R0 = 0.02, OCV 3.2 + 1.0 SoC, I0 = 5 A, Vmax = 4.2 V, SoC0 = 0.2: CC ends at 2520 s
    # (SoC 0.9); CV current I0 exp(-t/360 s); C/20 after 1078.4636 s of CV; final SoC 0.995
    cell = cell_section(capacity="5 Ah", voltage_max="4.2 V", voltage_min="2.5 V", initial_soc=0.2,
                        ocv={"soc": [0.0, 1.0], "voltage": [3.2, 4.2]}, r0={"value": "0.02 ohm"})
    data = scenario(cell=cell, segments=[{"mode": "cccv", "current": "-5 A", "voltage": "4.2 V",
                                          "cutoff_current": "0.25 A"}],
                    solver={"rtol": 1e-10, "backend": backend})
    result = simulate(data)
    assert result.completed
    events = {e["event"]: e["time_s"] for e in result.summary["events"]}
    assert events["cv_switch"] == pytest.approx(2520.0, rel=1e-9)
    assert value_at(result, "current_A", 2620.0) == pytest.approx(-3.787326, abs=2e-6)
    assert value_at(result, "current_A", 2880.0) == pytest.approx(-1.839397, abs=2e-6)
    # the cutoff time is ill-conditioned (I = (E - V)/R0 with E - V = 5 mV): 1e-6 relative
    assert events["cv_cutoff"] - events["cv_switch"] == pytest.approx(1078.4636, rel=1e-6)
    assert result.summary["soc_end"] == pytest.approx(0.995, abs=1e-9)


@pytest.mark.parametrize("backend", BACKENDS)
def test_cutoff_time_of_constant_current_on_linear_ocv(backend):
    # Derived: U = 3.2 + SoC, R0 = 0.02, I = 10 A, Q = 5 Ah, SoC0 = 1:
    # V(t) = 4.0 - t/1800 s  ->  V = 3.0 V at exactly t = 1800 s
    cell = cell_section(capacity="5 Ah", voltage_min="3.0 V", initial_soc=1.0,
                        ocv={"soc": [0.0, 1.0], "voltage": [3.2, 4.2]}, r0={"value": "0.02 ohm"})
    data = scenario(cell=cell, segments=[{"mode": "current", "value": "10 A", "duration": "1 h"}],
                    solver={"rtol": 1e-8, "backend": backend})
    result = simulate(data)
    assert result.stop_reason == "voltage_min"
    assert not result.completed
    assert result.summary["duration_s"] == pytest.approx(1800.0, rel=1e-6)
    assert result.summary["cell_voltage_min_V"] == pytest.approx(3.0, abs=1e-7)


@pytest.mark.parametrize("backend", BACKENDS)
def test_power_limit_time_on_linear_ocv(backend):
    # Derived: constant power P from E = 3.0 + SoC behind R = 0.05 ohm. The power stops being
    # deliverable when E^2 = 4 R P, at SoC* = 2 sqrt(R P) - 3.0; the time to get there is
    # t* = int_{SoC*}^{1} 3600 Q / I(SoC) dSoC with I = 2P / (E + sqrt(E^2 - 4RP)),
    # evaluated with scipy.integrate.quad.
    r, p, q_ah = 0.05, 60.0, 1.0
    cell = cell_section(capacity=f"{q_ah} Ah", voltage_min="0.5 V", initial_soc=1.0,
                        ocv={"soc": [0.0, 1.0], "voltage": [3.0, 4.0]}, r0={"value": f"{r} ohm"})
    data = scenario(cell=cell, segments=[{"mode": "power", "value": f"{p} W", "duration": "1 h"}],
                    solver={"rtol": 1e-10, "backend": backend})
    result = simulate(data)
    z_star = 2 * np.sqrt(r * p) - 3.0

    def seconds_per_soc(z):
        e = 3.0 + z
        return 3600 * q_ah / (2 * p / (e + np.sqrt(max(e * e - 4 * r * p, 0.0))))

    t_star, _ = quad(seconds_per_soc, z_star, 1.0, epsabs=1e-12, epsrel=1e-12)
    assert result.stop_reason == "power_limit"
    assert result.summary["duration_s"] == pytest.approx(t_star, rel=1e-6)
    assert result.summary["soc_end"] == pytest.approx(z_star, abs=1e-8)


def test_power_above_maximum_stops_at_once():
    # U^2 / (4 R0) = 68.45 W for U = 3.7 V, R0 = 0.05 ohm: 68.5 W is not deliverable
    cell = cell_section(r0={"value": "0.05 ohm"})
    result = simulate(scenario(cell=cell, segments=[{"mode": "power", "value": "68.5 W", "duration": "10 s"}]))
    assert result.stop_reason == "power_limit"
    assert result.summary["duration_s"] == 0.0
    assert np.isfinite(result.series["current_A"]).all()


@pytest.mark.parametrize(("segment", "current", "voltage"), [
    ({"mode": "power", "value": "20 W"}, 5.871235, 3.406438),       # lower root, circuit theory
    ({"mode": "resistance", "value": "0.5 ohm"}, 6.727273, 3.363636),
    ({"mode": "voltage", "value": "3.2 V"}, 10.0, 3.2),
])
def test_load_modes_at_the_first_instant(segment, current, voltage):
    cell = cell_section(r0={"value": "0.05 ohm"})
    result = simulate(scenario(cell=cell, segments=[{**segment, "duration": "1 s"}]))
    assert value_at(result, "current_A", 0.0) == pytest.approx(current, abs=1e-6)
    assert value_at(result, "voltage_V", 0.0) == pytest.approx(voltage, abs=1e-6)


def test_coulomb_counting():
    # 2.5 A for 1 h from a 5 Ah cell: SoC falls by 0.5, throughput 2.5 Ah (charge conservation)
    cell = cell_section(capacity="5 Ah", initial_soc=1.0)
    result = simulate(scenario(cell=cell, segments=[{"mode": "current", "value": "2.5 A", "duration": "1 h"}]))
    assert result.summary["soc_end"] == pytest.approx(0.5, abs=1e-12)
    assert result.summary["charge_throughput_Ah"] == pytest.approx(2.5, rel=1e-9)


def test_pack_scaling():
    # Ns x Np identical cells: pack voltage Ns V_cell - I R_ic, cell current I / Np (circuit theory)
    cell = cell_section(r0={"value": "0.05 ohm"})
    data = scenario(cell=cell, segments=[{"mode": "current", "value": "6 A", "duration": "1 s"}],
                    pack={"series": 4, "parallel": 3, "interconnect_resistance": "0.01 ohm"})
    result = simulate(data)
    assert value_at(result, "cell_voltage_V", 0.0) == pytest.approx(3.7 - 2.0 * 0.05, abs=1e-12)
    assert value_at(result, "voltage_V", 0.0) == pytest.approx(4 * 3.6 - 6 * 0.01, abs=1e-12)
    assert value_at(result, "ocv_V", 0.0) == pytest.approx(4 * 3.7, abs=1e-12)


def test_segment_end_condition_on_voltage():
    # Derived as above: V(t) = 4.0 - t/1800 s; a segment ending at V < 3.5 V lasts 900 s,
    # then the rest segment runs its full 60 s
    cell = cell_section(capacity="5 Ah", voltage_min="3.0 V", initial_soc=1.0,
                        ocv={"soc": [0.0, 1.0], "voltage": [3.2, 4.2]}, r0={"value": "0.02 ohm"})
    data = scenario(cell=cell, segments=[
        {"mode": "current", "value": "10 A", "duration": "1 h", "voltage_below": "3.5 V"},
        {"mode": "rest", "duration": "60 s"}])
    result = simulate(data)
    assert result.completed
    ends = [e for e in result.summary["events"] if e["event"] == "end_voltage_below"]
    assert ends[0]["time_s"] == pytest.approx(900.0, rel=1e-7)
    assert result.summary["duration_s"] == pytest.approx(960.0, rel=1e-7)
