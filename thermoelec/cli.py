"""thermoelec: thermal-electrical duty-cycle co-simulation of battery cells and packs.

commands:
  run SCENARIO --out DIR       simulate one scenario: summary, time series, figures, a report with the verdict
  compare SCENARIO --out DIR   run the scenario's [[case]] variants (a cold start, a hot soak, ...) side by side
  sweep SCENARIO --out DIR     run every combination of swept keys, or search for the least (greatest) value
                               of one key that meets a criterion
  fit {ocv,pulse,thermal} LOG  fit cell or thermal parameters to test logs and write a cell file
  capability SCENARIO --out DIR
                               the largest constant power and current for 2 s, 10 s, 30 s pulses (--pulse)
                               over SoC x temperature, discharge and charge, and the limit that binds each
  check SCENARIO               validate a scenario without running it: its parameters with defaults and
                               units, and what its profile asks of the pack
  new FILE                     write a commented template scenario to start from

Exit status: 0 when the run finished (whatever its verdict says), 2 for invalid
input (one message naming the file and the key), for work over its budget
(--max-rows, --max-memory, --max-scenarios) and for an output folder in use by
another command; 130 after SIGINT (Ctrl-C), 143 after SIGTERM; 1 for anything
else (a solver failure still writes what was computed). Outputs are put in
place whole or not at all. "thermoelec COMMAND --help" for each.
"""

from __future__ import annotations

import argparse
import atexit
import importlib
import os
import shlex
import sys
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from thermoelec.analysis.interrupts import Interrupted, termination_signals
from thermoelec.analysis.transaction import check_output_path, hold, write_text_atomic
from thermoelec.inputs import ScenarioError, to_si
from thermoelec.inputs.budgets import DEFAULT_BUDGETS, Budgets, using
from thermoelec.output.tables import print_summary
from thermoelec.scenario import load_scenario, parse_value
from thermoelec.version import __version__

EXIT_OK, EXIT_FAILURE, EXIT_INVALID = 0, 1, 2


def _overrides(pairs: list[str]) -> dict:
    overrides = {}
    for pair in pairs:
        key, sep, value = pair.partition("=")
        if not sep or not key.strip():
            raise ScenarioError("--set", pair, "expected KEY=VALUE, for example thermal.ambient_temperature='-20 degC'")
        overrides[key.strip()] = parse_value(value.strip())
    return overrides


def _load(args: argparse.Namespace, extra: dict | None = None):
    """The scenario of a command, its ``--set`` overrides named as such in messages."""
    return load_scenario(args.scenario, {**_overrides(args.set or []), **(extra or {})}, overrides_from="--set")


def _notes(folder) -> None:
    for note in folder.notes:
        print(f"thermoelec: note: {note}", file=sys.stderr)


#: A task shows its progress only when it takes longer than this [s] (and stderr is a terminal).
PROGRESS_DELAY = 1.5


@contextmanager
def _progress(label: str, enabled: bool = True) -> Iterator[None]:
    """An elapsed-time line on stderr (tqdm) while a task runs: only on a terminal, only past
    :data:`PROGRESS_DELAY` (a first run compiles the kernels for about ten seconds)."""
    if not enabled:
        yield
        return
    from tqdm import tqdm

    done = threading.Event()

    def show() -> None:
        if done.wait(PROGRESS_DELAY):
            return
        with tqdm(total=None, desc=label, bar_format="{desc}: {elapsed}", file=sys.stderr, disable=None,
                  leave=False) as bar:
            while not done.wait(0.5):
                bar.refresh()

    thread = threading.Thread(target=show, daemon=True)
    thread.start()
    try:
        yield
    finally:
        done.set()
        thread.join()


class _ImportsAhead:
    """Modules imported in a thread while a sweep solves: the kernels run without the GIL, so the
    figures' libraries (xarray, pandas, matplotlib: about a second of CPU) load meanwhile instead of
    after the last chunk. Started by the sweep once its workers run (``run_sweep(meanwhile=...)``: a
    thread started before would keep them from being forks). An import that fails here is left to
    fail again, with its message, where the module is used."""

    def __init__(self, modules: tuple[str, ...]):
        self.modules, self.thread = modules, None

    def start(self) -> None:
        if self.modules and self.thread is None:
            self.thread = threading.Thread(target=self._load, name="imports-ahead", daemon=True)
            self.thread.start()

    def _load(self) -> None:
        for name in self.modules:
            try:
                importlib.import_module(name)
            except Exception:  # imported again where it is used, which reports it
                return

    def join(self) -> None:
        if self.thread is not None:
            self.thread.join()


def _write_with_report(result, scenario, out: Path, figures: bool, drawing) -> None:
    """Results first (so a plotting problem loses nothing), then figures and the report.

    ``drawing()`` returns the command's figure writer and report builder; it is called only when
    figures are asked for, so that a run without them imports no plotting.
    """
    result.write(out)
    if figures:
        from thermoelec.output.report import write_report
        from thermoelec.scenario.parameters import resolved_parameters

        write_figures, build_report = drawing()
        pngs = {p.stem: p.read_bytes() for p in write_figures(result, out) if p.suffix == ".png"}
        write_report(build_report(result, scenario.raw, scenario.spec.scenario.description, pngs,
                                  resolved_parameters(scenario)), out)


def _run_drawing():
    """The figure writer and the report builder of ``run``."""
    from thermoelec.output.figures import write_figures
    from thermoelec.output.report import run_report

    return write_figures, run_report


def _capability_drawing():
    """The heat maps and the report builder of ``capability``."""
    from thermoelec.output.capability_figures import write_capability_figures
    from thermoelec.output.report import capability_report

    return write_capability_figures, capability_report


