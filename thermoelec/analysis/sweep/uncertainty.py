"""The answers of a sampled sweep, per combination of its other dimensions: percentiles, pass probability,
sensitivity.

For every combination of the dimensions other than ``sample`` (every grid point):

- percentiles of each metric (P5, P50, P95 and any asked) over the samples that ran,
  by :func:`numpy.nanpercentile` (linear interpolation between order statistics);
- the probability of passing each limit check and the verdict overall, ``k / n`` over
  all ``n`` samples (one that failed to solve or was invalid does not pass), with its
  95 % Clopper-Pearson interval (C. J. Clopper, E. S. Pearson, Biometrika 26 (1934) 404):
  ``[B(α/2; k, n - k + 1), B(1 - α/2; k + 1, n - k)]`` of the beta distribution,
  :data:`INTERVAL` names it in the dataset;
- the sensitivity of the key metrics (:data:`SENSITIVITY_METRICS`) to each sampled input:
  Spearman's rank correlation (C. Spearman, Am. J. Psychol. 15 (1904) 72) and its
  ranking by magnitude; with the Saltelli design, variance-based Sobol' indices, first
  order (Saltelli et al., Comput. Phys. Commun. 181 (2010) 259) and total (Jansen 1999),
  by :func:`scipy.stats.sobol_indices` on the design's blocks.

Percentiles and probabilities of a Saltelli design use its ``A`` and ``B`` blocks
(``2N`` points drawn independently of each other), the indices every block.

Owns :data:`SENSITIVITY_METRICS`, :func:`clopper_pearson`, :func:`sobol_from_blocks`,
:func:`uncertainty_dataset`, :func:`uncertainty_table` and :func:`write_uncertainty`.
Imports from analysis/ only; the figures and the report are the output layer's
(:mod:`thermoelec.output.uncertainty`).
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from thermoelec.analysis.metrics import METRICS, PACK_METRICS
from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.analysis.sweep.sampling import SAMPLERS
from thermoelec.analysis.verdict import LIMIT_CHECKS, PASS

__all__ = ["CONFIDENCE", "INTERVAL", "SENSITIVITY_METRICS", "clopper_pearson", "sobol_from_blocks",
           "uncertainty_dataset", "uncertainty_table", "write_uncertainty"]

#: The metrics whose sensitivity to the sampled inputs is reported.
SENSITIVITY_METRICS = ("cell_temperature_max_degC", "temperature_margin_K", "voltage_margin_min_V",
                       "energy_to_load_Wh", "soc_end")
#: Confidence of the pass probability's interval [-].
CONFIDENCE = 0.95
#: The interval's name, as the dataset states it.
INTERVAL = "Clopper-Pearson (exact binomial), 95 %"


def clopper_pearson(k: np.ndarray | int, n: np.ndarray | int, confidence: float = CONFIDENCE
                    ) -> tuple[np.ndarray, np.ndarray]:
    """The Clopper-Pearson interval of a binomial proportion ``k / n``.

    Parameters
    ----------
    k : int or array
        Successes [-].
    n : int or array
        Trials [-], > 0.
    confidence : float
        Confidence level [-], e.g. 0.95.

    Returns
    -------
    low, high : arrays
        The interval's ends [-]; ``low = 0`` at ``k = 0`` and ``high = 1`` at ``k = n``.

    References
    ----------
    C. J. Clopper, E. S. Pearson, "The use of confidence or fiducial limits illustrated in
    the case of the binomial", Biometrika 26 (1934) 404.

    Examples
    --------
    3 failures in 100 trials:

    >>> low, high = clopper_pearson(3, 100)
    >>> round(float(low), 6), round(float(high), 6)
    (0.00623, 0.085176)
    """
    from scipy.stats import beta

    k, n = np.asarray(k, float), np.asarray(n, float)
    alpha = 1.0 - confidence
    with np.errstate(invalid="ignore"):
        low = np.where(k > 0, beta.ppf(alpha / 2, k, n - k + 1), 0.0)
        high = np.where(k < n, beta.ppf(1 - alpha / 2, k + 1, n - k), 1.0)
    return low, high


def sobol_from_blocks(y: np.ndarray, n: int, d: int) -> tuple[np.ndarray, np.ndarray]:
    """First-order and total Sobol' indices from the outputs of a Saltelli design.

    Parameters
    ----------
    y : array, shape (s, n (d + 2))
        ``s`` outputs at the design's points in block order ``A``, ``B``, ``AB_1`` ... ``AB_d``.
    n : int
        Points per block [-] (a power of 2).
    d : int
        Inputs [-].

    Returns
    -------
    first, total : arrays, shape (d, s)
        The indices [-] (:func:`scipy.stats.sobol_indices`: Saltelli 2010 first order,
        Jansen 1999 total); NaN where an output is not finite or does not vary.
    """
    from scipy.stats import sobol_indices

    y = np.atleast_2d(np.asarray(y, float))
    first = np.full((d, y.shape[0]), np.nan)
    total = np.full((d, y.shape[0]), np.nan)
    for j in range(y.shape[0]):
        f = y[j]
        if not np.isfinite(f).all() or np.ptp(f) == 0.0:
            continue
        blocks = f.reshape(d + 2, n)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = sobol_indices(func={"f_A": blocks[0][None, :], "f_B": blocks[1][None, :],
                                         "f_AB": blocks[2:][:, None, :]}, n=n)
        first[:, j] = np.ravel(result.first_order)
        total[:, j] = np.ravel(result.total_order)
    return first, total


def _spearman(x: np.ndarray, y: np.ndarray) -> float:
    from scipy.stats import spearmanr

    ok = np.isfinite(y)
    if ok.sum() < 3 or np.ptp(y[ok]) == 0.0 or np.ptp(x[ok]) == 0.0:
        return np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return float(spearmanr(x[ok], y[ok]).statistic)


def _percentiles(stacked, grid_dims: list[str], percentiles: np.ndarray, independent: np.ndarray) -> dict[str, Any]:
    """Each metric's percentiles over the samples that ran, per grid point."""
    data = {}
    for metric in (*METRICS, *(k for k in PACK_METRICS if k in stacked)):  # a resolved pack's too
        values = stacked[metric].values[..., independent].astype(float)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a grid point where no sample ran: NaN
            q = np.nanpercentile(values, percentiles, axis=-1)
        data[metric] = (["percentile", *grid_dims], q, {"units": stacked[metric].attrs.get("units", "")})
    return data


