"""Uncertainty: sampled sweeps against analytic answers and published check values.

Sources: the steady temperature rise of a sink-free lumped cell with no RC pair at constant
current, dT = I^2 R0 / G (Incropera et al., lumped capacitance at steady state), with R0 normal:
dT ~ Normal(I^2 mu / G, I^2 sigma / G), P5 3.67103 K and P95 4.32897 K (VALIDATION.md §7, z =
1.644854); the Clopper-Pearson interval (Clopper & Pearson, Biometrika 26 (1934) 404; values from
scipy.stats.beta in VALIDATION.md §7) and its coverage, at least the nominal 95 % (the interval
is exact, hence conservative); Sobol' indices of a linear function of independent inputs,
S_i = a_i^2 Var X_i / sum_j a_j^2 Var X_j (Saltelli et al., Global Sensitivity Analysis, 2008, ch. 4).
"""

from __future__ import annotations

import copy
import math
import shutil

import numpy as np
import pytest
import xarray as xr

import thermoelec
from thermoelec import cli
from thermoelec.analysis import sweep
from thermoelec.analysis.sweep.uncertainty import clopper_pearson, sobol_from_blocks, uncertainty_dataset

from ..helpers import cell_section, scenario

CURRENT, G, MEAN, STD = 10.0, 0.5, 0.020, 0.001
Z95 = 1.644854  # the standard normal's 95th percentile (VALIDATION.md §7)


def rise_scenario(table: dict, **changes) -> dict:
    """Sink-free lumped cell, no RC pair, flat OCV: the rise settles at I^2 R0 / G (tau = C / G = 60 s, 30 tau)."""
    data = scenario(cell=cell_section(mass="0.0333 kg"),
                    thermal={"ambient_temperature": "25 degC", "sink_heat_capacity": "100 J/K", "cell_to_sink": "0 W/K",
                             "sink_to_ambient": "0 W/K", "cell_to_ambient": f"{G} W/K"},
                    segments=[{"mode": "current", "value": f"{CURRENT} A", "duration": "30 min"}],
                    solver={"rtol": 1e-8, "output_interval": "60 s"}, sweep=table, **changes)
    return data


NORMAL_R0 = {"cell.r0.value": {"distribution": "normal", "mean": "20 mohm", "std": "1 mohm"}}


def run(data: dict, tmp_path, name: str = "o", **kwargs):
    loaded = thermoelec.scenario.scenario_from_dict(data)
    plan = sweep.plan_sweep(loaded, **kwargs)
    rows = sweep.run_sweep(loaded, plan, tmp_path / name, workers=1, progress=False)
    ds = sweep.sweep_dataset(loaded, plan, rows)
    return plan, ds, uncertainty_dataset(plan, ds)


def test_sampled_percentiles_of_the_rise_match_the_analytic_normal(tmp_path):
    n = 2000
    _, ds, u = run(rise_scenario({**NORMAL_R0, "samples": n}), tmp_path)
    scale = CURRENT ** 2 / G
    mean, sd = scale * MEAN, scale * STD
    assert (mean, mean - Z95 * sd, mean + Z95 * sd) == pytest.approx((4.0, 3.67103, 4.32897), abs=5e-6)
    # the standard error of a sample quantile, sqrt(p (1 - p) / N) / f(x_p) (asymptotic; e.g. H. A. David,
    # Order Statistics, 1981, §9.2): 0.0095 K at P5 and P95 for N = 2000; allowed 3 of them (a Latin
    # hypercube does better; the engine's own error is below 5e-5 K)
    f = math.exp(-Z95 ** 2 / 2) / (sd * math.sqrt(2 * math.pi))
    bound = 3 * math.sqrt(0.05 * 0.95 / n) / f
    rise = u["cell_temperature_rise_K"]
    assert float(rise.sel(percentile=5.0)) == pytest.approx(3.67103, abs=bound)
    assert float(rise.sel(percentile=95.0)) == pytest.approx(4.32897, abs=bound)
    assert float(rise.sel(percentile=50.0)) == pytest.approx(4.0, abs=bound)
    # each sample at the analytic steady rise of its own R0, to the integrator's tolerance (rtol 1e-8 of a
    # 300 K state per step: 3e-6 K, 2e-5 K accumulated over the 30 time constants)
    r0 = ds["cell.r0.value"].values * 1e-3
    np.testing.assert_allclose(ds["cell_temperature_rise_K"].values, CURRENT ** 2 * r0 / G, atol=5e-5)
    assert ds.attrs["sampling"] == "latin_hypercube" and u.attrs["sampling"] == "latin_hypercube"