def _run(args: argparse.Namespace) -> int:
    from thermoelec.analysis.estimates import check_run
    from thermoelec.api import simulate

    out = check_output_path(args.out)
    scenario = _load(args, {"solver.backend": args.backend} if args.backend else None)
    check_run(scenario)
    with hold(out, args.command_line) as folder:
        _notes(folder)
        with _progress(f"simulating {scenario.name}", not args.quiet):
            result = simulate(scenario)
        try:
            with _progress("writing results and figures", not args.quiet), folder.transaction() as stage:
                _write_with_report(result, scenario, stage, not args.no_figures, _run_drawing)
        except OSError as exc:
            print(f"thermoelec: cannot write results to {out}: {exc.strerror or exc}", file=sys.stderr)
            return EXIT_FAILURE
    if not args.quiet:
        print(f"results in {out}/", file=sys.stdout)
        print_summary(result.summary, sys.stdout)
    if result.status != "ok":
        print(f"thermoelec: the solver failed: {result.message} (results up to the failure are in {out}/)",
              file=sys.stderr)
        return EXIT_FAILURE
    return EXIT_OK


def _cases(tokens: list[list[str]]) -> list[tuple[str, dict]]:
    cases = []
    for group in tokens:
        name, pairs = group[0], group[1:]
        if "=" in name:
            raise ScenarioError("--case", name, "give the case name first: --case NAME KEY=VALUE ...")
        if not pairs:
            raise ScenarioError("--case", name, "give at least one KEY=VALUE after the case name")
        cases.append((name, _overrides(pairs)))
    return cases


def _compare(args: argparse.Namespace) -> int:
    from thermoelec.analysis.compare import case_list, case_scenarios, run_cases
    from thermoelec.analysis.estimates import check_compare

    out = check_output_path(args.out)
    scenario = _load(args)
    cases = case_list(scenario, _cases(args.case or []), args.options)
    variants = case_scenarios(scenario, cases)  # every case validated before any is computed
    check_compare(scenario, variants, [name for name, _ in cases])
    with hold(out, args.command_line) as folder:
        _notes(folder)
        with _progress(f"simulating {len(cases)} cases of {scenario.name}", not args.quiet):
            outcomes = run_cases(scenario, cases, variants)
        try:
            with _progress("writing results and figures", not args.quiet), folder.transaction() as stage:
                _write_comparison(outcomes, scenario, stage, not args.no_figures)
        except OSError as exc:
            print(f"thermoelec: cannot write results to {out}: {exc.strerror or exc}", file=sys.stderr)
            return EXIT_FAILURE
    if not args.quiet:
        _print_comparison(scenario.name, outcomes, out)
    failed = [o.name for o in outcomes if o.result.status != "ok"]
    if failed:
        print(f"thermoelec: the solver failed for case(s) {', '.join(failed)} (their results up to the failure "
              f"are in {out}/cases/)", file=sys.stderr)
        return EXIT_FAILURE
    return EXIT_OK


def _write_comparison(outcomes, scenario, out: Path, figures: bool) -> None:
    from thermoelec.analysis.compare import write_comparison

    write_comparison(outcomes, out)
    if figures:
        from thermoelec.output.figures import write_comparison_figure
        from thermoelec.output.report import comparison_report, write_report
        from thermoelec.scenario.parameters import resolved_parameters

        write_comparison_figure({o.name: o.result for o in outcomes}, out)
        write_report(comparison_report(outcomes, scenario.raw, scenario.name, scenario.spec.scenario.description,
                                       resolved_parameters(scenario)), out)


def _print_comparison(name: str, outcomes, out: Path) -> None:
    """The comparison table, each case's stop, notes and warnings, and the verdicts last."""
    from thermoelec.output.tables import format_comparison, verdict_line

    print(f"comparison in {out}/")
    print(f"scenario: {name}")
    print(format_comparison(outcomes))
    for outcome in outcomes:
        summary = outcome.result.summary
        if summary.get("stop_explanation"):
            print(f"  {outcome.name}: {summary['stop_explanation']}")
        for note in summary.get("notes", []):
            print(f"  note ({outcome.name}): {note}")
        for warning in outcome.result.warnings:
            print(f"  warning ({outcome.name}): {warning}")
    for outcome in outcomes:
        print(f"{outcome.name}: {verdict_line(outcome.result.summary)}")


def _quantity_option(text: str, unit: str, option: str, positive: bool = False) -> float:
    """A command-line quantity (``'68 g'``, ``'-10 degC'``, a bare number in ``unit``) in SI."""
    si = {"degC": "K"}.get(unit, unit)
    try:
        value = to_si(parse_value(text), unit, si)
    except ValueError as exc:
        raise ScenarioError(option, text, str(exc)) from None
    if positive and not value > 0:
        raise ScenarioError(option, text, "must be > 0")
    if si == "K" and not value > 0:
        raise ScenarioError(option, text, "is at or below absolute zero")
    return value


def _fit(args: argparse.Namespace) -> int:
    from thermoelec.fit import jobs as fit
    from thermoelec.fit.logs import read_mapping

    out = _fit_output(args.out)
    columns = {}
    for pair in args.column or []:
        key, sep, value = pair.partition("=")
        if not sep:
            raise ScenarioError("--column", pair, "expected QUANTITY=COLUMN, for example current=Current(A)")
        columns[key.strip()] = value.strip()
    mapping = read_mapping(args.mapping, columns, args.charge_positive)

    with _progress(f"fitting {args.kind}", not args.quiet):
        outcome = _fit_outcome(args, fit, mapping)
    outcome.check()  # nonsense refused (exit 2), the doubtful warned of; never a file the loader rejects
    with hold(out.parent, args.command_line, manifest=False) as folder:  # shared with other fits' files
        _notes(folder)
        try:
            with folder.transaction() as stage:
                written = [out.parent / path.name for path in outcome.write(stage / out.name)]
        except OSError as exc:
            print(f"thermoelec: cannot write {args.out}: {exc.strerror or exc}", file=sys.stderr)
            return EXIT_FAILURE
    for warning in outcome.warnings:
        print(f"thermoelec: warning: {warning}", file=sys.stderr)
    if not args.quiet:
        width = max(len(name) for name, _, _ in outcome.parameters)
        for name, value, interval in outcome.parameters:
            print(f"  {name:<{width}}  {value}  {interval}")
        for note in outcome.notes:
            if note.removeprefix("warning: ") not in outcome.warnings:  # those went to stderr already
                print(f"  note: {note}")
        print("wrote " + ", ".join(str(path) for path in written))
    return EXIT_OK