def _probabilities(stacked, grid_dims: list[str], checks: list[str], independent: np.ndarray) -> dict[str, Any]:
    """The pass probability of each check and overall with its interval, per grid point."""
    verdicts = stacked["verdict"].values[..., independent]
    failed = stacked["failed_checks"].values[..., independent]
    ran = stacked["status"].values[..., independent] == "ok"
    n = int(independent.sum())
    counts = np.empty((len(checks), *verdicts.shape[:-1]), dtype=int)
    counts[0] = (verdicts == PASS).sum(axis=-1)
    for c, check in enumerate(checks[1:], start=1):
        passed = ran & ~np.vectorize(lambda text, name=check: name in str(text).split(","))(failed)
        counts[c] = passed.sum(axis=-1)
    low, high = clopper_pearson(counts, n)
    return {"passes": (["check", *grid_dims], counts), "samples": ((), n),
            "pass_probability": (["check", *grid_dims], counts / n,
                                 {"description": "share of the samples that pass (a failed or invalid run does not)"}),
            "pass_probability_low": (["check", *grid_dims], low, {"interval": INTERVAL}),
            "pass_probability_high": (["check", *grid_dims], high, {"interval": INTERVAL})}


def _sensitivities(stacked, grid_dims: list[str], sampling, independent: np.ndarray) -> dict[str, Any]:
    """Spearman correlations and their ranking, and with the Saltelli design the Sobol' indices."""
    d = len(sampling.distributions)
    x = sampling.values()
    grid_shape = tuple(stacked.sizes[g] for g in grid_dims)
    rho = np.full((d, len(SENSITIVITY_METRICS), *grid_shape), np.nan)
    for m, metric in enumerate(SENSITIVITY_METRICS):
        y = stacked[metric].values.astype(float)
        for index in np.ndindex(*grid_shape):
            for j in range(d):
                rho[(j, m, *index)] = _spearman(x[independent, j], y[index][independent])
    rank = np.argsort(np.argsort(-np.nan_to_num(np.abs(rho), nan=-1.0), axis=0), axis=0) + 1
    dims = ["input", "metric", *grid_dims]
    data = {"spearman": (dims, rho, {"description": "Spearman rank correlation of the metric with the input"}),
            "sensitivity_rank": (dims, rank, {"description": "1: the input with the largest |Spearman| there"})}
    if sampling.method == "saltelli":
        first, total = np.full_like(rho, np.nan), np.full_like(rho, np.nan)
        for index in np.ndindex(*grid_shape):
            y = np.array([stacked[metric].values[index].astype(float) for metric in SENSITIVITY_METRICS])
            first[(slice(None), slice(None), *index)], total[(slice(None), slice(None), *index)] = \
                sobol_from_blocks(y, sampling.samples, d)
        data["sobol_first"] = (dims, first, {"method": "Saltelli 2010 (scipy)"})
        data["sobol_total"] = (dims, total, {"method": "Jansen 1999 (scipy)"})
    return data