def test_the_latin_hypercube_beats_plain_monte_carlo_on_the_mean():
    loaded = thermoelec.scenario.scenario_from_dict(rise_scenario({**NORMAL_R0, "samples": 200}))
    errors = {}
    for method in ("latin_hypercube", "random"):
        means = [CURRENT ** 2 * np.mean(sweep.plan_sweep(loaded, seed=seed, method=method).sampling.values()) * 1e-3 / G
                 for seed in range(30)]  # the same seeds for both designs
        errors[method] = float(np.sqrt(np.mean((np.array(means) - 4.0) ** 2)))
    # plain Monte Carlo: sd / sqrt(N) = 0.2 / sqrt(200) = 0.014 K; stratifying the one input removes most of it
    assert errors["random"] == pytest.approx(0.2 / math.sqrt(200), rel=0.35)
    assert errors["latin_hypercube"] < 0.2 * errors["random"]


def test_clopper_pearson_values_and_coverage():
    low, high = clopper_pearson(0, 100)
    assert (float(low), float(high)) == pytest.approx((0.0, 0.036217), abs=1e-6)
    low, high = clopper_pearson(3, 100)
    assert (float(low), float(high)) == pytest.approx((0.006230, 0.085176), abs=1e-6)
    rng = np.random.default_rng(2024)
    p, n = 0.9, 40
    k = rng.binomial(n, p, size=200)
    low, high = clopper_pearson(k, n)
    assert np.mean((low <= p) & (p <= high)) >= 0.93


def test_a_dominant_input_ranks_first(tmp_path):
    # at steady state the rise does not depend on the heat capacity at all, and R0 varies by 10 %
    table = {"cell.r0.value": {"distribution": "normal", "mean": "20 mohm", "std": "2 mohm"},
             "cell.specific_heat": {"distribution": "uniform", "low": "850 J/kg/K", "high": "950 J/kg/K"},
             "samples": 64}
    _, _, u = run(rise_scenario(table), tmp_path)
    rank = u["sensitivity_rank"].sel(metric="cell_temperature_max_degC")
    assert list(u["input"].values[np.argsort(rank.values)]) == ["cell.r0.value", "cell.specific_heat"]
    assert float(u["spearman"].sel(metric="cell_temperature_max_degC", input="cell.r0.value")) > 0.999


def test_sobol_indices_of_a_linear_function():
    from thermoelec.analysis.sweep.sampling import design

    n, d = 1024, 3
    u = design("saltelli", d, n, seed=7)
    a = np.array([1.0, 2.0, 3.0])
    y = u @ a  # independent U(0, 1) inputs, Var X_i = 1/12: S_i = a_i^2 / sum a_j^2, first = total
    first, total = sobol_from_blocks(y[None, :], n, d)
    expected = a ** 2 / np.sum(a ** 2)
    np.testing.assert_allclose(first[:, 0], expected, atol=0.05)
    np.testing.assert_allclose(total[:, 0], expected, atol=0.05)


def test_saltelli_through_the_engine_apportions_a_linear_rise(tmp_path):
    # peak = ambient + I^2 R0 / G, linear in both: Var from the ambient U(22.5, 27.5): 25/12; from R0:
    # (I^2/G)^2 (2.5 mohm)^2 = 0.25 -> S_ambient = 2.083 / 2.333 = 0.893, S_R0 = 0.107
    table = {"cell.r0.value": {"distribution": "normal", "mean": "20 mohm", "std": "2.5 mohm"},
             "thermal.ambient_temperature": {"distribution": "uniform", "low": "22.5 degC", "high": "27.5 degC"},
             "samples": 256, "sampling": "saltelli"}
    _, _, u = run(rise_scenario(table), tmp_path)
    s1 = u["sobol_first"].sel(metric="cell_temperature_max_degC")
    assert float(s1.sel(input="thermal.ambient_temperature")) == pytest.approx(25 / 12 / (25 / 12 + 0.25), abs=0.05)
    assert float(s1.sel(input="cell.r0.value")) == pytest.approx(0.25 / (25 / 12 + 0.25), abs=0.05)