def _fit_output(text: str) -> Path:
    """The cell file ``fit`` writes: a file name in a folder that can be written."""
    if not str(text).strip():
        raise ScenarioError("--out", "", "the cell file's name is empty")
    out = Path(text)
    if out.is_dir() or str(text).endswith(("/", os.sep)):
        raise ScenarioError("--out", str(text), "is a folder: give the cell file to write, e.g. out/cell.toml")
    check_output_path(out.parent)
    return out


def _fit_outcome(args: argparse.Namespace, fit, mapping):
    """The fit job of ``args.kind`` on the logs."""
    if args.kind == "ocv":
        return fit.fit_ocv_logs(args.logs, mapping, args.points, args.cell)
    if args.kind == "pulse":
        if not args.cell:
            raise ScenarioError("fit pulse", "--cell", "give the cell file with the capacity and OCV "
                                "(from thermoelec fit ocv)")
        temps = None if not args.temperature else [_quantity_option(t, "degC", "--temperature")
                                                     for t in args.temperature]
        return fit.fit_pulse_logs(args.logs, mapping, args.cell, args.rc, temps, args.arrhenius)
    if len(args.logs) != 1:
        raise ScenarioError("fit thermal", "LOG", "give one heating-and-cooling log")
    ambient = None if args.ambient is None else _quantity_option(args.ambient, "degC", "--ambient")
    mass = None if args.mass is None else _quantity_option(args.mass, "kg", "--mass", positive=True)
    return fit.fit_thermal_log(args.logs[0], mapping, args.cell, ambient, mass)


def _search(args: argparse.Namespace, scenario, out: Path) -> int:
    """``sweep --find``: the design search, written as a unit into ``out``."""
    from thermoelec.analysis import sweep

    criterion = sweep.parse_criterion(args.find)
    if not args.over or not args.between:
        raise ScenarioError("--find", args.find, "give --over KEY and --between LOW HIGH")
    bounds = []
    for text in args.between:
        value = parse_value(text)
        parts = str(value).split(None, 1) if isinstance(value, str) else [value]
        try:
            bounds.append((float(parts[0]), parts[1] if len(parts) > 1 else ""))
        except ValueError:
            raise ScenarioError("--between", text, "expected a quantity such as '0.2 W/K'") from None
    (low, unit), (high, unit_high) = bounds
    if unit != unit_high or not low < high:
        raise ScenarioError("--between", " ".join(args.between), "LOW < HIGH in the same unit")
    try:
        to_si(f"{low} {unit}".strip(), unit or "", unit or "")
    except ValueError as exc:
        raise ScenarioError("--between", args.between[0], str(exc)) from None
    plan = _plan(sweep, scenario, args) if (scenario.spec.sweep or args.sweep or scenario.spec.option
                                            or args.samples is not None) else None
    for bound in (low, high):  # the key must exist and take both ends
        scenario.with_overrides({args.over: f"{bound} {unit}".strip() if unit else bound}, origin="--between")
    with hold(out, args.command_line) as folder:
        _notes(folder)
        found = sweep.design_search(scenario, plan, args.over, low, high, unit, criterion, args.greatest,
                                    args.tolerance, args.workers)
        with folder.transaction() as stage:
            found.to_netcdf(stage / "search.nc")
            if not args.no_figures:
                from thermoelec.output.sweep_figures import write_search_figure

                write_search_figure(found, stage)
    if not args.quiet:
        _print_search(found)
        print(f"search results in {out}/")
    return EXIT_OK


def _sweep(args: argparse.Namespace) -> int:
    from thermoelec.analysis import sweep
    from thermoelec.analysis.estimates import check_sweep

    out = check_output_path(args.out)
    scenario = _load(args)
    if args.find:
        return _search(args, scenario, out)
    plan = _plan(sweep, scenario, args, check=False)
    requirement = _requirement(scenario, args)
    if requirement is not None:
        from thermoelec.analysis.sweep.review import with_requirement_point

        plan = with_requirement_point(plan, requirement, "--require" if args.require else scenario.source)
    keep = None if args.keep_series is None else _quantity_option(args.keep_series, "s", "--keep-series",
                                                                   positive=True)
    check_sweep(scenario, plan.size, sweep.check_values(scenario, plan), keep, args.engine == "solo",
                args.workers or os.cpu_count() or 1)
    if not args.quiet:
        dims = " x ".join(f"{d.name} ({d.size})" for d in plan.dims)
        print(f"sweep of {scenario.name}: {plan.size} scenarios over {dims}")
    with hold(out, args.command_line) as folder:
        _notes(folder)
        if args.resume and not args.force and not sweep.Checkpoints(out / "chunks").finished():
            print(f"thermoelec: note: no finished chunks in {out}/chunks/: the sweep starts from the beginning",
                  file=sys.stderr)
        # the xarray Dataset only for what works on one: figures, a review, an uncertainty analysis
        # (building one imports xarray and pandas: half a second of start-up)
        wanted = not args.no_figures or plan.sampling is not None or bool(plan.option_dims)
        ahead = _ImportsAhead((("xarray",) if wanted else ()) +
                              (() if args.no_figures else ("thermoelec.output.sweep_figures",)))
        try:
            rows = sweep.run_sweep(scenario, plan, out, args.workers, args.scheduler, args.resume, args.chunk_size,
                                   progress=not args.quiet, keep_interval=keep, engine=args.engine,
                                   force=args.force, meanwhile=ahead.start)
        except Interrupted as exc:
            _resume_hint(exc, out, args.command_line)
            raise
        ahead.join()  # the maps' forked child must find no import half done
        results = sweep.sweep_data(scenario, plan, rows)
        ds = results.dataset() if wanted else None
        with folder.transaction() as stage:
            sweep.write_sweep(results, stage)
            if not args.no_figures:
                from thermoelec.output.sweep_figures import write_sweep_figures

                with _progress("drawing the sweep's maps", not args.quiet):
                    # the second map in a forked process where there is a second core (the pool is done)
                    write_sweep_figures(ds, stage, parallel=(args.workers or os.cpu_count() or 1) > 1)
            if keep is not None:
                sweep.write_series(plan, rows, stage)
            answer: list[str] = []
            if plan.sampling is not None:
                answer = _uncertainty(scenario, plan, ds, args, stage, out)
            elif plan.option_dims:
                answer = _review(scenario, plan, ds, requirement, args, stage, out)
        sweep.Checkpoints(out / "chunks").discard()  # the dataset holds them now
    if not args.quiet:
        passed = results.passed()
        print(f"{passed} of {plan.size} pass; {results.attrs['failed']} failed to solve or were invalid; "
              f"results in {out}/sweep.nc and {out}/sweep.csv")
        for line in answer:
            print(line)
    return EXIT_OK


