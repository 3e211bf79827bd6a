"""The summaries of every demo mission and case, for the snapshot test (``tests/test_demo_snapshot.py``).

Run as a script to write the snapshot again after a deliberate change of the
physics or of the summary's contents::

    .venv/bin/python tests/demo_summaries.py

and say in the commit why the numbers moved.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path
from typing import Any

import thermoelec

SCENARIOS = Path(__file__).resolve().parents[1] / "scenarios"
SNAPSHOT = Path(__file__).resolve().parent / "data" / "demo_summaries.json"
DEMOS = ("drone_delivery", "ebike_route", "robot_cooling", "scooter_commute", "cargo_robot_pack",
         "delivery_robot_options", "drone_cold_bms")


def _plain(value: Any) -> Any:
    """JSON-safe: non-finite floats as text."""
    if isinstance(value, float) and not math.isfinite(value):
        return repr(value)
    if isinstance(value, dict):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_plain(v) for v in value]
    return value


def demo_summaries() -> dict[str, dict]:
    """``{"<scenario>", "<scenario> / <case>" or "<scenario> / <group>: <option>": summary}`` for each demo
    file, each of its cases and each of its design options."""
    out: dict[str, dict] = {}
    for name in DEMOS:
        scenario = thermoelec.load_scenario(SCENARIOS / f"{name}.toml")
        out[name] = _plain(thermoelec.simulate(scenario).summary)
        for case in scenario.spec.case:
            variant = scenario.with_overrides(dict(case.model_extra or {}))
            out[f"{name} / {case.name}"] = _plain(thermoelec.simulate(variant).summary)
        for group, options in scenario.spec.option.items():
            for option in options:
                variant = scenario.with_overrides(dict(option.model_extra or {}))
                out[f"{name} / {group}: {option.name}"] = _plain(thermoelec.simulate(variant).summary)
    return out


if __name__ == "__main__":
    SNAPSHOT.parent.mkdir(parents=True, exist_ok=True)
    SNAPSHOT.write_text(json.dumps(demo_summaries(), indent=1, sort_keys=True) + "\n")
    print(f"wrote {SNAPSHOT}", file=sys.stderr)
