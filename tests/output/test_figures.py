"""Figures checked on their data, not only on the existence of a file.

Sources: the energy integrals are the summary's (carried as states of the
integration); the maximum-power point E²/(4R) at half the short-circuit current
E/R is the maximum power transfer theorem (circuit theory, common practice).
"""

import matplotlib.image
import numpy as np
import pytest
from matplotlib.lines import Line2D

from thermoelec.output import figures

from ..helpers import SCENARIOS, cell_section, scenario, simulate


@pytest.fixture(scope="module")
def drone():
    return simulate(_load("drone_delivery"))


@pytest.fixture(scope="module")
def ebike():
    return simulate(_load("ebike_route"))


def _load(name: str):
    import thermoelec

    return thermoelec.load_scenario(SCENARIOS / f"{name}.toml")


def test_energy_areas_equal_the_summary_in_discharge(drone):
    (part,) = figures.energy_parts(drone)
    s = drone.summary
    assert part.direction == "discharge"
    assert part.battery_Wh == pytest.approx(s["energy_battery_discharged_Wh"], rel=5e-3)
    assert part.load_Wh == pytest.approx(s["energy_discharged_Wh"], rel=5e-3)
    assert part.dissipated_Wh == pytest.approx(s["energy_dissipated_Wh"], rel=5e-3)


def test_energy_areas_equal_the_summary_in_discharge_and_charge(ebike):
    parts = {p.direction: p for p in figures.energy_parts(ebike)}
    s = ebike.summary
    assert parts["discharge"].battery_Wh == pytest.approx(s["energy_battery_discharged_Wh"], rel=5e-3)
    assert parts["discharge"].load_Wh == pytest.approx(s["energy_discharged_Wh"], rel=5e-3)
    assert parts["charge"].battery_Wh == pytest.approx(s["energy_battery_charged_Wh"], rel=5e-3)
    assert parts["charge"].load_Wh == pytest.approx(s["energy_charged_Wh"], rel=5e-3)
    # in charge the terminal curve lies above the open-circuit curve
    assert parts["charge"].load_Wh > parts["charge"].battery_Wh
    total_dissipated = parts["discharge"].dissipated_Wh + parts["charge"].dissipated_Wh
    assert total_dissipated == pytest.approx(s["energy_dissipated_Wh"], rel=5e-3)


def test_energy_chart_labels_carry_the_areas(drone):
    fig = figures.energy_chart(drone)
    (part,) = figures.energy_parts(drone)
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert f"load energy {part.load_Wh:.4g} Wh" in labels
    assert f"dissipated {part.dissipated_Wh:.4g} Wh" in labels
    assert f"{part.efficiency:.2%}" in fig.axes[0].get_title()


def test_maximum_power_point_sits_at_half_the_short_circuit_current():
    # one cell, U = 3.7 V, R0 = 20 mohm, interconnect 5 mohm: E = 3.7 V, R = 25 mohm at rest
    data = scenario(cell=cell_section(), pack={"interconnect_resistance": "5 mohm"},
                    segments=[{"mode": "rest", "duration": "10 s"}])
    result = simulate(data)
    state = figures.operating_states(result)[0]
    assert state.emf_V == pytest.approx(3.7, rel=1e-12)
    assert state.resistance_ohm == pytest.approx(0.025, rel=1e-12)
    assert state.max_power_W == pytest.approx(3.7**2 / (4 * 0.025), rel=1e-12)
    assert state.max_power_current_A == pytest.approx(0.5 * 3.7 / 0.025, rel=1e-12)
    current, load, loss = state.curves(2001)
    peak = int(np.argmax(load))
    assert current[peak] == pytest.approx(state.max_power_current_A, rel=1e-3)
    assert load[peak] == pytest.approx(loss[peak], rel=1e-3)  # 50 % efficiency at maximum power
    # the minimum-voltage boundary: V = V_min at I = (E - V_min)/R
    assert state.voltage_limit_current_A == pytest.approx((3.7 - 1.0) / 0.025, rel=1e-12)