def _resume_hint(exc: Interrupted, out: Path, command_line: str) -> None:
    """How to go on after an interrupted sweep: what is kept, the command that resumes it."""
    from thermoelec.analysis import sweep

    kept = sweep.Checkpoints(out / "chunks").finished()
    argv = [a for a in shlex.split(command_line)[1:] if a not in ("--resume", "--force")]
    print(f"\nthermoelec: {exc.name}: {kept} finished scenarios are kept in {out}/chunks/; resume with:\n  "
          f"{shlex.join(['thermoelec', *argv, '--resume'])}", file=sys.stderr)


def _uncertainty(scenario, plan, ds, args: argparse.Namespace, stage: Path, out: Path) -> list[str]:
    """The statistics of a sampled sweep written into ``stage`` (uncertainty.nc / .csv, figures,
    uncertainty_report.html); returns the lines that summarise them."""
    import numpy as np

    from thermoelec.analysis.sweep.uncertainty import uncertainty_dataset, write_uncertainty
    from thermoelec.output.uncertainty import write_uncertainty_outputs
    from thermoelec.physics.constants import ZERO_CELSIUS

    with _progress("computing the statistics", not args.quiet):
        u = uncertainty_dataset(plan, ds)
        write_uncertainty(u, stage)
        spec = scenario.spec
        limits = {"cell_temperature_max_degC": spec.limits.cell_temperature_max - ZERO_CELSIUS,
                  "cell_voltage_min_V": spec.cell.voltage_min}
        write_uncertainty_outputs(u, ds, stage, limits, scenario.name, spec.scenario.description,
                                  figures=not args.no_figures)
    overall = u["pass_probability"].sel(check="overall")
    low, high = u["pass_probability_low"].sel(check="overall"), u["pass_probability_high"].sel(check="overall")
    worst = np.unravel_index(int(np.argmin(overall.values)), overall.shape) if overall.ndim else ()
    at = dict(zip(overall.dims, worst, strict=True))
    p95 = u["cell_temperature_max_degC"].sel(percentile=95.0).isel(at)
    return [f"{u.attrs['samples_per_point']} samples per point ({u.attrs['sampling']}, seed {u.attrs['seed']}); "
            f"least likely to pass: {float(overall.isel(at)):.4f} (95 % interval {float(low.isel(at)):.4f}.."
            f"{float(high.isel(at)):.4f}), P95 of the peak cell temperature there {float(p95):.4g} degC",
            f"statistics in {out}/uncertainty.nc, {out}/uncertainty.csv and {out}/uncertainty_report.html"]


def _requirement(scenario, args: argparse.Namespace):
    """The design review's requirement: --require, else [review] requirement, else None."""
    from thermoelec.analysis.sweep.review import parse_requirement

    review = scenario.spec.review
    if args.require:
        return parse_requirement(args.require, "--require")
    if review is not None and review.requirement:
        return parse_requirement(review.requirement, f"{scenario.source}: review.requirement")
    return None


def _review(scenario, plan, ds, requirement, args: argparse.Namespace, stage: Path, out: Path) -> list[str]:
    """The design review of a sweep over options written into ``stage`` (review.nc, review.csv, figures,
    design_report.html); returns the lines of the answer."""
    from thermoelec.analysis.sweep.review import design_review, review_table, write_review
    from thermoelec.output.review import write_review_outputs

    spec = scenario.spec.review
    group = spec.group if spec else None
    over = spec.over if spec else "thermal.ambient_temperature"
    rank_by = args.rank_by or (spec.rank_by if spec else None)
    refine = args.refine or (spec.refine if spec else False)
    with _progress("reviewing the options", not args.quiet):
        review = design_review(scenario, plan, ds, requirement, group, over, rank_by, refine, args.tolerance)
        write_review(review, stage)
        write_review_outputs(review, ds, stage, scenario.name, scenario.spec.scenario.description,
                             figures=not args.no_figures)
    table = review_table(review).drop(columns=[c for c in ("hardest_case", "highest_passing_message",
                                                           "refined_message") if c in review])
    return [table.to_string(index=False), review.attrs["statement"],
            f"design review in {out}/review.csv, {out}/review.nc and {out}/design_report.html"]


def _plan(sweep, scenario, args: argparse.Namespace, check: bool = True):
    """The sweep's plan from the scenario and the sweep command's options."""
    options = None if args.options is None else [] if args.options.strip() == "none" else \
        [g.strip() for g in args.options.split(",") if g.strip()]
    percentiles = None
    if args.percentiles is not None:
        try:
            percentiles = [float(p) for p in args.percentiles.split(",") if p.strip()]
        except ValueError:
            raise ScenarioError("--percentiles", args.percentiles, "expected numbers within 0..100, "
                                "e.g. 1,99") from None
    return sweep.plan_sweep(scenario, args.sweep or [], samples=args.samples, seed=args.seed,
                            method=args.sampling, options=options, percentiles=percentiles, check=check)


