"""The design review drawn: the Pareto figure, pass / fail maps per option, and the HTML design report.

Owns :func:`pareto_points` (its data: each option's attribute against its highest
passing value and margin, which options are on the Pareto front), :func:`pareto_figure`,
:func:`option_map_data` and :func:`option_maps` (per option, pass / fail over the
grid keys with its highest passing value), :func:`design_report` (one self-contained
HTML file: the requirement, the recommendation, the table, the figures, the cautions
and the run metadata) and :func:`write_review_outputs`. Imports from analysis/ and the
output layer's own report pieces only.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.patches import Patch

from thermoelec.analysis.sweep.review import review_table
from thermoelec.analysis.verdict import PASS
from thermoelec.output import html as H
from thermoelec.output.figures import save
from thermoelec.output.sweep_figures import axis_label

__all__ = ["ParetoPoint", "design_report", "option_map_data", "option_maps", "pareto_figure", "pareto_points",
           "write_review_outputs"]


@dataclass(frozen=True)
class ParetoPoint:
    """One option in the Pareto figure: its attribute, highest passing value, margin, front and choice."""

    name: str
    attribute: float
    highest: float
    margin: float
    on_front: bool
    recommended: bool
    meets: bool


def _dominated(i: int, cost: np.ndarray, gain: np.ndarray) -> bool:
    """Another option costs no more and gains no less, and is better in one of the two."""
    better = (cost <= cost[i]) & (gain >= gain[i]) & ((cost < cost[i]) | (gain > gain[i]))
    return bool(better.any())


def pareto_points(review) -> list[ParetoPoint]:
    """Each option's ranking attribute against its highest passing value (or margin where there is none);
    the Pareto front: the options no other one beats on both (a lower attribute and a higher value)."""
    name = review.attrs["group"]
    rank_by = review.attrs.get("rank_by") or ""
    n = review.sizes[name]
    cost = review[f"{name}.{rank_by}"].values.astype(float) if rank_by else np.arange(n, dtype=float)
    value = "refined" if "refined" in review else "highest_passing"
    highest = review[value].values.astype(float) if value in review else np.full(n, np.nan)
    margin = review["margin_at_requirement"].values.astype(float) if "margin_at_requirement" in review \
        else np.full(n, np.nan)
    gain = np.where(np.isfinite(highest), highest, -np.inf) if np.isfinite(highest).any() else \
        np.where(np.isfinite(margin), margin, -np.inf)
    meets = review["meets_requirement"].values.astype(bool) if "meets_requirement" in review else np.zeros(n, bool)
    names = list(review[name].values)
    return [ParetoPoint(str(names[i]), float(cost[i]), float(highest[i]), float(margin[i]),
                        not _dominated(i, cost, gain), names[i] == review.attrs.get("recommended"), bool(meets[i]))
            for i in range(n)]


def pareto_figure(review, over_unit: str = "") -> Figure:
    """The ranking attribute against the highest passing value (left) and the margin at the requirement (right).

    The Pareto front is joined by a line; options meeting the requirement are filled, the recommended
    one is ringed; the requirement point's value and the required margin are drawn as dashed lines.
    """
    points = pareto_points(review)
    rank_by = review.attrs.get("rank_by") or "option"
    name = review.attrs["group"]
    unit = review[f"{name}.{rank_by}"].attrs.get("units", "") if f"{name}.{rank_by}" in review else ""
    panels = [("highest_passing", f"highest passing {axis_label(review.attrs.get('over', ''), over_unit)}")]
    if "margin_at_requirement" in review:
        metric = review["margin_at_requirement"].attrs.get("metric", "")
        panels.append(("margin", f"{metric.replace('_', ' ')} at the requirement point"))
    fig = Figure(figsize=(5.2 * len(panels) + 0.8, 4.6), layout="constrained")
    axes = np.atleast_1d(fig.subplots(1, len(panels)))
    x = np.array([p.attribute for p in points])
    for ax, (kind, label) in zip(axes, panels, strict=True):
        y = np.array([p.highest if kind == "highest_passing" else p.margin for p in points])
        front = sorted((p for p, yy in zip(points, y, strict=True) if p.on_front and math.isfinite(yy)),
                       key=lambda p: p.attribute)
        if len(front) > 1:
            ax.plot([p.attribute for p in front], [p.highest if kind == "highest_passing" else p.margin
                                                   for p in front], "-", color="0.6", zorder=1,
                    label="Pareto front")
        for p, xx, yy in zip(points, x, y, strict=True):
            if not math.isfinite(yy):
                continue
            ax.scatter([xx], [yy], s=70, zorder=3, color="#0a6b2d" if p.meets else "white",
                       edgecolors="#0a6b2d" if p.meets else "#b00020", linewidths=1.6)
            if p.recommended:
                ax.scatter([xx], [yy], s=260, zorder=2, facecolors="none", edgecolors="#1f4e9e", linewidths=2.0)
            ax.annotate(p.name, (xx, yy), xytext=(6, 6), textcoords="offset points", fontsize=9)
        if kind == "margin":
            required = _required_margin(review)
            if required is not None:
                ax.axhline(required, ls="--", color="0.4", lw=1.0, label="required")
        ax.set_xlabel(f"{rank_by.replace('_', ' ')} [{unit}]" if unit and unit != "1" else rank_by.replace("_", " "))
        ax.set_ylabel(label)
        ax.grid(alpha=0.3)
    handles = [Patch(facecolor="#0a6b2d", label="meets the requirement"),
               Patch(facecolor="white", edgecolor="#b00020", label="does not"),
               Patch(facecolor="none", edgecolor="#1f4e9e", label="recommended")]
    axes[0].legend(handles=handles, fontsize=8, loc="best")
    fig.suptitle(f"options of {name!r}: {review.attrs.get('requirement') or 'no requirement given'}", fontsize=10)
    return fig


def _required_margin(review) -> float | None:
    import re

    match = re.match(r"^\s*[A-Za-z_][A-Za-z0-9_]*\s*(?:>=|<=)\s*([-+0-9.eE]+)", review.attrs.get("requirement", ""))
    return float(match.group(1)) if match else None


@dataclass(frozen=True)
class OptionMap:
    """The pass / fail map of one option: ``passed`` and ``ran`` over (y, x), its highest passing value."""

    option: str
    x: np.ndarray
    y: np.ndarray
    passed: np.ndarray
    ran: np.ndarray
    highest: float


def option_map_data(ds, review) -> tuple[list[OptionMap], str, str]:
    """Per option, pass / fail over the review's key (x) and the first other grid key (y; one row without),
    further keys reduced to the worst case (a cell passes when every case behind it passes)."""
    name, over = review.attrs["group"], review.attrs.get("over") or None
    dims = [d for d in ds["verdict"].dims if d != name]
    x_dim = over if over in dims else dims[0]
    y_dim = next((d for d in dims if d != x_dim and np.issubdtype(ds[d].dtype, np.number)), None)
    rest = [d for d in dims if d not in (x_dim, y_dim)]
    # a zipped group has no values of its own: its first key's stand for it
    y_label = next((c for c in ds.coords if y_dim and ds[c].dims == (y_dim,)
                    and np.issubdtype(ds[c].dtype, np.number)), y_dim)
    maps = []
    value = "refined" if "refined" in review else "highest_passing"
    for i, option in enumerate(review[name].values):
        sel = ds.isel({name: i})
        passed = (sel["verdict"] == PASS)
        ran = sel["status"] == "ok"
        if rest:
            passed, ran = passed.all(rest), ran.all(rest)
        order = [d for d in (y_dim, x_dim) if d is not None]
        passed = passed.transpose(*order).values.reshape(-1, sel.sizes[x_dim])
        ran = ran.transpose(*order).values.reshape(-1, sel.sizes[x_dim])
        y = ds[y_label].values.astype(float) if y_dim else np.zeros(1)
        highest = float(review[value].values[i]) if value in review else math.nan
        maps.append(OptionMap(str(option), ds[x_dim].values.astype(float), y, passed, ran, highest))
    return maps, x_dim, (y_label or "") if y_dim else ""


def option_maps(ds, review) -> Figure:
    """Pass / fail maps per option over the grid keys, the highest passing value as a line, the
    requirement point marked."""
    maps, x_dim, y_dim = option_map_data(ds, review)
    n = len(maps)
    cols = min(n, 4)
    rows = math.ceil(n / cols)
    fig = Figure(figsize=(3.6 * cols + 0.6, 3.0 * rows + 1.0), layout="constrained")
    axes = np.atleast_1d(fig.subplots(rows, cols, squeeze=False, sharex=True, sharey=True).ravel())
    x_unit = ds[x_dim].attrs.get("units", "")
    y_unit = ds[y_dim].attrs.get("units", "") if y_dim else ""
    for ax, m in zip(axes, maps, strict=False):
        colours = np.where(m.passed, 1.0, 0.0).astype(float)
        colours[~m.ran] = np.nan
        ax.pcolormesh(m.x, m.y, np.ma.masked_invalid(colours), shading="nearest", cmap="RdYlGn", vmin=-0.3,
                      vmax=1.3)
        if (~m.ran).any():
            yy, xx = np.nonzero(~m.ran)
            ax.scatter(m.x[xx], m.y[yy], marker="x", color="k", s=20)
        if math.isfinite(m.highest):
            ax.axvline(m.highest, color="#1f4e9e", lw=2.0)
        ax.set_title(m.option, fontsize=10)
        ax.set_xlabel(axis_label(x_dim, x_unit))
        if y_dim:
            ax.set_ylabel(axis_label(y_dim, y_unit))
        else:
            ax.set_yticks([])
    for ax in axes[n:]:
        ax.set_axis_off()
    fig.suptitle("pass (green) / fail (red) per option, worst case over the other keys; blue: highest passing "
                 f"{axis_label(x_dim)}; x: did not run", fontsize=10)
    return fig


def _cell(value) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "<span class='pass'>yes</span>" if value else "<span class='fail'>no</span>"
    if isinstance(value, (float, np.floating)):
        return "n/a" if not math.isfinite(value) else f"{value:.4g}"
    return H.escape(value)


def design_report(review, ds, figures: Sequence[tuple[Figure | bytes, str]] = (), title: str = "",
                  description: str = "") -> str:
    """One self-contained HTML file: the question, the recommendation, the table of options, the figures,
    the options' overrides, the cautions and the run metadata."""
    table = review_table(review)
    body = [f"<h1>Design review: {H.escape(title or ds.attrs.get('scenario_file', ''))}</h1>"]
    if description:
        body.append(f"<p>{H.escape(description)}</p>")
    requirement = review.attrs.get("requirement") or "none given"
    body.append(f"<p><strong>Requirement:</strong> <code>{H.escape(requirement)}</code>; options ranked by "
                f"<code>{H.escape(review.attrs.get('rank_by') or '-')}</code> (the least first).</p>")
    statement = review.attrs.get("statement", "")
    cls = "pass" if review.attrs.get("recommended") else "fail"
    body.append(f"<p class='{cls}' style='font-size:1.15em'>{H.escape(statement)}</p>")
    body.append("<h2>Options</h2>")
    header = list(table.columns)
    body.append(H.table(header, [[_cell(v) for v in row] for row in table.itertuples(index=False)], numeric_from=1))
    for caption_fig, caption in figures:
        body.append(H.figure(caption_fig, caption))
    body.append("<h2>What each option changes</h2>")
    groups = json.loads(review.attrs.get("option_group", "{}"))
    rows = [[H.escape(n), "<br>".join(f"<code>{H.escape(k)} = {H.escape(json.dumps(v))}</code>"
                                      for k, v in o["overrides"].items())
             or "(the scenario as it is)", H.escape(o.get("description", ""))] for n, o in groups.items()]
    body.append(H.table(["option", "overrides", "description"], rows, numeric_from=9))
    body.append("<h2>Cautions</h2>" + H.cautions())
    meta = [["scenario file", H.escape(ds.attrs.get("scenario_file", ""))],
            ["scenario SHA-256", H.escape(ds.attrs.get("scenario_sha256", ""))],
            ["thermoelec version", H.escape(ds.attrs.get("thermoelec_version", ""))],
            ["scenarios", H.escape(ds.attrs.get("scenarios", ""))],
            ["failed to solve or invalid", H.escape(ds.attrs.get("failed", ""))],
            ["sweep dimensions", H.escape(ds.attrs.get("sweep_dimensions", ""))],
            ["sweep fingerprint", H.escape(ds.attrs.get("sweep_fingerprint", ""))],
            ["report generated", H.escape(_dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M:%S UTC"))]]
    body.append("<h2>Run metadata</h2>" + H.table(["item", "value"], meta, numeric_from=9))
    return H.document(f"thermoelec design review: {title}", "".join(body))


def write_review_outputs(review, ds, out: Path, title: str = "", description: str = "", figures: bool = True,
                         formats: Sequence[str] = ("png", "svg")) -> list[Path]:
    """``pareto.*``, ``option_maps.*`` and ``design_report.html`` in ``out`` (the report only without figures)."""
    written: list[Path] = []
    shown: list[tuple[Figure, str]] = []
    over = review.attrs.get("over") or ""
    over_unit = ds[over].attrs.get("units", "") if over in ds.coords else ""
    if figures:
        pareto = pareto_figure(review, over_unit)
        maps = option_maps(ds, review)
        written += save(pareto, out, "pareto", formats)
        written += save(maps, out, "option_maps", formats)
        shown = [(pareto, "Pareto figure: the ranking attribute against the highest passing value and the margin"),
                 (maps, "Pass / fail per option over the grid keys")]
    path = out / "design_report.html"
    path.write_text(design_report(review, ds, shown, title, description), encoding="utf-8")
    return [*written, path]
