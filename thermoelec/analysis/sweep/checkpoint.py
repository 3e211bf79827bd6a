"""A sweep's checkpoints: what it is (its identity) and which scenarios it has finished, in ``DIR/chunks/``.

Owns :func:`sweep_identity`, everything that changes an answer, each part by
name: the thermoelec version, the scenario file, every file it includes and
every data file any of its scenarios reads (profile and ambient CSV files of the
base and of every swept file name), by SHA-256 of their contents; the
overrides, the plan (mode, keys, values), the engine, the kept series' interval
and the solver settings. And :class:`Checkpoints`, the folder of finished
chunks: each chunk is one file ``rows_<start>_<stop>.json`` holding the rows of
scenarios ``start`` to ``stop - 1`` of the plan, written whole or not at all. A
resumed sweep reads them by scenario index, whatever chunk size or number of
workers wrote them, so any chunk size and any worker count resume to the same
dataset. ``--resume`` is refused, naming each part that changed, when the
identity differs; starting without ``--resume`` over finished chunks needs
``--force``. Imports from scenario/, inputs/ and analysis/ only.
"""

from __future__ import annotations

import hashlib
import json
import re
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from thermoelec.analysis.sweep.plan import SweepPlan
from thermoelec.analysis.transaction import write_text_atomic
from thermoelec.scenario import Scenario, ScenarioError
from thermoelec.scenario.loading import data_files, names_files
from thermoelec.version import __version__

__all__ = ["IDENTITY", "Checkpoints", "changed_parts", "sweep_identity"]

#: The identity file of the sweep whose chunks a folder holds.
IDENTITY = "identity.json"
_CHUNK = re.compile(r"^rows_(\d+)_(\d+)\.json$")


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    try:
        with path.open("rb") as handle:
            while block := handle.read(1 << 20):
                digest.update(block)
    except OSError as exc:
        return f"unreadable: {exc.strerror}"
    return digest.hexdigest()


def _file_variants(scenario: Scenario, plan: SweepPlan) -> list[Scenario]:
    """The base scenario, and one variant per value of each swept key that may name files (the other
    keys at their first value): between them they read every file any scenario of the plan reads."""
    variants = [scenario]
    first = plan.overrides(0)
    for axis in plan.axes:
        if not names_files(axis.path):
            continue
        for value in axis.values:
            try:
                variants.append(scenario.with_overrides({**first, axis.path: value}))
            except ScenarioError:
                continue  # recorded as invalid when the sweep reaches it; it reads no file
    for dim in plan.option_dims:  # an option may name files of its own
        for option in dim.group.options:
            if any(names_files(path) for path, _ in option.overrides):
                try:
                    variants.append(scenario.with_overrides({**first, **dict(option.overrides)}))
                except ScenarioError:
                    continue
    return variants


def sweep_identity(scenario: Scenario, plan: SweepPlan, engine: str, keep_interval: float | None) -> dict[str, str]:
    """Everything that changes a sweep's answers, part by part (name -> fingerprint).

    Parameters
    ----------
    scenario : Scenario
        The base scenario (overrides of ``--set`` applied).
    plan : SweepPlan
        The plan.
    engine : str
        ``"batch"`` or ``"solo"``.
    keep_interval : float or None
        Interval of the kept series [s].

    Returns
    -------
    dict of str to str
        Each part named as a message would name it (``"the profile file route.csv
        (profile.segment[2].file)"``), with its fingerprint.
    """
    parts = {"the thermoelec version": __version__}
    source = Path(scenario.source)
    parts[f"the scenario file {scenario.source}"] = _sha256(source) if source.is_file() else scenario.digest
    for included in scenario.included:
        parts[f"the included file {included}"] = _sha256(included)
    for variant in _file_variants(scenario, plan):
        for key, name, _ in data_files(variant.spec):
            parts[f"the data file {name} ({key})"] = _sha256(variant.base_dir / name)
    parts["the overrides (--set)"] = json.dumps([[k, str(v)] for k, v in scenario.overrides])
    # every value, option (overrides, attributes), distribution, sample count, seed and design
    parts["the plan"] = json.dumps(plan.fingerprint(), sort_keys=True)
    parts["the engine (--engine)"] = engine
    parts["the kept series (--keep-series)"] = repr(keep_interval)
    parts["the solver settings"] = repr(scenario.solver_options())
    return parts