def _print_search(found) -> None:
    """The found value for every combination of the other keys, with its status in words."""
    name = next(v for v in found.data_vars if v.startswith(("least_", "greatest_")))
    unit = found[name].attrs.get("units", "")
    frame = found.to_dataframe().reset_index()
    for _, row in frame.iterrows():
        where = ", ".join(f"{k} = {row[k]:g} {found[k].attrs.get('units', '')}".rstrip()
                          if isinstance(row[k], float) else f"{k} = {row[k]}"
                          for k in found[name].dims if k != "case") or "the scenario"
        status = row["status"]
        value = f"{row[name]:.6g} {unit}".strip()
        said = {"ok": value, "at_bound": row["message"], "not_met": "not met in range"}.get(status, row["message"])
        print(f"  {where}: {said}")


def _axis(text: str | None, unit: str, option: str, default, low: float | None = None,
          high: float | None = None, positive: bool = False):
    """A capability grid's axis from a comma-separated list of quantities (each checked, each > 0 where
    ``positive``), or its default [SI]."""
    import numpy as np

    if text is None:
        return np.asarray(default, float)
    items = [item.strip() for item in str(text).split(",")]
    if not any(items):
        raise ScenarioError(option, str(text), "the list is empty: give at least one value")
    if not all(items):
        raise ScenarioError(option, str(text), "an item of the list is empty")
    values = [_quantity_option(item, unit, option, positive=positive) for item in items]
    for item, value in zip(items, values, strict=True):
        if (low is not None and value < low) or (high is not None and value > high):
            raise ScenarioError(option, item, f"must lie within {low:g}..{high:g}")
    if len(set(values)) < len(values):
        raise ScenarioError(option, str(text), "a value is given twice")
    return np.sort(np.asarray(values, float))


def _capability_grid(args: argparse.Namespace, problem):
    """The grid of ``capability``: the options' axes where given, the cell's defaults elsewhere (all checked)."""
    from thermoelec.analysis.capability import DEFAULT_PULSES, CapabilityGrid, default_grid

    grid = default_grid(problem)
    durations = _axis(args.pulse, "s", "--pulse", DEFAULT_PULSES, positive=True)
    temperatures = _axis(args.temperature, "degC", "--temperature", grid.temperatures)
    socs = _axis(args.soc, "", "--soc", grid.socs, low=0.0, high=1.0)
    return CapabilityGrid(durations, temperatures, socs)


def _capability(args: argparse.Namespace) -> int:
    from thermoelec.analysis.capability import capability
    from thermoelec.analysis.estimates import check_capability
    from thermoelec.engine.pulse import PULSE_KINDS

    out = check_output_path(args.out)
    scenario = _load(args)
    # the profile is not used: a rest stands in for it (a long mission's segments are not built)
    problem = scenario.with_overrides({"profile": {"segment": [{"mode": "rest", "duration": "1 s"}]}},
                                      origin="capability").problem()
    grid = _capability_grid(args, problem)
    check_capability(scenario, grid.size * len(PULSE_KINDS), float(grid.durations.max()))
    with hold(out, args.command_line) as folder:
        _notes(folder)
        with _progress(f"solving {grid.size * len(PULSE_KINDS)} capabilities of {scenario.name}", not args.quiet):
            result = capability(problem, grid, scenario.solver_options(),
                                {"scenario_file": scenario.source, "scenario_sha256": scenario.digest})
        try:
            with _progress("writing results and figures", not args.quiet), folder.transaction() as stage:
                _write_with_report(result, scenario, stage, not args.no_figures, _capability_drawing)
        except OSError as exc:
            print(f"thermoelec: cannot write results to {out}: {exc.strerror or exc}", file=sys.stderr)
            return EXIT_FAILURE
    if not args.quiet:
        _print_capability(result, out)
    return EXIT_OK


def _print_capability(result, out: Path) -> None:
    """Each duration's four capabilities at the state nearest 25 degC and SoC 0.5, with the limits that bind."""
    import numpy as np

    from thermoelec.engine.pulse import PULSE_KINDS
    from thermoelec.output.tables import format_value
    from thermoelec.physics.constants import ZERO_CELSIUS

    g = result.grid
    ti = int(np.argmin(np.abs(g.temperatures - ZERO_CELSIUS - 25.0)))
    zi = int(np.argmin(np.abs(g.socs - 0.5)))
    print(f"capability of {result.metadata.get('scenario', '')} in {out}/ ({g.size} entries: "
          f"{len(g.durations)} durations x {len(g.temperatures)} temperatures x {len(g.socs)} SoC)")
    print(f"at {g.temperatures[ti] - ZERO_CELSIUS:g} degC, SoC {g.socs[zi]:g} (the limit that binds):")
    for d, duration in enumerate(g.durations):
        cells = [f"{kind.name.replace('_', ' ')} {format_value(float(result.values[kind.name][d, ti, zi]), kind.unit)}"
                 f" ({result.binding[kind.name][d, ti, zi]})" for kind in PULSE_KINDS]
        print(f"  {duration:g} s: " + ", ".join(cells))


def _check(args: argparse.Namespace) -> int:
    from thermoelec.analysis.demand import profile_demand
    from thermoelec.analysis.estimates import check_run
    from thermoelec.scenario.parameters import resolved_parameters

    scenario = _load(args)
    check_run(scenario)  # what run would refuse, check refuses (before building a billion segments)
    problem = scenario.problem()  # reads the profile files: a bad CSV is reported as run reports it
    if args.quiet:
        return EXIT_OK
    rows = resolved_parameters(scenario, problem)
    width = max(len(p.key) for p in rows)
    print(f"{args.scenario}: valid scenario {scenario.name!r}")
    print("parameters (value in the key's unit; source: given, override or default):")
    shown = [(p, f"{p.value if len(p.value) <= 70 else p.value[:67] + '...'} {p.unit}".rstrip()) for p in rows]
    value_width = max(len(text) for _, text in shown)
    for p, text in shown:
        print(f"  {p.key:<{width}}  {text:<{value_width}}  [{p.source}]")
    _print_demand(profile_demand(problem))
    for note in problem.notes:
        print(f"note: {note}")
    return EXIT_OK


