"""What a command will take, estimated before it starts, and refused when over its budget.

Owns :class:`RunEstimate` (a mission's duration, segments, output rows and
memory, from the validated scenario without building its problem: a
``repeat = 1000000000`` is refused in microseconds, not after an hour of
building segments), :func:`estimate_run` and the checks of each command against
the :class:`~thermoelec.inputs.budgets.Budgets` in force: :func:`check_run`,
:func:`check_compare`, :func:`check_sweep`. A refusal is a
:class:`~thermoelec.inputs.errors.ScenarioError` (exit 2) with the estimate and
the option that raises the budget. The estimates are upper bounds: a run that
stops on a limit writes fewer rows.

The memory figures were measured here (peak resident memory): ``run
--no-figures`` of the drone demo took 0.28 GB with 1 238 output rows and 1.21 GB
with 615 008, so about 1.5 kB a row over a base of 0.3 GB (the interpreter with
numpy, pandas, xarray and the integrator); the other constants say where theirs
came from. Imports from scenario/ and inputs/ only.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from thermoelec.inputs.budgets import Budgets, current, round_up
from thermoelec.inputs.errors import ScenarioError
from thermoelec.scenario import Scenario
from thermoelec.scenario.series import read_profile_csv

__all__ = ["BASE_MEMORY", "BYTES_PER_ROW", "BYTES_PER_SCENARIO", "BYTES_PER_SEGMENT", "RunEstimate",
           "check_compare", "check_run", "check_sweep", "estimate_run", "format_bytes"]

#: Memory of a command before its data: the interpreter and its libraries [B] (measured, see above).
BASE_MEMORY = 3.0e8
#: Peak memory per output row of a run: trajectory, series, CSV and NetCDF copies [B] (measured: 1.5 kB).
BYTES_PER_ROW = 1600.0
#: Memory per profile segment besides its rows: the CSV row read, the segment, its phase in the mission
#: plan [B] (measured: a 300 000-row CSV profile, 2.14 GB at the peak, 0.9 GB of it its rows: 3.1 kB).
BYTES_PER_SEGMENT = 3200.0
#: Memory per scenario of a sweep in its main process: the metrics row, its chunk file read back, the
#: dataset [B] (measured: 264 MB for 1 936 drone scenarios, 302 MB for 19 881: 2.1 kB each).
BYTES_PER_SCENARIO = 3000.0
#: Copies of the kept series a sweep holds at once while writing ``series.zarr`` [-].
SERIES_COPIES = 3


@dataclass(frozen=True)
class RunEstimate:
    """Upper bounds for one mission.

    Attributes
    ----------
    duration_s : float
        Soaks plus the profile times its repeats [s] (a CC-CV charge without a duration at its cap).
    segments : float
        Segments, CSV rows included, times the repeats [-].
    rows : float
        Output rows: the duration over the output interval, plus two per segment [-].
    memory : float
        Peak memory of running it alone [B].
    """

    duration_s: float
    segments: float
    rows: float
    memory: float

    def describe(self) -> str:
        """One line for a message: duration, segments, rows, memory."""
        return (f"{_duration(self.duration_s)} in {self.segments:.3g} segments, about {self.rows:.3g} output rows "
                f"and {format_bytes(self.memory)} of memory")


def format_bytes(value: float) -> str:
    """``3.9 GB``: a memory size with a decimal prefix.

    Parameters
    ----------
    value : float
        Bytes [B].

    Returns
    -------
    str
        Two or three significant figures and a unit.
    """
    for unit, size in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if value >= size:
            return f"{value / size:.3g} {unit}"
    return f"{value:.0f} B"


def _duration(seconds: float) -> str:
    if not math.isfinite(seconds):
        return "an unbounded time"
    for unit, size in (("days", 86400.0), ("h", 3600.0), ("min", 60.0)):
        if seconds >= 2 * size:
            return f"{seconds / size:.3g} {unit}"
    return f"{seconds:.3g} s"


def estimate_run(scenario: Scenario) -> RunEstimate:
    """Duration, segments, output rows and memory of a scenario's mission, from its validated tables.

    Parameters
    ----------
    scenario : Scenario
        A loaded scenario (its CSV profiles were read when it was validated).

    Returns
    -------
    RunEstimate
        The upper bounds [s, -, -, B].
    """
    spec = scenario.spec
    profile = spec.profile
    once, count, soak, soaks = 0.0, 0.0, 0.0, 0
    for i, seg in enumerate(profile.segment):
        if seg.file is not None:
            series = scenario.cache.read(read_profile_csv, scenario.base_dir / seg.file,
                                         f"profile.segment[{i + 1}].file")
            once += float(series.time[-1] - series.time[0])
            count += len(series.time) - 1
        elif seg.mode == "soak":
            soak += seg.duration
            soaks += 1
        else:
            once += seg.duration if seg.duration is not None else _cccv_cap(scenario, seg.current)
            count += 1
    duration = soak + profile.repeat * once
    segments = soaks + profile.repeat * count
    rows = duration / spec.solver.output_interval + 2.0 * segments + 2.0
    return RunEstimate(duration, segments, rows, BASE_MEMORY + rows * BYTES_PER_ROW + segments * BYTES_PER_SEGMENT)


def _cccv_cap(scenario: Scenario, current: float) -> float:
    """The engine's cap of a CC-CV charge without a duration: ten full charges at its CC rate [s]."""
    spec = scenario.spec
    per_cell = abs(current) * spec.profile.scale / spec.pack.parallel
    return 10.0 * spec.cell.capacity / max(per_cell, 1e-12)