def changed_parts(old: Mapping[str, str], new: Mapping[str, str]) -> list[str]:
    """The parts of two identities that differ (or that only one has), in ``new``'s order."""
    names = list(new) + [name for name in old if name not in new]
    return [name for name in names if old.get(name) != new.get(name)]


class Checkpoints:
    """The folder of a sweep's finished chunks (``DIR/chunks``).

    Parameters
    ----------
    folder : pathlib.Path
        The folder (created by :meth:`open`).
    """

    def __init__(self, folder: Path):
        self.folder = Path(folder)

    def _chunk_files(self) -> list[Path]:
        return sorted(p for p in self.folder.glob("*") if p.name != IDENTITY and not p.name.startswith("."))

    def open(self, identity: Mapping[str, str], size: int, resume: bool, force: bool) -> dict[int, dict[str, Any]]:
        """Start or resume: the rows already finished, by scenario index.

        Parameters
        ----------
        identity : mapping
            This sweep's :func:`sweep_identity`.
        size : int
            Scenarios in the plan [-].
        resume : bool
            Keep the finished chunks of the same sweep.
        force : bool
            Discard finished chunks (of this or another sweep) and start again.

        Returns
        -------
        dict of int to dict
            Rows of the scenarios finished (empty when starting).

        Raises
        ------
        ScenarioError
            Resuming a sweep whose identity changed (naming the parts), starting over
            finished chunks without ``force``, or a chunk file that is not one of this sweep.
        """
        self.folder.mkdir(parents=True, exist_ok=True)
        stamp = self.folder / IDENTITY
        existing = self._chunk_files()
        old = self._identity(stamp)
        if existing and not force:
            if not resume:
                raise ScenarioError(str(self.folder), "", f"holds {len(existing)} finished chunks of an earlier "
                                    "sweep: give --resume to continue it, or --force to discard them and start again")
            if old is None:
                raise ScenarioError(str(self.folder), "", "holds chunks without a record of their sweep (an older "
                                    "thermoelec wrote them): start again with --force")
            changed = changed_parts(old, identity)
            if changed:
                raise ScenarioError(str(self.folder), "--resume", "since the sweep in this folder began, "
                                    + _join(changed) + " changed: its chunks would mix other answers in; start again "
                                    "with --force, or use another --out")
            return self._read(existing, size)
        for path in existing:
            path.unlink()
        write_text_atomic(stamp, json.dumps(identity, indent=1))
        return {}

    @staticmethod
    def _identity(stamp: Path) -> dict[str, str] | None:
        try:
            data = json.loads(stamp.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        return data if isinstance(data, dict) else None

    def _read(self, files: Sequence[Path], size: int) -> dict[int, dict[str, Any]]:
        rows: dict[int, dict[str, Any]] = {}
        for path in files:
            match = _CHUNK.match(path.name)
            try:
                data = json.loads(path.read_text(encoding="utf-8")) if match else None
            except (OSError, ValueError):
                data = None
            start, stop = (int(match.group(1)), int(match.group(2))) if match else (0, -1)
            if not isinstance(data, list) or len(data) != stop - start or not 0 <= start < stop <= size:
                raise ScenarioError(str(path), "", "is not a chunk of this sweep: remove it, or start again with "
                                    "--force")
            rows.update(zip(range(start, stop), data, strict=True))
        return rows

    def write(self, start: int, rows: Sequence[Mapping[str, Any]]) -> Path:
        """Write the rows of scenarios ``start`` .. ``start + len(rows) - 1`` as one chunk, atomically.

        Parameters
        ----------
        start : int
            Plan index of the first row [-].
        rows : sequence of mapping
            The rows, in plan order.

        Returns
        -------
        pathlib.Path
            The chunk file.
        """
        path = self.folder / f"rows_{start:09d}_{start + len(rows):09d}.json"
        write_text_atomic(path, json.dumps(list(rows)))
        return path

    def finished(self) -> int:
        """Scenarios in the folder's chunk files [-] (from their names)."""
        return sum(int(m.group(2)) - int(m.group(1)) for p in self._chunk_files() if (m := _CHUNK.match(p.name)))

    def discard(self) -> None:
        """Remove the chunks and the identity (the sweep's dataset is written)."""
        for path in [*self._chunk_files(), self.folder / IDENTITY]:
            path.unlink(missing_ok=True)
        try:
            self.folder.rmdir()
        except OSError:
            pass  # not empty: files of someone else's


def _join(names: Sequence[str]) -> str:
    return names[0] if len(names) == 1 else ", ".join(names[:-1]) + " and " + names[-1]
