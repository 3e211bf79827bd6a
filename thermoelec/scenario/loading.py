"""Loading a scenario: the file and its includes, overrides, validation, the :class:`Scenario` object.

Owns :class:`Scenario` (the validated scenario, its raw data, where it came
from and the cache its family shares), :func:`load_scenario`,
:func:`scenario_from_dict` and ``include`` (included tables are the base; the
scenario's own keys win). Every problem is a
:class:`~thermoelec.inputs.errors.ScenarioError` naming the file, the dotted key
(list items counted from 1, as ``profile.segment[2].value``) and, where the text
shows it, the line.

Imports the other modules of :mod:`thermoelec.scenario`, :mod:`thermoelec.inputs`
and :mod:`thermoelec.engine`; never the layers above (analysis, output, fit, api, cli).
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pydantic import ValidationError

from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Problem
from thermoelec.inputs.errors import ScenarioError
from thermoelec.scenario.build import build_problem
from thermoelec.scenario.cache import ScenarioCache
from thermoelec.scenario.locate import first_error
from thermoelec.scenario.overrides import apply_override
from thermoelec.scenario.schema import ScenarioSpec
from thermoelec.scenario.series import read_ambient_csv, read_profile_csv

__all__ = ["Scenario", "load_scenario", "scenario_from_dict"]


@dataclass(frozen=True)
class Scenario:
    """A validated scenario: the raw data, its SI specification and where it came from.

    Attributes
    ----------
    spec : ScenarioSpec
        The validated scenario, values in SI.
    raw : dict
        The data as read (includes merged, overrides applied), for variants and reports.
    source : str
        The scenario file (``<dict>`` for data given as a dict).
    base_dir : pathlib.Path
        Folder its file names (CSV profiles, includes) are relative to.
    digest : str
        SHA-256 of the file, its includes and the overrides (a sweep's checkpoints check it).
    overrides : tuple of (str, Any)
        Dotted paths and values applied to the file, in order.
    cache : ScenarioCache
        Files read and segment tuples built, shared with every variant (:meth:`with_overrides`).
    """

    spec: ScenarioSpec
    raw: dict
    source: str
    base_dir: Path
    digest: str
    overrides: tuple[tuple[str, Any], ...] = field(default_factory=tuple)
    cache: ScenarioCache = field(default_factory=ScenarioCache, compare=False, repr=False)

    @property
    def name(self) -> str:
        """The scenario's name."""
        return self.spec.scenario.name

    def with_overrides(self, overrides: Mapping[str, Any]) -> Scenario:
        """A new scenario with values replaced by dotted path (validated again), sharing this one's cache.

        Parameters
        ----------
        overrides : Mapping of str to Any
            Dotted path (``profile.segment[2].value``) to the value as the file would write it (``"5 A"``).

        Returns
        -------
        Scenario
            The variant; its overrides follow this scenario's.

        Raises
        ------
        ScenarioError
            For a path that does not exist or a value that does not validate; for a
            CSV file that does not read when an override may name other files.
        """
        # the files were checked when this scenario was loaded: again only if an override may name others
        items = list(overrides.items())
        return _validate(_deep_copy(self.raw), self.source, self.base_dir, None, items, self.digest, self.overrides,
                         check_files=any(_names_files(path) for path, _ in items), cache=self.cache)

    def for_variants(self) -> Scenario:
        """This scenario without its ``[sweep]``, ``[[option]]`` and ``[review]`` tables (same digest and cache).

        What a sweep's plan has read already need not be copied and validated again with every
        variant: a zip of 10 000 values would be, 10 000 times.
        """
        drop = ("sweep", "option", "review")
        if not any(key in self.raw for key in drop):
            return self
        raw = {k: v for k, v in self.raw.items() if k not in drop}
        spec = self.spec.model_copy(update={"sweep": {}, "option": {}, "review": None})
        return Scenario(spec, raw, self.source, self.base_dir, self.digest, self.overrides, self.cache)

    def problem(self) -> Problem:
        """The SI :class:`~thermoelec.engine.problem.Problem` for the simulator (reads CSV profiles, once per version).

        Variants of this scenario with the same profile get the same segment tuple.
        """
        return build_problem(self.spec, self.base_dir, self.source, self.cache)

    def solver_options(self) -> SolverOptions:
        """Integrator settings from ``[solver]``."""
        return self.spec.solver.options()


def _deep_copy(data: Any) -> Any:
    if isinstance(data, dict):
        return {k: _deep_copy(v) for k, v in data.items()}
    if isinstance(data, list):
        return [_deep_copy(v) for v in data]
    return data


def _validate(data: dict, source: str, base_dir: Path, text: str | None, overrides: list[tuple[str, Any]],
              digest: str, previous: tuple = (), check_files: bool = True,
              cache: ScenarioCache | None = None) -> Scenario:
    """The scenario of raw ``data`` with ``overrides`` applied, validated (its CSV files too if ``check_files``)."""
    for path, value in overrides:
        try:
            apply_override(data, path, value)
        except ValueError as exc:
            raise ScenarioError(source, path, f"cannot override: {exc}") from None
    try:
        spec = ScenarioSpec.model_validate(data)
    except ValidationError as exc:
        raise first_error(exc, source, text) from None
    if overrides:
        h = hashlib.sha256(digest.encode())
        h.update(repr(overrides).encode())
        digest = h.hexdigest()
    scenario = Scenario(spec, data, source, base_dir, digest, tuple(previous) + tuple(overrides),
                        ScenarioCache() if cache is None else cache)
    if check_files:
        _check_profile_files(scenario)
    return scenario


def _names_files(path: str) -> bool:
    """Whether an override at this dotted path can change which CSV files the scenario reads."""
    return path.startswith(("profile", "thermal.ambient_profile")) or path in ("thermal", "include")


def _check_profile_files(scenario: Scenario) -> None:
    """Read the CSV files the scenario names (into its cache, for :meth:`Scenario.problem`)."""
    spec, cache = scenario.spec, scenario.cache
    if spec.thermal.ambient_profile is not None:
        cache.read(read_ambient_csv, scenario.base_dir / spec.thermal.ambient_profile, "thermal.ambient_profile")
    for i, seg in enumerate(spec.profile.segment):
        if seg.file is not None:
            cache.read(read_profile_csv, scenario.base_dir / seg.file, f"profile.segment[{i + 1}].file")


def _merge(base: dict, top: Mapping) -> dict:
    """``top`` over ``base``, table by table (lists and values of ``top`` replace)."""
    out = _deep_copy(base)
    for key, value in top.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = _deep_copy(value)
    return out


def _with_includes(data: dict, base_dir: Path, source: str) -> tuple[dict, list[bytes]]:
    """Resolve ``include = "file.toml"`` (or a list): the included tables are the base, the scenario's win.

    Relative paths are relative to the scenario file; an included file cannot include again.
    """
    includes = data.pop("include", None)
    if includes is None:
        return data, []
    if isinstance(includes, str):
        includes = [includes]
    if not isinstance(includes, list) or not all(isinstance(i, str) for i in includes):
        raise ScenarioError(source, "include", "expected a file name or a list of file names")
    merged: dict = {}
    blobs = []
    for name in includes:
        path = base_dir / name
        try:
            blob = path.read_bytes()
            included = tomllib.loads(blob.decode("utf-8"))
        except FileNotFoundError:
            raise ScenarioError(source, "include", f"included file {name!r} not found (looked for {path})") from None
        except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
            raise ScenarioError(str(path), "", f"included file: {exc}") from None
        if "include" in included:
            raise ScenarioError(str(path), "include", "an included file cannot include others")
        merged = _merge(merged, included)
        blobs.append(blob)
    return _merge(merged, data), blobs


def load_scenario(path: str | Path, overrides: Mapping[str, Any] | None = None) -> Scenario:
    """Read and validate a scenario file; ``overrides`` replace values by dotted path first.

    Parameters
    ----------
    path : str or pathlib.Path
        The scenario file (TOML, format 1); its CSV and include names are relative to its folder.
    overrides : Mapping of str to Any, optional
        Dotted path to value, as the file would write it (``{"thermal.ambient_temperature": "-20 degC"}``).

    Returns
    -------
    Scenario
        The validated scenario (values in SI), with a new cache for it and its variants.

    Raises
    ------
    ScenarioError
        For any problem in the file, its overrides or the CSV profiles it names.
    """
    path = Path(path)
    source = str(path)
    try:
        blob = path.read_bytes()
    except FileNotFoundError:
        raise ScenarioError(source, "", "scenario file not found") from None
    except OSError as exc:
        raise ScenarioError(source, "", f"cannot read the file: {exc.strerror}") from None
    try:
        text = blob.decode("utf-8")
    except UnicodeDecodeError:
        raise ScenarioError(source, "", "the file is not UTF-8 text") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        line_match = re.search(r"line (\d+)", str(exc))
        raise ScenarioError(source, "", f"TOML syntax error: {exc}",
                            int(line_match.group(1)) if line_match else None) from None
    digest = hashlib.sha256(blob).hexdigest()
    data, included = _with_includes(data, path.parent, source)
    for extra in included:
        digest = hashlib.sha256((digest + hashlib.sha256(extra).hexdigest()).encode()).hexdigest()
    return _validate(data, source, path.parent, text, list((overrides or {}).items()), digest)


def scenario_from_dict(data: Mapping[str, Any], base_dir: str | Path = ".", source: str = "<dict>",
                       overrides: Mapping[str, Any] | None = None) -> Scenario:
    """Validate scenario data given as a dict (the parsed TOML structure).

    Parameters
    ----------
    data : Mapping of str to Any
        The scenario's tables, quantities as a file would write them (``"2.5 Ah"``); not changed.
    base_dir : str or pathlib.Path
        Folder its CSV and include names are relative to.
    source : str
        Name for the messages, in place of a file name.
    overrides : Mapping of str to Any, optional
        Dotted path to value, applied before validation.

    Returns
    -------
    Scenario
        The validated scenario (values in SI), with a new cache for it and its variants.

    Raises
    ------
    ScenarioError
        For any problem in the data, its overrides or the CSV profiles it names.
    """
    raw = _deep_copy(dict(data))
    raw, _ = _with_includes(raw, Path(base_dir), source)
    digest = hashlib.sha256(repr(sorted(raw.items(), key=lambda kv: kv[0])).encode()).hexdigest()
    return _validate(raw, source, Path(base_dir), None, list((overrides or {}).items()), digest)
