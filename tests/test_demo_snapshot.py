"""Every demo mission and case gives the summary recorded in ``tests/data/demo_summaries.json``.

The snapshot guards refactoring: a change of structure must not change a
number. The reference is the engine's own earlier output, so this is a
regression check, not a validation (the validation tests compare against
closed forms and reference libraries). Tolerance 1e-12 relative (1e-12
absolute near zero): the same arithmetic on the same machine gives the same
bits; a reordered sum may move the last digit or two.
"""

from __future__ import annotations

import json
import math

import pytest

from .demo_summaries import SNAPSHOT, demo_summaries

RELATIVE = 1e-12


def _differences(path: str, expected, actual) -> list[str]:
    if isinstance(expected, dict) and isinstance(actual, dict):
        found = []
        for key in sorted(set(expected) | set(actual)):
            if key not in actual or key not in expected:
                found.append(f"{path}.{key}: {'missing' if key not in actual else 'new'}")
            else:
                found += _differences(f"{path}.{key}", expected[key], actual[key])
        return found
    if isinstance(expected, list) and isinstance(actual, list):
        if len(expected) != len(actual):
            return [f"{path}: {len(actual)} items, expected {len(expected)}"]
        return [d for i, (e, a) in enumerate(zip(expected, actual, strict=True))
                for d in _differences(f"{path}[{i}]", e, a)]
    numbers = (int, float)
    if isinstance(expected, numbers) and isinstance(actual, numbers) and not isinstance(expected, bool):
        if math.isclose(expected, actual, rel_tol=RELATIVE, abs_tol=RELATIVE):
            return []
        return [f"{path}: {actual!r}, expected {expected!r}"]
    return [] if expected == actual else [f"{path}: {actual!r}, expected {expected!r}"]


@pytest.fixture(scope="module")
def summaries():
    return demo_summaries()


def test_every_demo_summary_matches_the_snapshot(summaries):
    expected = json.loads(SNAPSHOT.read_text())
    assert sorted(summaries) == sorted(expected)
    problems = [d for name in expected for d in _differences(name, expected[name], summaries[name])]
    assert not problems, "\n".join(problems[:30])


def test_the_comparison_sees_a_change_in_the_last_digits():
    changed = _differences("s", {"a": 1.0, "w": ["x"]}, {"a": 1.0 + 1e-10, "w": ["x"]})
    assert changed == ["s.a: 1.0000000001, expected 1.0"]
    assert _differences("s", {"a": 0.0}, {"a": 0.0, "b": 1}) == ["s.b: new"]
    assert not _differences("s", {"a": 1.0}, {"a": 1.0 + 1e-15})
