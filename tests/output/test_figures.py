"""Figures checked on their data, not only on the existence of a file.

Sources: the energy integrals are the summary's (carried as states of the
integration); the maximum-power point E²/(4R) at half the short-circuit current
E/R is the maximum power transfer theorem (circuit theory, common practice).
"""

import matplotlib.image
import numpy as np
import pytest

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


def test_energy_areas_equal_the_summary_in_discharge_regeneration_and_charge(ebike):
    parts = {p.direction: p for p in figures.energy_parts(ebike)}
    s = ebike.summary
    assert set(parts) == {"discharge", "regeneration", "charge"}
    assert parts["discharge"].battery_Wh == pytest.approx(s["energy_battery_discharged_Wh"], rel=5e-3)
    assert parts["discharge"].load_Wh == pytest.approx(s["energy_discharged_Wh"], rel=5e-3)
    # regeneration (the descent, charge fed in by the load) and the charger's CC-CV apart, as in the summary
    assert parts["regeneration"].load_Wh == pytest.approx(s["energy_regenerated_Wh"], rel=5e-3)
    assert parts["charge"].load_Wh == pytest.approx(s["energy_from_charger_Wh"], rel=5e-3)
    assert parts["regeneration"].battery_Wh + parts["charge"].battery_Wh == \
        pytest.approx(s["energy_battery_charged_Wh"], rel=5e-3)
    assert s["energy_regenerated_Wh"] + s["energy_from_charger_Wh"] == pytest.approx(s["energy_charged_Wh"],
                                                                                       rel=1e-12)
    # in charge the terminal curve lies above the open-circuit curve
    assert parts["charge"].load_Wh > parts["charge"].battery_Wh
    total_dissipated = sum(p.dissipated_Wh for p in parts.values())
    assert total_dissipated == pytest.approx(s["energy_dissipated_Wh"], rel=5e-3)


def test_energy_chart_starts_at_zero_with_unique_legend_entries(ebike):
    fig = figures.energy_chart(ebike)
    parts = figures.energy_parts(ebike)
    panels = [ax for ax in fig.axes if ax.get_legend() is not None]
    assert len(panels) == len(parts) == 3
    for ax, part in zip(panels, parts, strict=True):
        low, high = ax.get_ylim()
        assert low == 0.0 and high >= max(part.ocv_V.max(), part.voltage_V.max())  # honest axis: from zero
        assert part.axis_range == (low, high)
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        assert len(labels) == len(set(labels))
    regeneration = [t.get_text() for t in panels[1].get_legend().get_texts()]
    assert any("fed in by the load" in label for label in regeneration)
    assert not any("charger" in label for label in regeneration)  # regeneration is no charger's


def test_energy_chart_labels_carry_the_areas(drone):
    fig = figures.energy_chart(drone)
    (part,) = figures.energy_parts(drone)
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert f"to the load {part.load_Wh:.4g} Wh" in labels
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
    # the minimum-voltage boundary: the cell at V_min, I = (E - V_min)/(R - R_ic) (the cell's terminals lie inside
    # the interconnect, as the engine's voltage limit reads them), P = (E - R I) I at the pack's terminals
    assert state.voltage_limit_current_A == pytest.approx((3.7 - 1.0) / 0.020, rel=1e-12)
    assert state.voltage_limit_power_W == pytest.approx(135.0 * (3.7 - 0.025 * 135.0), rel=1e-12)


def test_operating_region_is_scaled_to_the_mission_with_its_worst_state(drone, ebike):
    for result in (drone, ebike):
        view = figures.operating_view(result)
        s = result.series
        discharging = s["current_A"] > 0
        # the axes contain every operating point, and the current axis ends well short of the short circuit
        assert s["current_A"][discharging].max() <= view.current_max
        assert s["power_W"][discharging].max() <= view.power_max
        assert view.current_max < 0.5 * min(st.short_circuit_A for st in view.states)
        assert view.off_scale and all("short circuit" in text for text in view.off_scale)
    # after the e-bike's recharge the end is a full pack: the worst instant (lowest voltage) is drawn too
    labels = [st.label for st in figures.operating_states(ebike)]
    assert any("lowest voltage" in label for label in labels)
    fig = figures.operating_region(ebike)
    ax = fig.axes[0]
    assert ax.get_xlim() == (0.0, figures.operating_view(ebike).current_max)
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert len(labels) == len(set(labels))
    points = ax.collections[-1]
    legend_dot = ax.get_legend().legend_handles[labels.index("mission operating points")]
    np.testing.assert_allclose(points.get_facecolor()[0], legend_dot.get_facecolor()[0])  # grey, as in the legend