def uncertainty_dataset(plan: SweepPlan, ds):
    """The statistics of a sampled sweep's dataset (see the module's description) as an xarray Dataset.

    Parameters
    ----------
    plan : SweepPlan
        The sweep's plan, with its ``sample`` dimension.
    ds : xarray.Dataset
        The sweep's dataset (:func:`thermoelec.analysis.sweep.sweep_dataset`).

    Returns
    -------
    xarray.Dataset
        Dimensions: the grid's (every one but ``sample``), ``percentile``, ``check``
        (``overall`` and each limit check), ``input`` (the sampled keys), ``metric``
        (:data:`SENSITIVITY_METRICS`). Variables: each metric's percentiles, ``pass_probability``
        with ``pass_probability_low`` / ``_high`` and the counts ``passes`` / ``samples``,
        ``spearman`` and ``sensitivity_rank``, and with the Saltelli design ``sobol_first`` and
        ``sobol_total``; attributes: the design, the seed, the interval.
    """
    import xarray as xr

    sampling = plan.sampling
    if sampling is None:
        raise ValueError("the sweep has no samples")
    grid_dims = [name for name in plan.dim_names if name != "sample"]
    independent = np.isin(sampling.blocks(), ["A", "B"]) if sampling.method == "saltelli" \
        else np.ones(sampling.size, bool)
    stacked = ds.transpose(*grid_dims, "sample")
    checks = ["overall", *(c.name for c in LIMIT_CHECKS)]
    data: dict[str, Any] = {}
    data.update(_percentiles(stacked, grid_dims, np.array(sampling.percentiles), independent))
    data.update(_probabilities(stacked, grid_dims, checks, independent))
    data.update(_sensitivities(stacked, grid_dims, sampling, independent))
    inputs = [dist.path for dist in sampling.distributions]
    percentiles = np.array(sampling.percentiles)
    coords: dict[str, Any] = {"percentile": ("percentile", percentiles, {"units": "%"}),
                              "check": ("check", np.array(checks, dtype=object)),
                              "input": ("input", np.array(inputs, dtype=object)),
                              "metric": ("metric", np.array(SENSITIVITY_METRICS, dtype=object))}
    for name in ds.coords:
        dims = ds[name].dims
        if dims and all(dim in grid_dims for dim in dims):
            coords[name] = (dims, ds[name].values, dict(ds[name].attrs))
    out = xr.Dataset(data, coords=coords)
    out.attrs.update(sampling=sampling.method, sampling_description=SAMPLERS[sampling.method],
                     samples_per_point=sampling.size, design_points=sampling.samples, seed=sampling.seed,
                     interval=INTERVAL, distributions=ds.attrs.get("distributions", ""),
                     scenario_file=ds.attrs.get("scenario_file", ""),
                     scenario_sha256=ds.attrs.get("scenario_sha256", ""),
                     thermoelec_version=ds.attrs.get("thermoelec_version", ""),
                     grid_dimensions=",".join(grid_dims))
    return out


def uncertainty_table(u):
    """The statistics as a tidy table (pandas): one row per grid point and quantity, with columns for the grid
    keys, ``quantity`` (``percentile``, ``pass_probability``, ``spearman``, ``sobol_first``, ``sobol_total``),
    ``name`` (the metric or the check), ``input``, ``percentile``, ``value``, ``low``, ``high``, ``unit``."""
    import pandas as pd

    grid_dims = [g for g in u.attrs.get("grid_dimensions", "").split(",") if g]
    points = list(np.ndindex(*[u.sizes[g] for g in grid_dims])) or [()]
    rows = []
    for index in points:
        sel = dict(zip(grid_dims, index, strict=True))
        at = u.isel(sel) if sel else u
        where = {}
        for name in u.coords:
            dims = u[name].dims
            if dims and all(dim in grid_dims for dim in dims):
                unit = u[name].attrs.get("units", "")
                where[f"{name} [{unit}]" if unit else name] = at[name].values.item()
        for metric in (*METRICS, *(k for k in PACK_METRICS if k in u)):
            for p, value in zip(u["percentile"].values, at[metric].values, strict=True):
                rows.append({**where, "quantity": "percentile", "name": metric, "input": "", "percentile": p,
                             "value": value, "low": np.nan, "high": np.nan, "unit": u[metric].attrs.get("units")})
        for c, check in enumerate(u["check"].values):
            rows.append({**where, "quantity": "pass_probability", "name": check, "input": "", "percentile": np.nan,
                         "value": float(at["pass_probability"].values[c]),
                         "low": float(at["pass_probability_low"].values[c]),
                         "high": float(at["pass_probability_high"].values[c]), "unit": "1"})
        for quantity in ("spearman", "sobol_first", "sobol_total"):
            if quantity not in u:
                continue
            for j, path in enumerate(u["input"].values):
                for m, metric in enumerate(u["metric"].values):
                    rows.append({**where, "quantity": quantity, "name": metric, "input": path, "percentile": np.nan,
                                 "value": float(at[quantity].values[j, m]), "low": np.nan, "high": np.nan,
                                 "unit": "1"})
    return pd.DataFrame(rows)


def write_uncertainty(u, out: Path) -> list[Path]:
    """Write ``uncertainty.nc`` and the tidy ``uncertainty.csv`` (:func:`uncertainty_table`), each atomically."""
    out.mkdir(parents=True, exist_ok=True)
    path, table = out / "uncertainty.nc", out / "uncertainty.csv"
    tmp, tmp_table = out / ".uncertainty.nc.tmp", out / ".uncertainty.csv.tmp"
    u.to_netcdf(tmp)
    uncertainty_table(u).to_csv(tmp_table, index=False, float_format="%.9g")
    os.replace(tmp, path)
    os.replace(tmp_table, table)
    return [path, table]
