"""Every demo through the command line: one set of energies and one verdict in every output, and the
reports rendered in a real browser.

For each demo scenario, ``thermoelec compare`` writes each case's ``summary.json``,
``comparison.csv`` and ``report.html`` and prints the comparison table; the
energies (each direction apart) and the verdict must read the same in all four.
``thermoelec run`` on the e-bike round (a ride, regeneration and a recharge: the
case where netting once hid the ride) must print what its ``summary.json`` and
its report hold. The reports are then loaded in headless Chromium (Debian's
package, installed by ``tools/ensure-chromium``): every figure decodes, the
verdict and the limits table render, and the console shows no error.
"""

from __future__ import annotations

import html
import json
import math
import re
import shutil
import subprocess

import pandas as pd
import pytest

from thermoelec import cli
from thermoelec.analysis.compare import slug
from thermoelec.analysis.results import ENERGY_ROWS
from thermoelec.output.tables import format_value

from .helpers import SCENARIOS

DEMOS = ("drone_delivery", "ebike_route", "robot_cooling", "scooter_commute", "drone_cold_bms")
#: The rows every output must agree on: the energies apart (and efficiencies), and the verdict.
AGREED = (*ENERGY_ROWS, ("verdict", "verdict", ""))


@pytest.fixture(scope="module")
def demo_outputs(tmp_path_factory, capsys_module):
    """``{demo: (folder, terminal text)}`` of a compare of each demo, and ``"run"``: a run of the e-bike round."""
    root = tmp_path_factory.mktemp("demos")
    outputs = {}
    for demo in DEMOS:
        out = root / demo
        assert cli.main(["compare", str(SCENARIOS / f"{demo}.toml"), "--out", str(out)]) == 0
        outputs[demo] = (out, capsys_module.readouterr().out)
    out = root / "ebike-run"
    assert cli.main(["run", str(SCENARIOS / "ebike_route.toml"), "--out", str(out)]) == 0
    outputs["run"] = (out, capsys_module.readouterr().out)
    return outputs


@pytest.fixture(scope="module")
def capsys_module():
    """A module-wide capture of stdout (pytest's capsys is per test)."""
    import io
    import sys

    class Capture:
        def __init__(self):
            self.buffer = io.StringIO()

        def readouterr(self):
            text = self.buffer.getvalue()
            self.buffer.seek(0)
            self.buffer.truncate()
            return type("Captured", (), {"out": text})

    capture = Capture()
    saved = sys.stdout
    sys.stdout = capture.buffer
    yield capture
    sys.stdout = saved


def _cells(row_html: str) -> list[str]:
    return [html.unescape(re.sub(r"<[^>]+>", "", cell)).strip()
            for cell in re.findall(r"<t[dh][^>]*>(.*?)</t[dh]>", row_html, flags=re.S)]


def _html_table(text: str, table_class: str) -> list[list[str]]:
    table = re.search(rf"<table class='{table_class}'>(.*?)</table>", text, flags=re.S).group(1)
    return [_cells(row) for row in re.findall(r"<tr>(.*?)</tr>", table, flags=re.S)]


def _terminal_table(text: str, names: list[str]) -> dict[str, list[str]]:
    """The comparison as printed: ``{label: [value per case]}``."""
    lines = text.splitlines()
    start = next(i for i, line in enumerate(lines) if line.split() == " ".join(names).split())
    rows = {}
    for line in lines[start + 1:]:
        cells = re.split(r"\s{2,}", line.strip())
        if len(cells) != len(names) + 1:
            break
        rows[cells[0]] = cells[1:]
    return rows


@pytest.mark.parametrize("demo", DEMOS)
def test_terminal_summary_comparison_and_report_agree(demo_outputs, demo):
    out, terminal = demo_outputs[demo]
    table = pd.read_csv(out / "comparison.csv")
    names = list(table.columns[3:])
    summaries = {name: json.loads((out / "cases" / slug(name) / "summary.json").read_text()) for name in names}
    printed = _terminal_table(terminal, names)
    report = (out / "report.html").read_text()
    reported = {row[0]: row[1:] for row in _html_table(report, "comparison")}
    for label, key, unit in AGREED:
        csv_row = table[table["key"] == key]
        assert len(csv_row) == 1, key
        for k, name in enumerate(names):
            value = summaries[name][key]
            shown = format_value(value, unit)
            in_csv = csv_row[name].item()
            if isinstance(value, float):
                assert math.isclose(float(in_csv), value, rel_tol=1e-12, abs_tol=1e-12), (name, key)
            else:
                assert str(in_csv) == str(value) or (value is None and pd.isna(in_csv)), (name, key)
            assert printed[label.strip()][k] == shown, (name, key)
            assert reported[label.strip()][k].lower() == shown.lower(), (name, key)  # the badge says PASS
    for name in names:  # the verdict ends the terminal output, case by case
        assert f"{name}: verdict: {summaries[name]['verdict'].upper()}" in terminal
        assert summaries[name]["verdict"] == ("pass" if all(c["passed"] for c in summaries[name]["checks"])
                                              else "fail")