def _print_demand(d: dict) -> None:
    from thermoelec.output.tables import format_value

    print("profile:")
    lines = [
        ("segments", d["segments"], ""), ("duration", d["duration_s"], "s"), ("soak before it", d["soak_s"], "s"),
        ("energy demanded, discharge", d["energy_discharge_Wh"], "Wh"),
        ("energy demanded, charge and regeneration", d["energy_charge_Wh"], "Wh"),
        ("pack energy at the initial OCV", d["capacity_Wh"], "Wh"),
        ("charge demanded, discharge", d["charge_discharge_Ah"], "Ah"),
        ("charge demanded, charge", d["charge_charge_Ah"], "Ah"),
        ("peak power demanded", d["power_peak_W"], "W"), ("peak regeneration", d["power_regeneration_peak_W"], "W"),
        ("peak C-rate, discharge (per cell)", d["c_rate_discharge_peak"], ""),
        ("peak C-rate, charge (per cell)", d["c_rate_charge_peak"], ""),
        ("time whose demand depends on the run", d["run_dependent_s"], "s"),
    ]
    width = max(len(label) for label, _, _ in lines)
    for label, value, unit in lines:
        print(f"  {label:<{width}}  {format_value(float(value) if isinstance(value, float) else value, unit)}")
    if d["estimated"]:
        print(f"  estimated at the initial open-circuit voltage ({d['initial_ocv_V']:.4g} V): "
              + ", ".join(d["estimated"]))


