"""The scenario family's cache: files read once per version, one segment tuple per profile.

The batched solver recognises a shared profile by the identity of the segment
tuple (``problem.segments is other.segments``), so variants must share it exactly
when their segments are the same. Sources: the CSV files written here (their
rows are the expected demands) and the definition of the Celsius scale
(0 degC = 273.15 K, SI Brochure, 9th ed., §2.3.1).
"""

from __future__ import annotations

import os
import pickle

import pytest

import thermoelec
from thermoelec.scenario import ScenarioCache

from ..helpers import scenario

ROUTE = "time_s,current_A\n0,1.0\n10,2.0\n20,0.5\n"
#: ROUTE's segments: each row's demand [A] held until the next row's time [s] (n rows, n - 1 segments)
ROUTE_HOLDS = [(1.0, 10.0), (2.0, 10.0)]
OTHER = "time_s,power_W\n0,4.0\n30,6.0\n45,1.0\n"
SEGMENTS = [{"mode": "current", "value": "4 A", "duration": "20 min"}]


def holds(problem) -> list[tuple[float, float]]:
    """Value and duration of the segments after the first (the CSV file's)."""
    return [(s.value, s.duration) for s in problem.segments[1:]]


def with_route(folder, route: str = ROUTE) -> thermoelec.Scenario:
    (folder / "route.csv").write_text(route)
    data = scenario(segments=[*SEGMENTS, {"file": "route.csv"}])
    return thermoelec.scenario_from_dict(data, base_dir=folder)


def test_variants_share_one_segment_tuple_unless_the_profile_differs():
    # a soak takes the ambient, so then the ambient is part of what the segments are made of
    base = thermoelec.scenario_from_dict(scenario(segments=SEGMENTS))
    warm, hot = (base.with_overrides({"thermal.ambient_temperature": t}).problem() for t in ("20 degC", "30 degC"))
    assert warm.segments is hot.segments
    assert base.problem().segments is warm.segments
    other = base.with_overrides({"profile.segment[1].value": "5 A"}).problem()
    assert other.segments is not warm.segments and other.segments[0].value == 5.0
    soaked = thermoelec.scenario_from_dict(scenario(segments=[{"mode": "soak", "duration": "10 min"}, *SEGMENTS]))
    cold, mild = (soaked.with_overrides({"thermal.ambient_temperature": t}).problem()
                  for t in ("-10 degC", "10 degC"))
    assert cold.soak[0].ambient_temperature == pytest.approx(263.15)
    assert mild.soak[0].ambient_temperature == pytest.approx(283.15)


def test_variants_on_a_csv_profile_share_its_read_and_its_segments(tmp_path):
    base = with_route(tmp_path)
    read = base.cache.files_read
    assert read == 1  # checked at loading, kept for the problems
    problems = [base.with_overrides({"pack.parallel": n}).problem() for n in (1, 2, 3)]
    problems += [base.with_overrides({"profile.segment[1].duration": f"{m} min"}).problem() for m in (5, 6)]
    assert problems[0].segments is problems[1].segments is problems[2].segments
    assert problems[3].segments is not problems[0].segments
    assert holds(problems[3]) == holds(problems[0]) == ROUTE_HOLDS
    # the CSV segments themselves are shared by the profiles that name the file
    assert problems[3].segments[1] is problems[0].segments[1]
    assert base.cache.files_read == read  # overrides under profile check the files again, from the cache


def test_a_rewritten_csv_file_is_read_again(tmp_path):
    base = with_route(tmp_path)
    before = base.problem()
    path = tmp_path / "route.csv"
    stamp = path.stat().st_mtime_ns
    path.write_text("time_s,current_A\n0,3.0\n10,0.25\n40,0\n")
    os.utime(path, ns=(stamp + 10**9, stamp + 10**9))  # a new mtime even on a coarse clock
    after = base.with_overrides({"pack.parallel": 2}).problem()
    assert holds(after) == [(3.0, 10.0), (0.25, 30.0)]
    assert holds(before) == ROUTE_HOLDS
    assert base.problem().segments is after.segments


def test_a_variant_naming_another_csv_reads_it(tmp_path):
    base = with_route(tmp_path)
    (tmp_path / "other.csv").write_text(OTHER)
    variant = base.with_overrides({"profile.segment[2].file": "other.csv"})
    assert variant.cache is base.cache
    segments = variant.problem().segments
    assert [(s.mode, s.value, s.duration) for s in segments[1:]] == [("power", 4.0, 30.0), ("power", 6.0, 15.0)]
    assert holds(base.problem()) == ROUTE_HOLDS
    with pytest.raises(thermoelec.ScenarioError, match=r"nowhere\.csv: profile\.segment\[2\]\.file: profile file "
                       "not found"):
        base.with_overrides({"profile.segment[2].file": "nowhere.csv"})


def test_an_ambient_profile_is_read_once(tmp_path):
    (tmp_path / "air.csv").write_text("time_s,ambient_temperature_degC\n0,0\n600,20\n")
    data = scenario(segments=SEGMENTS)
    data["thermal"] = {k: v for k, v in data["thermal"].items() if k != "ambient_temperature"}
    data["thermal"]["ambient_profile"] = "air.csv"
    base = thermoelec.scenario_from_dict(data, base_dir=tmp_path)
    first, second = (base.with_overrides({"pack.parallel": n}).problem() for n in (1, 2))
    assert first.ambient_profile is second.ambient_profile
    assert first.ambient_profile[1].tolist() == pytest.approx([273.15, 293.15])  # the file's rows, in kelvin
    assert first.ambient_temperature == pytest.approx(273.15)
    assert base.cache.files_read == 1


def test_a_pickled_scenario_arrives_with_an_empty_cache_of_its_own(tmp_path):
    base = with_route(tmp_path)
    base.problem()
    copy = pickle.loads(pickle.dumps(base))
    assert copy.cache is not base.cache and copy.cache.files_read == 0
    a, b = (copy.with_overrides({"pack.parallel": n}).problem() for n in (1, 2))
    assert a.segments is b.segments and a.segments == base.problem().segments
    assert copy.cache.files_read == 1


def test_the_cache_forgets_its_oldest_entry_when_full():
    cache = ScenarioCache(max_entries=2)
    first = cache.built("a", lambda: ["a"])
    cache.built("b", lambda: ["b"])
    assert cache.built("a", lambda: ["new"]) is first
    cache.built("c", lambda: ["c"])
    assert cache.built("a", lambda: ["rebuilt"]) == ["rebuilt"]
