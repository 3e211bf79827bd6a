"""A resolved pack's bad input: exit status 2, one message naming the file and the key, no traceback, no output."""

from __future__ import annotations

import pytest

from .test_bad_input import BASE, assert_one_clear_message, run_cli

#: A valid resolved pack of 3 x 2 cells put before ``[thermal]`` (the cases replace a piece of it).
PACK = """[pack]
series = 3
parallel = 2
model = "resolved"
[pack.layout]
rows = 3
columns = 2
[pack.spread]
capacity = 0.01
seed = 4
[pack.thermal]
neighbour_conductance = "0.2 W/K"
[[pack.cell]]
cell = 5
capacity_factor = 0.95
"""
COOLANT = """[thermal.coolant]
inlet_temperature = "20 degC"
flow_rate = "0.01 kg/s"
plate_conductance = "3 W/K"
"""

# (id, text of PACK to replace, replacement, key the message must name)
CASES = [
    ("layout-not-series-x-parallel", "rows = 3\ncolumns = 2", "rows = 2\ncolumns = 2", "pack.layout.rows"),
    ("layout-half-a-grid", "rows = 3\ncolumns = 2", "rows = 3", "pack.layout.columns"),
    ("layout-grid-and-list", "rows = 3\ncolumns = 2", "rows = 3\ncolumns = 2\nneighbours = [[1, 2]]",
     "pack.layout.neighbours"),
    ("layout-neighbour-out-of-range", "rows = 3\ncolumns = 2", "neighbours = [[1, 2], [2, 7]]",
     "pack.layout.neighbours[2]"),
    ("layout-neighbour-itself", "rows = 3\ncolumns = 2", "neighbours = [[1, 2], [3, 3]]",
     "pack.layout.neighbours[2]"),
    ("cell-out-of-range", "cell = 5", "cell = 7", "pack.cell[1].cell"),
    ("cell-zero", "cell = 5", "cell = 0", "pack.cell[1].cell"),
    ("cell-twice", "cell = 5\ncapacity_factor = 0.95", "cell = 5\ncapacity_factor = 0.95\n[[pack.cell]]\ncell = 5",
     "pack.cell[2].cell"),
    ("cell-factor-negative", "capacity_factor = 0.95", "capacity_factor = -0.95", "pack.cell[1].capacity_factor"),
    ("cell-unknown-key", "capacity_factor = 0.95", "capacity_fraction = 0.95", "pack.cell[1].capacity_fraction"),
    ("spread-negative", "capacity = 0.01", "capacity = -0.01", "pack.spread.capacity"),
    ("spread-reaching-zero", "capacity = 0.01", "r0 = 0.4", "pack.spread.r0"),
    ("spread-seed-negative", "seed = 4", "seed = -4", "pack.spread.seed"),
    ("coolant-order-names-a-cell-twice", 'neighbour_conductance = "0.2 W/K"',
     "coolant_order = [1, 2, 4, 2]", "pack.thermal.coolant_order[4]"),
    ("coolant-order-out-of-range", 'neighbour_conductance = "0.2 W/K"', "coolant_order = [1, 2, 9]",
     "pack.thermal.coolant_order[3]"),
    ("coolant-order-without-coolant", 'neighbour_conductance = "0.2 W/K"', 'coolant_order = "rows"',
     "pack.thermal.coolant_order"),
    ("coolant-order-unknown-word", 'neighbour_conductance = "0.2 W/K"', 'coolant_order = "diagonal"',
     "pack.thermal.coolant_order"),
    ("conductance-negative", 'neighbour_conductance = "0.2 W/K"', 'neighbour_conductance = "-0.2 W/K"',
     "pack.thermal.neighbour_conductance"),
    ("model-unknown", 'model = "resolved"', 'model = "every cell"', "pack.model"),
    ("resolved-keys-on-a-lumped-pack", 'model = "resolved"\n', "", "pack.layout"),
]


def _text(pack: str, coolant: bool = False) -> str:
    text = BASE.replace("[thermal]", pack + "[thermal]", 1)
    if coolant:
        text = text.replace("[[profile.segment]]", COOLANT + "[[profile.segment]]", 1)
    return text


def test_the_resolved_base_is_valid(tmp_path, capsys):
    code, _ = run_cli(tmp_path, _text(PACK))
    assert code == 0, capsys.readouterr().err
    assert (tmp_path / "out" / "summary.json").exists()


@pytest.mark.parametrize(("old", "new", "key"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_bad_resolved_pack(tmp_path, capsys, old, new, key):
    assert old in PACK
    code, path = run_cli(tmp_path, _text(PACK.replace(old, new, 1)))
    assert_one_clear_message(capsys, code, path, key)
    assert not (tmp_path / "out" / "summary.json").exists()


def test_a_coolant_segment_for_a_cell_off_the_path(tmp_path, capsys):
    pack = PACK.replace('neighbour_conductance = "0.2 W/K"', "coolant_order = [1, 3, 5]").replace(
        "capacity_factor = 0.95", 'plate_conductance = "0.5 W/K"').replace("cell = 5", "cell = 4")
    code, path = run_cli(tmp_path, _text(pack, coolant=True))
    assert_one_clear_message(capsys, code, path, "pack.cell[1].plate_conductance")


def test_a_coolant_path_takes_a_massless_coolant(tmp_path, capsys):
    pack = PACK.replace('neighbour_conductance = "0.2 W/K"', 'coolant_order = "columns"')
    text = _text(pack, coolant=True).replace('plate_conductance = "3 W/K"\n',
                                             'plate_conductance = "3 W/K"\nheat_capacity = "40 J/K"\n')
    code, path = run_cli(tmp_path, text)
    assert_one_clear_message(capsys, code, path, "pack.thermal.coolant_order")