def test_operating_region_draws_the_maximum_power_points(drone):
    fig = figures.operating_region(drone)
    circles = [line for line in fig.axes[0].lines if isinstance(line, Line2D) and line.get_marker() == "o"]
    states = figures.operating_states(drone)
    assert len(circles) == len(states)
    s = drone.series
    for line, state in zip(circles, states, strict=True):
        row = int(np.flatnonzero(s["time_s"] == state.time_s)[-1 if state.time_s > 0 else 0])
        e, r = s["pack_emf_V"][row], s["pack_resistance_ohm"][row]
        x, y = line.get_xdata()[0], line.get_ydata()[0]
        assert x == pytest.approx(e / r / 2, rel=1e-9)
        assert y == pytest.approx(e * e / (4 * r), rel=1e-9)


def test_dashboard_marks_limits_and_the_stop():
    # 2 Ah cell discharged at 3C: stops on its minimum voltage before the 1 h segment ends
    cell = cell_section(capacity="2 Ah", initial_soc=1.0,
                        ocv={"soc": [0, 1], "voltage": [3.0, 4.1]}, voltage_min="3.2 V")
    result = simulate(scenario(cell=cell, segments=[{"mode": "current", "value": "6 A", "duration": "1 h"}]))
    assert result.stop_reason == "voltage_min"
    fig = figures.dashboard(result)
    voltage_axis = fig.axes[2]
    horizontal = {round(float(line.get_ydata()[0]), 9) for line in voltage_axis.lines
                  if len(set(np.atleast_1d(line.get_ydata()))) == 1}
    assert {3.2, 4.5} <= horizontal
    stop_time = result.summary["duration_s"]
    vertical = [float(line.get_xdata()[0]) for line in voltage_axis.lines
                if len(set(np.atleast_1d(line.get_xdata()))) == 1]
    assert any(abs(x - stop_time / 60.0) < 1e-9 for x in vertical)  # minutes on the axis


def test_write_figures_png_and_svg(drone, tmp_path):
    paths = figures.write_figures(drone, tmp_path)
    assert sorted(p.name for p in paths) == sorted(f"{n}.{e}" for n in figures.FIGURE_NAMES for e in ("png", "svg"))
    for path in paths:
        if path.suffix == ".png":
            image = matplotlib.image.imread(path)
            assert image.shape[0] > 300 and image.shape[1] > 300
            assert float(np.std(image)) > 0.01  # not a blank canvas
        else:
            assert path.read_text().lstrip().startswith("<?xml") and "<svg" in path.read_text()[:2000]


def test_comparison_overlay_has_one_line_per_case(drone, ebike):
    fig = figures.comparison_overlay({"drone": drone, "e-bike": ebike})
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert labels == ["drone", "e-bike"]


def test_write_comparison_figure_writes_the_overlay(drone, ebike, tmp_path):
    paths = figures.write_comparison_figure({"drone": drone, "e-bike": ebike}, tmp_path / "cmp")
    assert [p.name for p in paths] == ["comparison.png", "comparison.svg"]
    image = matplotlib.image.imread(paths[0])
    assert float(np.std(image)) > 0.01  # not a blank canvas


def test_mode_colours_and_event_names_come_from_the_registries():
    from thermoelec.engine.events import EVENTS, STOP_EVENTS
    from thermoelec.physics.loads import LOAD_MODES

    assert set(figures.MODE_COLOURS) == {"rest", *LOAD_MODES}
    assert len(set(figures.MODE_COLOURS.values())) == len(figures.MODE_COLOURS)  # told apart
    assert figures.STOP_EVENT_NAMES == {EVENTS[code].name for code in STOP_EVENTS}
    assert {"voltage_min", "temperature_max", "power_limit"} <= figures.STOP_EVENT_NAMES