def test_operating_region_draws_the_maximum_power_points_on_its_axis():
    # a small mission current on a stiff pack: 20 A of a 925 A short circuit, maximum power off the axis
    data = scenario(cell=cell_section(), pack={"series": 4, "interconnect_resistance": "5 mohm"},
                    segments=[{"mode": "current", "value": "20 A", "duration": "10 s"}])
    result = simulate(data)
    view = figures.operating_view(result)
    # 2.5 times the mission's peak, or as far as a pulse capability from rest on the usable side of its state's
    # maximum-power current (87 A) reaches: the 2 s pulse runs to the cells' voltage limit, (3.7 - 1.0) / 20 mohm =
    # 135 A, past it (written at the edge); the 30 s pulse stops earlier, on the cells' heating
    state = view.states[0]
    pulses = view.pulses[0]
    assert pulses.current[0] == pytest.approx((3.7 - 1.0) / 0.020, rel=1e-6) and pulses.binding[0] == "voltage_min"
    usable = pulses.current[pulses.current < state.max_power_current_A]
    assert usable.size and set(pulses.binding[pulses.current < state.max_power_current_A]) == {"temperature_max"}
    assert view.current_max == pytest.approx(max(2.5 * 20.0, 1.05 * usable.max()), rel=1e-9)
    assert any("pulse capability" in text and "135 A" in text for text in view.off_scale)
    fig = figures.operating_region(result)
    circles = [line for line in fig.axes[0].lines if line.get_marker() == "o"]
    assert circles == []  # off scale: written at the edge instead
    assert all("maximum power" in text for text in view.off_scale if "pulse" not in text)


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

    assert set(figures.MODE_COLOURS) == {"rest", "cccv", *LOAD_MODES}
    assert len(set(figures.MODE_COLOURS.values())) == len(figures.MODE_COLOURS)  # told apart
    assert figures.STOP_EVENT_NAMES == {EVENTS[code].name for code in STOP_EVENTS}
    assert {"voltage_min", "temperature_max", "power_limit"} <= figures.STOP_EVENT_NAMES


def test_temperature_axis_follows_the_data_and_marks_an_off_scale_limit(ebike):
    # a 4.5 K rise from 18 degC on a 60 degC limit: the limit would squash the data flat, so it is marked
    scale = figures.axis_range(figures.temperature_series(ebike.series), [60.0], figures.MIN_TEMPERATURE_SPAN)
    cell = ebike.series["cell_temperature_degC"]
    assert scale.low <= cell.min() and scale.high >= cell.max() and scale.high < 30.0
    assert scale.off_scale == (60.0,) and scale.shown == ()
    ax_temp = figures.dashboard(ebike).axes[4]
    assert ax_temp.get_ylim() == (scale.low, scale.high)
    assert any("cell limit 60 degC (off scale)" in t.get_text() for t in ax_temp.texts)
    # a limit near the data is drawn and taken into the range
    near = figures.axis_range([np.array([40.0, 55.0])], [60.0], figures.MIN_TEMPERATURE_SPAN)
    assert near.shown == (60.0,) and near.high > 60.0


def test_cccv_is_one_mode_and_segment_names_are_written():
    data = scenario(cell=cell_section(capacity="2 Ah", initial_soc=0.5, ocv={"soc": [0, 1], "voltage": [3.0, 4.1]}),
                    segments=[
        {"name": "ride", "mode": "current", "value": "2 A", "duration": "600 s"},
        {"name": "top up", "mode": "cccv", "current": "-2 A", "voltage": "3.9 V", "cutoff_current": "0.5 A",
         "duration": "1 h"}])
    result = simulate(data)
    cccv = result.segment_name == "top up"
    assert set(result.demand_mode[cccv]) == {"cccv"}  # CC and CV phases as one charge
    assert {"cv_switch", "cv_cutoff"} <= {e["event"] for e in result.summary["events"]}
    assert all(e.get("segment_name") == "top up" for e in result.summary["events"])
    labels = figures.segment_labels(result.series["time_s"], result.segment_name)
    assert [name for _, _, name in labels] == ["ride", "top up"]
    fig = figures.dashboard(result)
    assert {"ride", "top up"} <= {t.get_text() for t in fig.axes[0].texts}
    legend = [t.get_text() for t in fig.legends[0].get_texts()]
    assert "cccv mode" in legend and len(legend) == len(set(legend))


def test_an_instant_stop_is_explained_on_the_dashboard_with_the_case_in_the_title(drone):
    import thermoelec

    cold = thermoelec.simulate(_load("drone_delivery"), overrides={"thermal.ambient_temperature": "-10 degC"})
    assert cold.summary["duration_s"] == 0.0
    assert "the first demand" in cold.summary["stop_explanation"]
    assert "812.7 W" in cold.summary["stop_explanation"]  # the most it delivers above the voltage limit
    title = figures.dashboard(cold)._suptitle.get_text()
    assert "thermal.ambient_temperature = -10 degC" in title and "at once" in title
    cold.metadata["case"] = "frost"
    assert figures.title_of(cold).endswith("case frost")


def test_comparison_title_says_stopped_only_when_a_case_stopped(drone):
    import thermoelec

    cold = thermoelec.simulate(_load("drone_delivery"), overrides={"thermal.ambient_temperature": "-10 degC"})
    assert "stopped" not in figures.comparison_overlay({"a": drone, "b": drone})._suptitle.get_text()
    assert "stopped early - cold" in figures.comparison_overlay({"a": drone, "cold": cold})._suptitle.get_text()
