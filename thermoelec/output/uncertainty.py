"""The answers of a sampled sweep drawn: empirical CDFs with the limit, the tornado chart, the HTML report.

Owns :func:`ecdf_data` and :func:`ecdf_figure` (the empirical CDF of the key metrics over the
samples of each grid point, at most :data:`MAX_LINES` points chosen evenly, the limit drawn),
:func:`tornado_data` and :func:`tornado_figure` (the sampled inputs ranked by their Spearman
correlation with a metric, and their Sobol' indices with the Saltelli design, at the grid point
least likely to pass), :func:`uncertainty_report` and :func:`write_uncertainty_outputs`.
Imports from analysis/ and the output layer's own pieces only.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure

from thermoelec.output import html as H
from thermoelec.output.figures import save
from thermoelec.output.sweep_figures import axis_label, facet_indices

__all__ = ["ECDF_METRICS", "MAX_LINES", "ecdf_data", "ecdf_figure", "hardest_point", "tornado_data",
           "tornado_figure", "uncertainty_report", "write_uncertainty_outputs"]

#: The metrics drawn as empirical CDFs, with the limit each is checked against (a key of the limits given).
ECDF_METRICS = (("cell_temperature_max_degC", "cell_temperature_max_degC"), ("cell_voltage_min_V",
                                                                           "cell_voltage_min_V"))
#: The most grid points an empirical CDF draws (chosen evenly).
MAX_LINES = 8


@dataclass(frozen=True)
class EcdfLine:
    """One grid point's empirical CDF: sorted values and their cumulative shares, and its label."""

    values: np.ndarray
    shares: np.ndarray
    label: str


def _grid_dims(u) -> list[str]:
    return [g for g in u.attrs.get("grid_dimensions", "").split(",") if g]


def _point_label(ds, index: dict[str, int]) -> str:
    parts = []
    for dim, i in index.items():
        coord = ds[dim].values[i] if dim in ds.coords else i
        unit = ds[dim].attrs.get("units", "") if dim in ds.coords else ""
        parts.append(f"{axis_label(dim)} = {coord:g} {unit}".rstrip() if isinstance(coord, (float, np.floating))
                     else f"{axis_label(dim)} = {coord}")
    return ", ".join(parts) or "all samples"


def ecdf_data(ds, u, metric: str) -> list[EcdfLine]:
    """The empirical CDF of ``metric`` over the samples that ran, per grid point (at most :data:`MAX_LINES`)."""
    dims = _grid_dims(u)
    points = list(np.ndindex(*[ds.sizes[d] for d in dims])) or [()]
    lines = []
    for k in facet_indices(len(points), MAX_LINES):
        index = dict(zip(dims, points[k], strict=True))
        values = ds[metric].isel(index).values.astype(float) if index else ds[metric].values.astype(float)
        values = np.sort(values[np.isfinite(values)])
        shares = np.arange(1, values.size + 1) / max(values.size, 1)
        lines.append(EcdfLine(values, shares, _point_label(ds, index)))
    return lines


def ecdf_figure(ds, u, limits: Mapping[str, float]) -> Figure:
    """Empirical CDFs of the key metrics with their limits, one line per grid point."""
    fig = Figure(figsize=(11, 4.4), layout="constrained")
    axes = fig.subplots(1, len(ECDF_METRICS))
    for ax, (metric, limit_key) in zip(np.atleast_1d(axes), ECDF_METRICS, strict=True):
        for line in ecdf_data(ds, u, metric):
            ax.step(line.values, line.shares, where="post", label=line.label)
        limit = limits.get(limit_key)
        if limit is not None and math.isfinite(limit):
            ax.axvline(limit, color="#b00020", ls="--", lw=1.4, label=f"limit {limit:g}")
        ax.set_xlabel(f"{metric.rsplit('_', 1)[0].replace('_', ' ')} [{ds[metric].attrs.get('units', '')}]")
        ax.set_ylabel("share of samples at or below")
        ax.grid(alpha=0.3)
        ax.legend(fontsize=7)
    fig.suptitle(f"empirical CDFs over {u.attrs.get('samples_per_point')} samples per point "
                 f"({u.attrs.get('sampling')}, seed {u.attrs.get('seed')})", fontsize=10)
    return fig


def hardest_point(u) -> dict[str, int]:
    """The grid point least likely to pass overall (the first where several tie)."""
    dims = _grid_dims(u)
    probability = u["pass_probability"].sel(check="overall").values
    if not dims:
        return {}
    flat = int(np.argmin(np.asarray(probability).ravel()))
    return dict(zip(dims, np.unravel_index(flat, probability.shape), strict=True))


@dataclass(frozen=True)
class TornadoBar:
    """One input's bar: its Spearman correlation and Sobol' indices (NaN without the Saltelli design)."""

    input: str
    spearman: float
    first: float
    total: float


def tornado_data(u, metric: str = "cell_temperature_max_degC") -> list[TornadoBar]:
    """The inputs at the hardest grid point ranked by |Spearman| for ``metric``, the largest first."""
    at = u.isel(hardest_point(u)) if hardest_point(u) else u
    m = list(u["metric"].values).index(metric)
    bars = []
    for j, path in enumerate(u["input"].values):
        first = float(at["sobol_first"].values[j, m]) if "sobol_first" in u else math.nan
        total = float(at["sobol_total"].values[j, m]) if "sobol_total" in u else math.nan
        bars.append(TornadoBar(str(path), float(at["spearman"].values[j, m]), first, total))
    return sorted(bars, key=lambda b: -abs(b.spearman) if math.isfinite(b.spearman) else 0.0)


