"""HTML pieces of the self-contained reports: escaping, tables, embedded figures, the page, the cautions.

Every report of the output layer (a run, a comparison, a fit, a capability
map, a design review, an uncertainty study) is built from these, so they look
alike and none fetches anything from the network.
"""

from __future__ import annotations

import base64
import html
import io
from collections.abc import Iterable, Sequence
from typing import Any

__all__ = ["CAUTIONS", "STYLE", "cautions", "document", "escape", "figure", "pass_cell", "png_base64", "table"]

#: The cautions printed in every report (and in the README).
CAUTIONS = (
    "The results are engineering estimates from a lumped equivalent-circuit and thermal model; they are only as "
    "good as the parameters, which must be validated with tests of the actual cells and pack.",
    "Thermal runaway: a lumped cell temperature hides hot spots and cell-to-cell spread; it says nothing about "
    "internal shorts, abuse or propagation. Keep real margins to the cell maker's limits.",
    "Charging in the cold risks lithium plating, which can lead to internal shorts later: follow the cell "
    "maker's charge temperature and current window.",
    "This tool does not certify anything. Defer to the applicable safety standards, local codes and licensed "
    "engineering practice for design approval, transport and installation.",
)

#: The inline style sheet of every report.
STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2em auto;max-width:1100px;color:#222;
line-height:1.4;padding:0 1em}
h1{font-size:1.6em;margin-bottom:.2em} h2{border-bottom:1px solid #ccc;padding-bottom:.2em;margin-top:1.6em}
table{border-collapse:collapse;margin:.6em 0;font-size:.92em} th,td{border:1px solid #ccc;padding:.25em .6em}
th{background:#f3f3f3;text-align:left} td.num{text-align:right;font-variant-numeric:tabular-nums}
.pass{color:#0a6b2d;font-weight:600} .fail{color:#b00020;font-weight:600}
.verdict{display:inline-block;padding:.3em .9em;border-radius:4px;color:#fff;font-weight:700;font-size:1.2em}
.verdict.pass{background:#0a6b2d;color:#fff} .verdict.fail{background:#b00020;color:#fff}
.caution{background:#fff7e0;border-left:4px solid #e0a000;padding:.6em 1em;margin:1em 0}
.warn{background:#fdecea;border-left:4px solid #b00020;padding:.4em 1em}
.note{background:#eef4fb;border-left:4px solid #3a6fb0;padding:.4em 1em}
.stop{background:#fdecea;padding:.5em 1em} .default{color:#777}
figure{margin:1em 0} figure img{max-width:100%;border:1px solid #ddd} figcaption{color:#555;font-size:.9em}
code{background:#f3f3f3;padding:0 .2em}
"""


def escape(value: Any) -> str:
    """``value`` as text with HTML's special characters escaped."""
    return html.escape(str(value))


def table(header: Sequence[str], rows: Iterable[Sequence[str]], numeric_from: int = 1,
          table_class: str = "") -> str:
    """A table: the header, then rows of cells already escaped (columns from ``numeric_from`` right-aligned)."""
    head = "".join(f"<th>{escape(h)}</th>" for h in header)
    body = []
    for row in rows:
        cells = "".join(f"<td class='num'>{c}</td>" if i >= numeric_from else f"<td>{c}</td>"
                        for i, c in enumerate(row))
        body.append(f"<tr>{cells}</tr>")
    cls = f" class='{table_class}'" if table_class else ""
    return f"<table{cls}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def pass_cell(passed: bool) -> str:
    """A pass / FAIL cell, coloured."""
    return "<span class='pass'>pass</span>" if passed else "<span class='fail'>FAIL</span>"


def cautions() -> str:
    """The cautions box of every report."""
    return "<div class='caution'><strong>Cautions.</strong><ul>" + \
        "".join(f"<li>{escape(c)}</li>" for c in CAUTIONS) + "</ul></div>"


def png_base64(fig_or_png: Any) -> str:
    """A matplotlib Figure, or the bytes of a PNG file, as base64 text."""
    if isinstance(fig_or_png, bytes):
        return base64.b64encode(fig_or_png).decode("ascii")
    buffer = io.BytesIO()
    fig_or_png.savefig(buffer, format="png", dpi=100)
    return base64.b64encode(buffer.getvalue()).decode("ascii")


def figure(fig_or_png: Any, caption: str) -> str:
    """An embedded figure from a matplotlib Figure or the bytes of a PNG file."""
    return (f"<figure><img alt='{escape(caption)}' src='data:image/png;base64,{png_base64(fig_or_png)}'>"
            f"<figcaption>{escape(caption)}</figcaption></figure>")


def document(title: str, body: str) -> str:
    """The whole page: title, the inline style sheet, the body."""
    return ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<title>{escape(title)}</title><style>{STYLE}</style></head><body>{body}</body></html>\n")
