"""The command line: ``thermoelec run SCENARIO --out DIR``.

Exit status: 0 when the run finished (whatever ``completed`` says), 2 for an
invalid scenario or profile (one message naming the file and the key), 1 for
anything else (a solver failure still writes what was computed).
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path
from typing import TextIO

from . import __version__
from .scenario import ScenarioError, load_scenario, parse_value

EXIT_OK, EXIT_FAILURE, EXIT_INVALID = 0, 1, 2


def _overrides(pairs: list[str]) -> dict:
    overrides = {}
    for pair in pairs:
        key, sep, value = pair.partition("=")
        if not sep or not key.strip():
            raise ScenarioError("--set", pair, "expected KEY=VALUE, for example thermal.ambient_temperature='-20 degC'")
        overrides[key.strip()] = parse_value(value.strip())
    return overrides


def _fmt(value, unit: str = "", digits: int = 4) -> str:
    if value is None:
        return "n/a"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.{digits}g}{(' ' + unit) if unit else ''}"
    return f"{value}{(' ' + unit) if unit else ''}"


SUMMARY_ROWS = (
    ("completed", "completed", ""),
    ("stop reason", "stop_reason", ""),
    ("duration", "duration_s", "s"),
    ("peak cell temperature", "cell_temperature_max_degC", "degC"),
    ("cell temperature rise", "cell_temperature_rise_K", "K"),
    ("peak sink temperature", "sink_temperature_max_degC", "degC"),
    ("minimum pack voltage", "voltage_min_V", "V"),
    ("cell voltage margin", "voltage_margin_min_V", "V"),
    ("peak current", "current_max_A", "A"),
    ("energy to load", "energy_load_Wh", "Wh"),
    ("energy from cells", "energy_battery_Wh", "Wh"),
    ("energy dissipated", "energy_dissipated_Wh", "Wh"),
    ("heat generated", "heat_generated_Wh", "Wh"),
    ("heat to ambient", "heat_to_ambient_Wh", "Wh"),
    ("efficiency", "efficiency", ""),
    ("charge throughput", "charge_throughput_Ah", "Ah"),
    ("final SoC", "soc_end", ""),
)


def print_summary(summary: dict, stream: TextIO) -> None:
    """A short table of the main metrics, then the warnings."""
    width = max(len(label) for label, _, _ in SUMMARY_ROWS)
    print(f"scenario: {summary.get('scenario', '')}", file=stream)
    for label, key, unit in SUMMARY_ROWS:
        print(f"  {label:<{width}}  {_fmt(summary.get(key), unit)}", file=stream)
    for warning in summary.get("warnings", []):
        print(f"  warning: {warning}", file=stream)


def _run(args: argparse.Namespace) -> int:
    from .api import simulate

    overrides = _overrides(args.set or [])
    if args.backend:
        overrides["solver.backend"] = args.backend
    scenario = load_scenario(args.scenario, overrides)
    result = simulate(scenario)
    out = Path(args.out)
    try:
        result.write(out)
    except OSError as exc:
        print(f"thermoelec: cannot write results to {out}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_FAILURE
    if not args.quiet:
        print_summary(result.summary, sys.stdout)
        print(f"results in {out}/", file=sys.stdout)
    if result.status != "ok":
        print(f"thermoelec: the solver failed: {result.message} (results up to the failure are in {out}/)",
              file=sys.stderr)
        return EXIT_FAILURE
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``thermoelec`` command."""
    parser = argparse.ArgumentParser(prog="thermoelec", description=__doc__.splitlines()[0])
    parser.add_argument("--version", action="version", version=f"thermoelec {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)
    run = sub.add_parser("run", help="simulate one scenario and write its results")
    run.add_argument("scenario", help="scenario file (TOML)")
    run.add_argument("--out", required=True, help="output folder (created if missing)")
    run.add_argument("--set", action="append", metavar="KEY=VALUE",
                     help="override a scenario value by dotted path, e.g. thermal.ambient_temperature='-20 degC'")
    run.add_argument("--backend", choices=("cvode", "scipy"), help="solver back end (overrides [solver])")
    run.add_argument("--quiet", action="store_true", help="print no summary")
    run.set_defaults(handler=_run)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return args.handler(args)
    except ScenarioError as exc:
        print(f"thermoelec: invalid input: {exc}", file=sys.stderr)
        return EXIT_INVALID
    except KeyboardInterrupt:
        print("thermoelec: interrupted", file=sys.stderr)
        return 130
    except Exception as exc:
        if os.environ.get("THERMOELEC_DEBUG"):
            raise
        print(f"thermoelec: internal error: {type(exc).__name__}: {exc} (set THERMOELEC_DEBUG=1 for a traceback)",
              file=sys.stderr)
        return EXIT_FAILURE


if __name__ == "__main__":
    sys.exit(main())
