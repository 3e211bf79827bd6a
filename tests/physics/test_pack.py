"""The resolved pack's laws: parallel groups by Kirchhoff's laws, the spread's distribution, layouts, the coolant path.

Sources: the project's check values for packs (VALIDATION.md §7: the 2:1 split of
equal sources behind 10 and 20 mΩ, the 4.00 V / 3.99 V pair, the coolant's
2.7778 K rise), derived from Kirchhoff's laws and an energy balance; the truncated
normal against ``scipy.stats.truncnorm``'s own moments and a Kolmogorov-Smirnov
test (``scipy.stats.kstest``); a group against the nodal equation solved by
``numpy.linalg.solve``.
"""

import numpy as np
import pytest
from scipy import stats

from thermoelec.physics import pack
from thermoelec.physics.thermal import coolant_effectiveness


def test_equal_sources_behind_10_and_20_mohm_split_30_amperes_two_to_one():
    v, currents = pack.parallel_currents([3.7, 3.7], [0.010, 0.020], 30.0)
    np.testing.assert_allclose(currents, [20.0, 10.0], rtol=1e-12)
    assert v == pytest.approx(3.7 - 20.0 * 0.010, rel=1e-12)


def test_unequal_sources_check_values():
    # VALIDATION.md §7: E = 4.00 V and 3.99 V, both 20 mOhm, I = 10 A -> V = 3.895 V, 5.25 A and 4.75 A
    v, currents = pack.parallel_currents([4.00, 3.99], [0.02, 0.02], 10.0)
    assert v == pytest.approx(3.895, rel=1e-12)
    np.testing.assert_allclose(currents, [5.25, 4.75], rtol=1e-12)


def test_a_group_is_its_thevenin_source_and_satisfies_the_nodal_equation():
    rng = np.random.default_rng(3)
    e = 3.6 + 0.1 * rng.random(5)
    r = 0.01 + 0.02 * rng.random(5)
    current = 17.0
    v, i = pack.parallel_currents(e, r, current)
    # Kirchhoff's current law at the group's node, solved as a linear system by numpy:
    # sum (E_i - V) / R_i = I  ->  (sum 1/R_i) V = sum E_i / R_i - I
    node = np.linalg.solve([[np.sum(1 / r)]], [np.sum(e / r) - current])[0]
    assert v == pytest.approx(node, rel=1e-13)
    assert np.sum(i) == pytest.approx(current, rel=1e-13)
    e_g, r_g = pack.group_thevenin(float(np.sum(e / r)), float(np.sum(1 / r)))
    assert e_g - current * r_g == pytest.approx(v, rel=1e-13)
    emf, resistance = pack.series_thevenin([e_g, e_g], [r_g, r_g], 0.003)
    assert (emf, resistance) == pytest.approx((2 * e_g, 2 * r_g + 0.003), rel=1e-15)


def test_spread_factors_are_a_truncated_normal_reproducible_by_seed():
    sigma, k = 0.03, 2.0
    f = pack.spread_factors(20_000, sigma, np.random.default_rng(11), truncation=k)
    again = pack.spread_factors(20_000, sigma, np.random.default_rng(11), truncation=k)
    np.testing.assert_array_equal(f, again)
    assert f.min() >= 1 - k * sigma and f.max() <= 1 + k * sigma
    reference = stats.truncnorm(-k, k, loc=1.0, scale=sigma)
    assert f.std() == pytest.approx(reference.std(), rel=0.02)  # 20 000 draws: the std to ~0.5 %
    assert stats.kstest(f, reference.cdf).pvalue > 1e-3


def test_a_zero_spread_draws_nothing():
    rng, untouched = np.random.default_rng(5), np.random.default_rng(5)
    np.testing.assert_array_equal(pack.spread_factors(7, 0.0, rng), np.ones(7))
    assert rng.random() == untouched.random()


@pytest.mark.parametrize(("sigma", "k"), [(-0.01, 3.0), (0.4, 3.0), (0.01, 0.0)])
def test_a_spread_that_could_reach_zero_or_is_negative_is_refused(sigma, k):
    with pytest.raises(ValueError):
        pack.spread_factors(3, sigma, np.random.default_rng(0), truncation=k)


@pytest.mark.parametrize(("rows", "columns", "fill"), [(4, 14, "columns"), (14, 4, "rows"), (1, 5, "rows")])
def test_grid_layout_neighbours_and_wall(rows, columns, fill):
    positions = pack.grid_positions(rows, columns, fill)
    assert sorted(map(tuple, positions)) == [(r, c) for r in range(rows) for c in range(columns)]
    pairs = pack.grid_neighbours(positions)
    # a grid has rows (columns - 1) horizontal and columns (rows - 1) vertical edges
    assert len(pairs) == rows * (columns - 1) + columns * (rows - 1)
    distance = np.abs(positions[pairs[:, 0]] - positions[pairs[:, 1]]).sum(axis=1)
    assert np.all(distance == 1)
    wall = pack.grid_wall(positions)
    inner = max(rows - 2, 0) * max(columns - 2, 0)
    assert wall.sum() == rows * columns - inner


@pytest.mark.parametrize("along", ["rows", "columns"])
def test_a_serpentine_passes_every_cell_once_each_next_to_the_last(along):
    positions = pack.grid_positions(4, 14, "columns")
    order = pack.serpentine_order(positions, along)
    assert sorted(order.tolist()) == list(range(56))
    steps = np.abs(np.diff(positions[order], axis=0)).sum(axis=1)
    assert np.all(steps == 1)


def test_coolant_along_a_path_warms_by_the_heat_over_its_capacity_rate():
    # VALIDATION.md §7: 200 W into 0.02 kg/s of a coolant with 3600 J/(kg K) -> 2.7778 K
    mcp = 0.02 * 3600.0
    ua = np.array([0.5, 1.0, 2.0, 4.0, 8.0])
    heats = np.array([10.0, 30.0, 60.0, 40.0, 60.0])  # 200 W in all
    coolant = inlet = 290.0
    for k in range(len(ua)):
        eps = coolant_effectiveness(ua[k], mcp)
        surface = coolant + heats[k] / (eps * mcp)  # the cell temperature that gives this heat
        q = pack.coolant_segment_heat(eps, mcp, surface, coolant)
        assert q == pytest.approx(heats[k], rel=1e-12)
        coolant += q / mcp
    assert coolant - inlet == pytest.approx(200.0 / mcp, rel=1e-12)
    assert coolant - inlet == pytest.approx(2.7778, abs=5e-5)