def test_the_same_seed_gives_the_same_dataset_after_a_resume_and_on_dask(tmp_path):
    distributed = pytest.importorskip("distributed")
    data = rise_scenario({**NORMAL_R0, "thermal.ambient_temperature": ["20 degC", "30 degC"], "samples": 16})
    path = tmp_path / "s.toml"
    from .test_sweep import _toml

    path.write_text(_toml(data))
    args = ["sweep", str(path), "--quiet", "--no-figures", "--workers", "1", "--chunk-size", "4", "--seed", "3"]
    assert cli.main([*args, "--out", str(tmp_path / "a")]) == 0
    assert cli.main([*args, "--out", str(tmp_path / "b")]) == 0
    for chunk in sorted((tmp_path / "b" / "chunks").glob("chunk_*.json"))[::2]:
        chunk.unlink()  # as if killed half-way
    assert cli.main([*args, "--out", str(tmp_path / "b"), "--resume"]) == 0
    a, b = xr.open_dataset(tmp_path / "a" / "sweep.nc"), xr.open_dataset(tmp_path / "b" / "sweep.nc")
    xr.testing.assert_identical(a.drop_attrs(), b.drop_attrs())
    xr.testing.assert_identical(xr.open_dataset(tmp_path / "a" / "uncertainty.nc"),
                                xr.open_dataset(tmp_path / "b" / "uncertainty.nc"))
    loaded = thermoelec.load_scenario(path)
    plan = sweep.plan_sweep(loaded, seed=3)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as lc, \
            distributed.Client(lc) as client:
        rows = sweep.run_sweep(loaded, plan, tmp_path / "dask", chunk_size=4, progress=False, cluster=client)
    on_dask = sweep.sweep_dataset(loaded, plan, rows)
    for name in a.data_vars:
        np.testing.assert_array_equal(on_dask[name].values, a[name].values)
    other = sweep.plan_sweep(loaded, seed=4)
    assert not np.array_equal(other.sampling.values(), plan.sampling.values())
    shutil.rmtree(tmp_path / "dask")


def test_find_the_least_conductance_whose_p95_rise_meets_a_bound(tmp_path):
    loaded = thermoelec.scenario.scenario_from_dict(rise_scenario({**NORMAL_R0, "samples": 100}))
    plan = sweep.plan_sweep(loaded)
    criterion = sweep.parse_criterion("P95 of cell_temperature_rise_K <= 4.0")
    found = sweep.design_search(loaded, plan, "thermal.cell_to_ambient", 0.3, 1.0, "W/K", criterion,
                                tolerance=1e-4, workers=1)
    # the rise is linear in R0 for each G: its P95 is I^2 P95(R0 samples) / G, met for G >= I^2 P95(R0) / 4
    r0_95 = np.percentile(plan.sampling.values()[:, 0], 95) * 1e-3
    assert float(found["least_thermal.cell_to_ambient"].values[0]) == pytest.approx(CURRENT ** 2 * r0_95 / 4.0,
                                                                                     abs=1e-4 * 0.7 + 1e-6)
    probability = sweep.parse_criterion("pass probability >= 0.99")
    assert probability.sampled and probability.metric == "pass_probability"


@pytest.mark.parametrize("table, extra, key", [
    ({"cell.r0.value": {"distribution": "normal", "mean": "20 mohm", "std": "-1 mohm"}, "samples": 10}, [], "std"),
    ({"cell.r0.value": {"distribution": "uniform", "low": "30 mohm", "high": "20 mohm"}, "samples": 10}, [], "low"),
    ({"cell.r0.value": {"distribution": "normal", "mean": "20 mohm", "std": "1 mohm", "low": "40 mohm"},
      "samples": 10}, [], "excludes everything"),
    ({"solver.backend": {"distribution": "uniform", "low": 1, "high": 2}, "samples": 10}, [], "takes text"),
    (NORMAL_R0, ["--samples", "0"], "samples"),
])
def test_bad_distributions_exit_2_with_one_message(tmp_path, capsys, table, extra, key):
    from .test_sweep import _toml

    path = tmp_path / "s.toml"
    path.write_text(_toml(rise_scenario(copy.deepcopy(table))))
    code = cli.main(["sweep", str(path), "--out", str(tmp_path / "o"), "--quiet", "--workers", "1", *extra])
    err = capsys.readouterr().err
    assert code == 2 and key in err and "Traceback" not in err and err.count("\n") == 1


def test_the_spread_seed_of_a_resolved_pack_is_one_more_sampled_input(tmp_path):
    # the demo's resolved 14s4p pack: each sampled seed draws another cell-to-cell spread, another build of
    # the same design; the hottest cell's temperature differs from build to build
    from ..helpers import SCENARIOS

    loaded = thermoelec.load_scenario(SCENARIOS / "cargo_robot_pack.toml")
    plan = sweep.plan_sweep(loaded, ["pack.spread.seed=integers(1, 1000)"], samples=6)
    seeds = [plan.overrides(i)["pack.spread.seed"] for i in range(plan.size)]
    assert all(isinstance(s, int) and 1 <= s <= 1000 for s in seeds) and len(set(seeds)) == 6
    rows = sweep.run_sweep(loaded, plan, tmp_path / "o", workers=1, progress=False)
    ds = sweep.sweep_dataset(loaded, plan, rows)
    u = uncertainty_dataset(plan, ds)
    peak = u["cell_temperature_max_degC"]
    assert float(peak.sel(percentile=95.0)) > float(peak.sel(percentile=5.0))
    assert "cell_temperature_spread_max_K" in u
