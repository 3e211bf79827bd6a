"""The load-mode registry in the scenario format: segment modes, value units, CSV columns.

Every mode of :data:`thermoelec.physics.loads.LOAD_MODES` must be usable in a
segment and as a CSV demand column, in its unit. Sources: the SI prefix milli
(SI Brochure, 9th ed., §3) and the rows of the CSV files written here.
"""

from __future__ import annotations

import pytest

import thermoelec
from thermoelec.physics.loads import LOAD_MODES

from ..helpers import scenario


@pytest.mark.parametrize("mode", list(LOAD_MODES.values()), ids=list(LOAD_MODES))
def test_a_segment_value_is_read_in_its_modes_unit(mode):
    data = scenario(segments=[{"mode": mode.name, "value": f"3700 m{mode.unit}", "duration": "1 min"}])
    segment = thermoelec.scenario_from_dict(data).problem().segments[0]
    assert (segment.mode, segment.value) == (mode.name, pytest.approx(3.7, rel=1e-12))


@pytest.mark.parametrize("mode", list(LOAD_MODES.values()), ids=list(LOAD_MODES))
def test_a_csv_demand_column_per_mode(tmp_path, mode):
    (tmp_path / "p.csv").write_text(f"time_s,{mode.csv_column}\n0,3.5\n10,3.6\n30,1\n")
    data = scenario(segments=[{"file": "p.csv"}])
    segments = thermoelec.scenario_from_dict(data, base_dir=tmp_path).problem().segments
    assert [(s.mode, s.value, s.duration) for s in segments] == [(mode.name, 3.5, 10.0), (mode.name, 3.6, 20.0)]


@pytest.mark.parametrize("mode", [m for m in LOAD_MODES.values() if m.positive], ids=lambda m: m.name)
def test_a_positive_demand_must_be_positive(tmp_path, mode):
    with pytest.raises(thermoelec.ScenarioError, match=r"profile\.segment\[1\]\.value: value must be > 0"):
        thermoelec.scenario_from_dict(scenario(segments=[{"mode": mode.name, "value": -1, "duration": 60}]))
    (tmp_path / "p.csv").write_text(f"time_s,{mode.csv_column}\n0,3.5\n10,-1\n20,1\n")
    with pytest.raises(thermoelec.ScenarioError, match=rf"{mode.csv_column}: row 2 \(line 3\): must be > 0"):
        thermoelec.scenario_from_dict(scenario(segments=[{"file": "p.csv"}]), base_dir=tmp_path)


def test_scale_multiplies_the_signed_demands_and_keeps_the_set_points():
    segments = [{"mode": name, "value": 2.0, "duration": 60} for name in LOAD_MODES]
    segments.append({"mode": "cccv", "current": "-1 A", "voltage": "4.1 V", "cutoff_current": "0.1 A"})
    data = scenario(segments=segments, profile={"segment": segments, "scale": 1.5})
    built = thermoelec.scenario_from_dict(data).problem().segments
    expected = {name: 3.0 if not mode.positive else 2.0 for name, mode in LOAD_MODES.items()}
    assert {s.mode: s.value for s in built[:-1]} == expected
    assert built[-1].value == pytest.approx(-1.5)