def _new(args: argparse.Namespace) -> int:
    from thermoelec.scenario.template import TEMPLATE

    path = Path(args.file)
    if path.exists() and not args.force:
        raise ScenarioError(str(path), "", "the file exists; give another name or --force to overwrite it")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_text_atomic(path, TEMPLATE)
    except OSError as exc:
        print(f"thermoelec: cannot write {path}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_FAILURE
    print(f"wrote {path}: edit it, then thermoelec check {path}")
    return EXIT_OK


def _at_least(low: int):
    """An argparse type: a whole number >= ``low`` (``4e7`` accepted for 40000000)."""
    def parse(text: str) -> int:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if not value.is_integer() or value < low:
            raise argparse.ArgumentTypeError(f"{text!r}: expected a whole number >= {low}")
        return int(value)

    parse.__name__ = f"whole number >= {low}"
    return parse


_positive_int = _at_least(1)


def _fraction(text: str) -> float:
    """An argparse type: a number strictly between 0 and 1."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0.0 < value < 1.0:
        raise argparse.ArgumentTypeError(f"{text!r}: expected a fraction of the range, between 0 and 1")
    return value


def _memory(text: str) -> float:
    """An argparse type: a memory size (``'8 GB'``, ``'512 MiB'``, a bare number in GB) [B]."""
    try:
        value = to_si(parse_value(text), "GB", "B")
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None
    if not value > 0:
        raise argparse.ArgumentTypeError(f"{text!r}: expected a size > 0, e.g. '8 GB'")
    return value


def _budget_options(parser: argparse.ArgumentParser, scenarios: bool = False) -> None:
    """The options that raise a command's budgets (:class:`thermoelec.inputs.budgets.Budgets`)."""
    group = parser.add_argument_group("budgets", "refuse work that would exceed these, before starting")
    group.add_argument("--max-rows", type=_positive_int, default=DEFAULT_BUDGETS.rows, metavar="N",
                       help=f"output rows of one run, rows of one CSV file (default {DEFAULT_BUDGETS.rows:.3g})")
    group.add_argument("--max-memory", type=_memory, default=DEFAULT_BUDGETS.memory, metavar="SIZE",
                       help=f"estimated peak memory (default {DEFAULT_BUDGETS.memory / 1e9:g} GB)")
    if scenarios:
        group.add_argument("--max-scenarios", type=_positive_int, default=DEFAULT_BUDGETS.scenarios, metavar="N",
                           help=f"scenarios of a sweep (default {DEFAULT_BUDGETS.scenarios:.3g})")


def _add_fit_parsers(sub) -> None:
    """``fit ocv``, ``fit pulse`` and ``fit thermal``, each with its own help and options."""
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--out", required=True, help="cell file to write (TOML); the report goes beside it")
    common.add_argument("--mapping", help="TOML file mapping the log's columns, units and sign")
    common.add_argument("--column", action="append", metavar="QUANTITY=COLUMN",
                        help="column name of a quantity (time, current, voltage, temperature, ambient, "
                             "sink_temperature, power)")
    common.add_argument("--charge-positive", action="store_true", help="the logs count charge current as positive")
    common.add_argument("--quiet", action="store_true", help="print nothing")
    _budget_options(common)
    fitting = sub.add_parser("fit", help="fit cell or thermal parameters to test logs and write a cell file",
                             description="Fit cell or thermal parameters to test logs; each kind writes a cell "
                                         "file and a report beside it. 'thermoelec fit KIND --help' for each.")
    kinds = fitting.add_subparsers(dest="kind", required=True, metavar="{ocv,pulse,thermal}")
    ocv = kinds.add_parser("ocv", parents=[common], help="OCV and capacity from a slow discharge and charge",
                           description="OCV and capacity from a slow (C/20 or slower) full discharge and full "
                                       "charge, in that order: writes cell.capacity and [cell.ocv].")
    ocv.add_argument("logs", nargs="+", metavar="LOG", help="the slow discharge log, then the slow charge log")
    ocv.add_argument("--points", type=_at_least(2), default=21, help="SoC points of the OCV table (default 21, >= 2)")
    ocv.add_argument("--cell", help="a cell file with the resistances, to turn the half-gap into a hysteresis")
    pulse = kinds.add_parser("pulse", parents=[common], help="R0 and RC pairs from pulse-test logs",
                             description="R0 and RC pairs over SoC and temperature from pulse (HPPC-style) logs, "
                                         "one per temperature: writes [cell.r0] and [[cell.rc]].")
    pulse.add_argument("logs", nargs="+", metavar="LOG", help="pulse-test logs, one per temperature")
    pulse.add_argument("--cell", help="the cell file with the capacity and OCV (thermoelec fit ocv); required")
    pulse.add_argument("--rc", type=int, choices=(1, 2), default=1, help="RC pairs to fit (default 1)")
    pulse.add_argument("--temperature", nargs="+", help="test temperature of each log, if not in the logs")
    pulse.add_argument("--arrhenius", action="store_true",
                       help="write R0 as a table over SoC with an activation energy instead of a 2-D table")
    thermal = kinds.add_parser("thermal", parents=[common], help="heat capacity and conductances from a heater test",
                               description="Heat capacity and conductance(s) from one heating-and-cooling log "
                                           "(a two-node rig with a sink temperature column): writes "
                                           "cell.specific_heat when the mass is known.")
    thermal.add_argument("logs", nargs="+", metavar="LOG", help="the heating-and-cooling log (one)")
    thermal.add_argument("--cell", help="a cell file to extend (its mass gives the specific heat)")
    thermal.add_argument("--ambient", help="ambient temperature, if not in the log, e.g. '22 degC'")
    thermal.add_argument("--mass", help="cell mass (> 0), for the specific heat, e.g. '68 g'")
    for kind in (ocv, pulse, thermal):
        kind.set_defaults(handler=_fit, points=21, rc=1, temperature=None, arrhenius=False, ambient=None, mass=None)


def _add_run_parsers(sub) -> None:
    run = sub.add_parser("run", help="simulate one scenario and write its results",
                         description="Simulate one scenario: summary.json (with the verdict), the time series, "
                                     "figures and report.html in --out; the summary ends with the verdict.")
    run.add_argument("scenario", help="scenario file (TOML)")
    run.add_argument("--out", required=True, help="output folder (created if missing)")
    run.add_argument("--set", action="append", metavar="KEY=VALUE",
                     help="override a scenario value by dotted path, e.g. thermal.ambient_temperature='-20 degC'")
    run.add_argument("--backend", choices=("cvode", "scipy"), help="solver back end (overrides [solver])")
    run.add_argument("--quiet", action="store_true", help="print no summary and no progress")
    run.add_argument("--no-figures", action="store_true", help="write no figures and no report (faster)")
    _budget_options(run)
    run.set_defaults(handler=_run)
    compare = sub.add_parser("compare", help="run the scenario's [[case]] variants side by side",
                             description="Run the scenario's [[case]] variants (and --case ones) side by side: "
                                         "comparison.csv / .json with each case's verdict, its runs in cases/, "
                                         "figures and report.html.")
    compare.add_argument("scenario", help="scenario file (TOML)")
    compare.add_argument("--out", required=True, help="output folder (created if missing)")
    compare.add_argument("--case", action="append", nargs="+", metavar="NAME KEY=VALUE",
                         help="an extra case: its name, then dotted-path overrides; may repeat")
    compare.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a value in every case")
    compare.add_argument("--options", metavar="GROUP", help="compare the options of an option group "
                         "([[option.GROUP]]) instead of the [[case]] tables")
    compare.add_argument("--quiet", action="store_true", help="print no table and no progress")
    compare.add_argument("--no-figures", action="store_true", help="write no figures and no report (faster)")
    _budget_options(compare)
    compare.set_defaults(handler=_compare)
    check = sub.add_parser("check", help="validate a scenario without running it",
                           description="Validate a scenario (and the CSV files it names) without running it; "
                                       "print every parameter with its unit and whether it was given or "
                                       "defaulted, and the profile's duration, energy demand, peak power and "
                                       "C-rates. Exit 2 with the message run would give when it is invalid.")
    check.add_argument("scenario", help="scenario file (TOML)")
    check.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a value by dotted path")
    check.add_argument("--quiet", action="store_true", help="print nothing: the exit status says it")
    _budget_options(check)
    check.set_defaults(handler=_check)
    new = sub.add_parser("new", help="write a commented template scenario",
                         description="Write a commented template scenario (every required key, the common "
                                     "optional ones, units in comments) to start a scenario of your own.")
    new.add_argument("file", help="the scenario file to write (TOML)")
    new.add_argument("--force", action="store_true", help="overwrite the file if it exists")
    new.set_defaults(handler=_new)


def _add_capability_parser(sub) -> None:
    cap = sub.add_parser("capability", help="pulse power and current capability over SoC x temperature",
                         description="The largest constant power and current the pack delivers and accepts for "
                                     "pulses of each duration, from rest at each SoC and temperature, inside every "
                                     "limit of [limits] and the voltage limits through the whole pulse (RC pairs "
                                     "and self-heating included); the limit that binds each. Writes capability.csv "
                                     "(tidy), capability.nc, a heat map per duration and report.html. The "
                                     "scenario's profile is not used.")
    cap.add_argument("scenario", help="scenario file (TOML)")
    cap.add_argument("--out", required=True, help="output folder (created if missing)")
    cap.add_argument("--pulse", metavar="DURATIONS", help="pulse durations, e.g. '2 s,10 s,30 s' (the default), "
                                                          "bare numbers in s, each > 0")
    cap.add_argument("--temperature", metavar="TEMPERATURES",
                     help="temperatures at the pulse start, e.g. '-20 degC,0 degC,25 degC' (bare numbers in degC; "
                          "default: the R0 and RC tables' temperatures, else -20, 0, 25, 45 degC)")
    cap.add_argument("--soc", metavar="SOCS", help="SoC at the pulse start, e.g. '0.2,0.5,0.8' (default: the OCV "
                                                   "table's points)")
    cap.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a scenario value by dotted path")
    cap.add_argument("--quiet", action="store_true", help="print no table and no progress")
    cap.add_argument("--no-figures", action="store_true", help="write no heat maps and no report (faster)")
    _budget_options(cap, scenarios=True)
    cap.set_defaults(handler=_capability)


def _add_sweep_parser(sub) -> None:
    sw = sub.add_parser("sweep", help="run every combination of swept keys, or search for the least cooling",
                        description="Run every combination of the swept keys ([sweep] or --sweep): sweep.nc and "
                                    "sweep.csv with each scenario's metrics and verdict, heat maps; or, with "
                                    "--find, search the least (greatest) value of one key meeting a criterion.")
    sw.add_argument("scenario", help="scenario file (TOML) with a [sweep] table, or use --sweep")
    sw.add_argument("--out", required=True, help="output folder (created if missing)")
    sw.add_argument("--sweep", action="append", metavar="KEY=V1,V2,...", help="a swept key (replaces [sweep]'s)")
    sw.add_argument("--set", action="append", metavar="KEY=VALUE", help="override a value in every scenario")
    sw.add_argument("--workers", type=_positive_int, help="local worker processes (default: the number of cores)")
    sw.add_argument("--scheduler", help="address of a dask.distributed scheduler to run the chunks on")
    sw.add_argument("--resume", action="store_true",
                    help="continue the sweep in --out: keep its finished chunks (refused if anything changed)")
    sw.add_argument("--force", action="store_true", help="discard the finished chunks in --out and start again")
    sw.add_argument("--chunk-size", type=_positive_int,
                    help="scenarios per task (default: a sixteenth of the plan, 16 to 256, whatever the workers)")
    sw.add_argument("--engine", choices=("batch", "solo"), default="batch",
                    help="batch: the batched Runge-Kutta solver where it applies (default); solo: every scenario "
                         "on its own back end")
    sw.add_argument("--keep-series", metavar="INTERVAL", nargs="?", const="10 s",
                    help="also keep each scenario's series, decimated to INTERVAL (default 10 s), in series.zarr")
    sw.add_argument("--find", metavar="CRITERION", help="design search, e.g. 'cell_temperature_max_degC <= 45'")
    sw.add_argument("--over", metavar="KEY", help="the key the search varies, e.g. thermal.sink_to_ambient")
    sw.add_argument("--between", nargs=2, metavar=("LOW", "HIGH"), help="its range, e.g. '0.1 W/K' '10 W/K'")
    sw.add_argument("--greatest", action="store_true", help="the greatest value meeting it (default: the least)")
    sw.add_argument("--tolerance", type=_fraction, default=1e-3, help="search tolerance, a fraction of the range")
    sw.add_argument("--options", metavar="GROUP,...", help="the option groups swept ([[option.GROUP]]; default: "
                    "every group of the scenario; 'none' for none)")
    sw.add_argument("--samples", type=int, help="samples of the keys with distributions (per combination of "
                    "the others)")
    sw.add_argument("--seed", type=int, help="seed of the sample design (default 0: reproducible)")
    sw.add_argument("--sampling", choices=("latin_hypercube", "sobol", "saltelli", "random"),
                    help="sample design (default latin_hypercube; saltelli adds Sobol' sensitivity indices)")
    sw.add_argument("--percentiles", metavar="P,...", help="percentiles reported besides 5, 50 and 95")
    sw.add_argument("--require", metavar="REQUIREMENT", help="the design review's requirement, e.g. "
                    "'temperature_margin_K >= 2 at thermal.ambient_temperature = 45 degC' (replaces [review]'s)")
    sw.add_argument("--rank-by", metavar="ATTRIBUTE", help="the option attribute that ranks the options meeting "
                    "the requirement, the least first (default: the group's first)")
    sw.add_argument("--refine", action="store_true", help="refine each option's highest passing value by the "
                    "design search")
    sw.add_argument("--no-figures", action="store_true", help="write no figures")
    sw.add_argument("--quiet", action="store_true", help="print nothing")
    _budget_options(sw, scenarios=True)
    sw.set_defaults(handler=_sweep)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``thermoelec`` command: every command with its own help."""
    parser = argparse.ArgumentParser(prog="thermoelec", description=__doc__,
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"thermoelec {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    _add_run_parsers(sub)
    _add_sweep_parser(sub)
    _add_capability_parser(sub)
    _add_fit_parsers(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point; returns the exit status."""
    parser = build_parser()
    argv = sys.argv[1:] if argv is None else list(argv)
    args = parser.parse_args(argv)
    args.command_line = shlex.join(["thermoelec", *argv])
    budgets = Budgets(*(getattr(args, f"max_{name}", getattr(DEFAULT_BUDGETS, name))
                        for name in ("rows", "memory", "scenarios")))
    try:
        with termination_signals(), using(budgets):
            return args.handler(args)
    except ScenarioError as exc:
        print(f"thermoelec: invalid input: {exc}", file=sys.stderr)
        return EXIT_INVALID
    except Interrupted as exc:
        print(f"thermoelec: interrupted by {exc.name} (outputs are put in place whole or not at all)", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("thermoelec: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into head or less that closed early: not an error
        sys.stderr.close()
        return EXIT_OK
    except Exception as exc:
        if os.environ.get("THERMOELEC_DEBUG"):
            raise
        print(f"thermoelec: internal error: {type(exc).__name__}: {exc} (set THERMOELEC_DEBUG=1 for a traceback)",
              file=sys.stderr)
        return EXIT_FAILURE


def console() -> None:
    """The ``thermoelec`` command: :func:`main`, then the process ends without tearing the interpreter down.

    Clearing every module and freeing every object one at a time took a third of a
    second after a 10 000-scenario sweep (0.27 s, median of 4 pairs), for nothing: the
    exit handlers run first (the unit memo is written; a sweep's workers are gone by
    then) and the output streams are flushed, so what the command wrote is all there.
    An exception :func:`main` does not handle ends the process as Python does.
    """
    code = main()
    atexit._run_exitfuncs()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a reader that went away, or closed (main says how it ended)
            pass
    os._exit(code)


if __name__ == "__main__":
    console()