def tornado_figure(u, ds, metric: str = "cell_temperature_max_degC") -> Figure:
    """Tornado chart of the sampled inputs for ``metric`` at the grid point least likely to pass."""
    bars = tornado_data(u, metric)
    sobol = any(math.isfinite(b.first) for b in bars)
    fig = Figure(figsize=(10 if sobol else 7, 0.55 * len(bars) + 2.0), layout="constrained")
    axes = np.atleast_1d(fig.subplots(1, 2 if sobol else 1))
    y = np.arange(len(bars))[::-1]
    rho = np.array([b.spearman for b in bars])
    axes[0].barh(y, rho, color=np.where(rho >= 0, "#b04a3a", "#3a6fb0"))
    axes[0].set_yticks(y, [b.input for b in bars], fontsize=8)
    axes[0].axvline(0, color="0.3", lw=0.8)
    axes[0].set_xlim(-1, 1)
    axes[0].set_xlabel(f"Spearman rank correlation with {metric}")
    if sobol:
        width = 0.38
        axes[1].barh(y + width / 2, [b.first for b in bars], height=width, label="first order")
        axes[1].barh(y - width / 2, [b.total for b in bars], height=width, label="total")
        axes[1].set_yticks(y, [b.input for b in bars], fontsize=8)
        axes[1].set_xlim(0, 1.05)
        axes[1].set_xlabel("Sobol' index")
        axes[1].legend(fontsize=8)
    fig.suptitle(f"which input decides {metric}: {_point_label(ds, hardest_point(u))} (least likely to pass)",
                 fontsize=10)
    return fig


def _percent(p: float) -> str:
    return "n/a" if not math.isfinite(p) else f"{100 * p:.2f} %"


def uncertainty_report(u, ds, figures: Sequence[tuple[Figure, str]] = (), title: str = "",
                       description: str = "") -> str:
    """One self-contained HTML file: the inputs' distributions, per grid point the pass probability with its
    interval and the key percentiles, the sensitivity ranking, the figures, the cautions and the run metadata."""
    dims = _grid_dims(u)
    body = [f"<h1>Uncertainty: {H.escape(title)}</h1>"]
    if description:
        body.append(f"<p>{H.escape(description)}</p>")
    body.append(f"<p>{H.escape(u.attrs.get('samples_per_point'))} samples per point by "
                f"{H.escape(u.attrs.get('sampling_description'))}, seed {H.escape(u.attrs.get('seed'))}; intervals: "
                f"{H.escape(u.attrs.get('interval'))}.</p>")
    inputs = json.loads(u.attrs.get("distributions") or "{}")
    body.append("<h2>Sampled inputs</h2>" + H.table(["key", "distribution"],
                                                    [[f"<code>{H.escape(k)}</code>", H.escape(v)]
                                                     for k, v in inputs.items()], 9))
    rows = []
    percentiles = list(u["percentile"].values)
    for index in (list(np.ndindex(*[u.sizes[d] for d in dims])) or [()]):
        sel = dict(zip(dims, index, strict=True))
        at = u.isel(sel) if sel else u
        p = float(at["pass_probability"].sel(check="overall"))
        low, high = float(at["pass_probability_low"].sel(check="overall")), float(
            at["pass_probability_high"].sel(check="overall"))
        peak = at["cell_temperature_max_degC"].values
        rows.append([H.escape(_point_label(ds, sel)), _percent(p), f"{_percent(low)} .. {_percent(high)}",
                     *[f"{v:.4g}" for v in peak]])
    body.append("<h2>Pass probability and peak cell temperature [degC] per point</h2>")
    body.append(H.table(["point", "pass probability", "95 % interval", *[f"P{q:g}" for q in percentiles]], rows, 1))
    bars = tornado_data(u)
    body.append("<h2>Which input decides the peak cell temperature (least likely point)</h2>")
    body.append(H.table(["rank", "input", "Spearman", "Sobol' first", "Sobol' total"],
                       [[str(i + 1), f"<code>{H.escape(b.input)}</code>", f"{b.spearman:.3f}",
                         "n/a" if not math.isfinite(b.first) else f"{b.first:.3f}",
                         "n/a" if not math.isfinite(b.total) else f"{b.total:.3f}"] for i, b in enumerate(bars)], 2))
    for fig, caption in figures:
        body.append(H.figure(fig, caption))
    body.append("<h2>Cautions</h2>" + H.cautions())
    body.append("<p>The probabilities are those of the model under the distributions given: they are as good as "
                "those distributions, and say nothing of what the model leaves out.</p>")
    meta = [["scenario file", H.escape(u.attrs.get("scenario_file", ""))],
            ["scenario SHA-256", H.escape(u.attrs.get("scenario_sha256", ""))],
            ["thermoelec version", H.escape(u.attrs.get("thermoelec_version", ""))],
            ["report generated", H.escape(_dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M:%S UTC"))]]
    body.append("<h2>Run metadata</h2>" + H.table(["item", "value"], meta, 9))
    return H.document(f"thermoelec uncertainty: {title}", "".join(body))


def write_uncertainty_outputs(u, ds, out: Path, limits: Mapping[str, float], title: str = "",
                              description: str = "", figures: bool = True,
                              formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """``uncertainty_ecdf.*``, ``uncertainty_tornado.*`` and ``uncertainty_report.html`` in ``out``."""
    written: list[Path] = []
    shown: list[tuple[Figure, str]] = []
    if figures:
        ecdf, tornado = ecdf_figure(ds, u, limits), tornado_figure(u, ds)
        written += save(ecdf, out, "uncertainty_ecdf", formats)
        written += save(tornado, out, "uncertainty_tornado", formats)
        shown = [(ecdf, "Empirical CDFs with the limits"), (tornado, "Tornado chart of the sampled inputs")]
    path = out / "uncertainty_report.html"
    path.write_text(uncertainty_report(u, ds, shown, title, description), encoding="utf-8")
    return [*written, path]