def _refuse(scenario: Scenario, key: str, what: str, message: str) -> None:
    raise ScenarioError(scenario.source, key, f"{what} {message}")


def check_run(scenario: Scenario, budgets: Budgets | None = None, what: str = "the run") -> RunEstimate:
    """Refuse a mission whose rows or memory exceed the budgets (default: those in force).

    Parameters
    ----------
    scenario : Scenario
        The loaded scenario.
    budgets : Budgets, optional
        The limits; :func:`thermoelec.inputs.budgets.current` by default.
    what : str
        What runs, for the message (``"case 2 (cold start)"``).

    Returns
    -------
    RunEstimate
        The estimate, within the budgets.

    Raises
    ------
    ScenarioError
        With the estimate and the option that raises the budget.
    """
    budgets = budgets or current()
    estimate = estimate_run(scenario)
    if not estimate.rows <= budgets.rows:
        _refuse(scenario, "solver.output_interval", what,
                f"would take {estimate.describe()}, over the budget of {budgets.rows:.3g} rows: lengthen "
                f"solver.output_interval (or fewer repeats), or raise the budget with --max-rows "
                f"{round_up(estimate.rows)}")
    if not estimate.memory <= budgets.memory:
        _refuse(scenario, "solver.output_interval", what,
                f"would take {estimate.describe()}, over the budget of {format_bytes(budgets.memory)}: raise it "
                f"with --max-memory '{format_bytes(estimate.memory * 1.1)}'")
    return estimate


def check_compare(scenario: Scenario, cases: Sequence[Scenario], names: Sequence[str] | None = None,
                  budgets: Budgets | None = None) -> float:
    """Refuse a comparison whose cases together exceed the memory budget (each case also as a run).

    Each case counts twice: its mission and its energy-to-cutoff run, both kept for the figures.

    Parameters
    ----------
    scenario : Scenario
        The base scenario, for the message.
    cases : sequence of Scenario
        Every case, validated.
    names : sequence of str, optional
        Their names, for the messages.
    budgets : Budgets, optional
        The limits; those in force by default.

    Returns
    -------
    float
        The estimated peak memory [B].

    Raises
    ------
    ScenarioError
        With the estimate and the option that raises the budget.
    """
    budgets = budgets or current()
    total = BASE_MEMORY
    for i, case in enumerate(cases, start=1):
        estimate = check_run(case, budgets, f'case {i} "{names[i - 1]}"' if names else f"case {i}")
        total += 2.0 * (estimate.memory - BASE_MEMORY)
    if not total <= budgets.memory:
        _refuse(scenario, "case", f"the {len(cases)} cases", f"would take about {format_bytes(total)} of memory, "
                f"over the budget of {format_bytes(budgets.memory)}: raise it with --max-memory "
                f"'{format_bytes(total * 1.1)}'")
    return total


def check_sweep(scenario: Scenario, size: int, variants: Sequence[Scenario], keep_interval: float | None,
                solo: bool, workers: int, budgets: Budgets | None = None) -> float:
    """Refuse a sweep over its budgets: scenarios, rows of any scenario checked, memory of the whole.

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    size : int
        Scenarios in the plan [-].
    variants : sequence of Scenario
        Scenarios to check as runs (the base and each swept value on its own).
    keep_interval : float or None
        Interval of the kept series [s], if kept.
    solo : bool
        Whether the scenarios run solo (keeping their series in memory while they run).
    workers : int
        Processes running at once [-].
    budgets : Budgets, optional
        The limits; those in force by default.

    Returns
    -------
    float
        The estimated peak memory of the sweep [B].

    Raises
    ------
    ScenarioError
        With the estimate and the option that raises the budget.
    """
    budgets = budgets or current()
    if size > budgets.scenarios:
        _refuse(scenario, "sweep", "the sweep", f"has {size:.3g} scenarios, over the budget of "
                f"{budgets.scenarios:.3g}: sweep fewer values, or raise the budget with --max-scenarios "
                f"{round_up(size)}")
    runs = [check_run(v, budgets, "a scenario of the sweep") for v in variants]
    longest = max(runs, key=lambda r: r.rows)
    total = BASE_MEMORY + size * BYTES_PER_SCENARIO
    if keep_interval is not None:
        points = longest.duration_s / keep_interval + 1.0
        total += SERIES_COPIES * size * points * 8.0 * 7
    if solo or keep_interval is not None:
        total += workers * (longest.memory - BASE_MEMORY)
    if not total <= budgets.memory:
        _refuse(scenario, "sweep", "the sweep", f"of {size:.3g} scenarios would take about {format_bytes(total)} "
                f"of memory, over the budget of {format_bytes(budgets.memory)}"
                + (" (the kept series alone: a longer --keep-series interval takes less)" if keep_interval else "")
                + f": raise it with --max-memory '{format_bytes(total * 1.1)}'")
    return total