def test_run_terminal_summary_and_report_agree(demo_outputs):
    out, terminal = demo_outputs["run"]
    summary = json.loads((out / "summary.json").read_text())
    report = (out / "report.html").read_text()
    energy = {row[0]: row[1] for row in _html_table(report, "energy")}
    for label, key, unit in ENERGY_ROWS:
        shown = format_value(summary[key], unit)
        assert re.search(rf"^  {re.escape(label)}\s+{re.escape(shown)}$", terminal, flags=re.M), key
        assert energy[label.strip()] == shown, key
    # the ride and the recharge are reported apart, never netted: 208 Wh out, 313 Wh in (9 Wh of it regenerated)
    assert summary["energy_discharged_Wh"] > 200 and summary["energy_charged_Wh"] > 300
    assert 0 < summary["energy_regenerated_Wh"] < 20
    assert terminal.rstrip().splitlines()[-1] == f"verdict: {summary['verdict'].upper()}"
    badge = re.search(r"<p id='verdict'><span class='verdict (pass|fail)'>(PASS|FAIL)</span>", report)
    assert badge.group(2) == summary["verdict"].upper()
    checks = _html_table(report, "limits")
    assert [row[0] for row in checks[1:]] == [c["description"] for c in summary["checks"]]
    assert [row[-1].lower() for row in checks[1:]] == ["pass" if c["passed"] else "fail" for c in summary["checks"]]


# ---------------------------------------------------------------------------
# The reports in a real browser
# ---------------------------------------------------------------------------


def _chromium() -> str | None:
    return shutil.which("chromium") or shutil.which("chromium-browser")


#: Flags that work in a container as root: no sandbox, no GPU, nothing fetched in the background.
CHROMIUM_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--hide-scrollbars", "--virtual-time-budget=10000")
#: Counts what rendered and writes it into the title, which --dump-dom prints: images decoded and failed,
#: the verdict, the rows of the limits table, and every error the page raised or logged.
PROBE = """<script>
window.__errors = [];
window.addEventListener('error', e => window.__errors.push(String(e.message || (e.target && e.target.src)
  || 'error')), true);
const logged = console.error; console.error = (...a) => { window.__errors.push(a.join(' ')); logged(...a); };
window.addEventListener('load', () => {
  const images = [...document.images];
  const decoded = images.filter(i => i.complete && i.naturalWidth > 0).length;
  const verdict = document.getElementById('verdict');
  const limits = document.querySelectorAll('table.limits tbody tr').length;
  document.title = 'probe images:' + decoded + '/' + images.length + ' verdict:'
    + (verdict && verdict.offsetHeight > 0 ? verdict.innerText.trim().split(/\\s+/)[0] : 'missing')
    + ' limits:' + limits + ' errors:' + window.__errors.length + ' ' + window.__errors.join('|');
});
</script>"""


def _reports(demo_outputs) -> list:
    return [demo_outputs[key][0] / "report.html" for key in (*DEMOS, "run")]


@pytest.mark.skipif(_chromium() is None, reason="Chromium is not installed and tools/ensure-chromium could not "
                                                 "install it here (no root, no apt-get or no network)")
def test_every_demo_report_renders_in_headless_chromium(demo_outputs, tmp_path):
    for report in _reports(demo_outputs):
        text = report.read_text()
        images = text.count("<img ")
        probe = tmp_path / f"{report.parent.name}.html"
        probe.write_text(text.replace("<head>", "<head>" + PROBE, 1))
        proc = subprocess.run([_chromium(), *CHROMIUM_FLAGS, f"--user-data-dir={tmp_path / 'profile'}",
                               "--enable-logging=stderr", "--v=0", "--dump-dom", probe.as_uri()],
                              capture_output=True, text=True, timeout=180)
        title = re.search(r"<title>(probe [^<]*)</title>", proc.stdout)
        assert title, (report, proc.stderr[-2000:])
        found = html.unescape(title.group(1))
        summaries = [json.loads(p.read_text()) for p in report.parent.rglob("summary.json")]
        verdicts = {s["verdict"].upper() for s in summaries}
        assert f"images:{images}/{images}" in found, (report, found)
        assert re.search(r"verdict:(PASS|FAIL)", found).group(1) in verdicts, (report, found)
        assert int(re.search(r"limits:(\d+)", found).group(1)) >= 7, (report, found)  # the seven checks
        assert " errors:0 " in found + " ", (report, found)
        console = [line for line in proc.stderr.splitlines() if "CONSOLE" in line and "probe" not in line]
        assert not console, (report, console)
