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
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from thermoelec.engine.options import SolverOptions
from thermoelec.engine.problem import Problem
from thermoelec.inputs.budgets import current, round_up
from thermoelec.inputs.errors import ScenarioError
from thermoelec.scenario.build import build_problem
from thermoelec.scenario.cache import ScenarioCache
from thermoelec.scenario.locate import Origins, Source, first_error
from thermoelec.scenario.overrides import apply_override, copy_along, split_path
from thermoelec.scenario.schema import ScenarioSpec
from thermoelec.scenario.series import read_ambient_csv, read_profile_csv

__all__ = ["Scenario", "data_files", "load_scenario", "names_files", "scenario_from_dict"]


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
    origins : Origins or None
        Which input gave each value (the file, an included file, an override), for messages.
    included : tuple of pathlib.Path
        The files it includes, in order.
    """

    spec: ScenarioSpec
    raw: dict
    source: str
    base_dir: Path
    digest: str
    overrides: tuple[tuple[str, Any], ...] = field(default_factory=tuple)
    cache: ScenarioCache = field(default_factory=ScenarioCache, compare=False, repr=False)
    origins: Origins | None = field(default=None, compare=False, repr=False)
    included: tuple[Path, ...] = ()

    @property
    def name(self) -> str:
        """The scenario's name."""
        return self.spec.scenario.name

    def with_overrides(self, overrides: Mapping[str, Any], origin: str | None = None) -> Scenario:
        """A new scenario with values replaced by dotted path (validated again), sharing this one's cache.

        Parameters
        ----------
        overrides : Mapping of str to Any
            Dotted path (``profile.segment[2].value``) to the value as the file would write it (``"5 A"``).
        origin : str, optional
            Where the overrides come from (``'[[case]] 2 "cold start"'``), named by the error of a
            value they set; the scenario file by default.

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
        origins = None if self.origins is None else \
            self.origins.with_overrides(_override_sources(items, origin or self.source))
        paths = []
        for path, _ in items:
            try:
                paths.append(split_path(path))
            except ValueError:
                pass  # apply_override names it
        return _validate(copy_along(self.raw, paths), self.source, self.base_dir, None, items, self.digest,
                         self.overrides, check_files=any(names_files(path) for path, _ in items), cache=self.cache,
                         origins=origins, included=self.included, variant=True, base=(self.spec, paths))

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
        return replace(self, spec=spec, raw=raw)

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


def _reusing(raw: Any, validated: Any, paths: list[list[str | int]]) -> Any:
    """``raw`` with each table off the overrides' ``paths`` replaced by its validated model from the base scenario.

    pydantic takes a model instance as it is (it runs the model's after-checks on
    it again, not its fields' conversions), so a variant converts afresh only the
    tables on its overrides' paths: the same specification as validating
    everything, because a table's checks see only their own contents. A table whose
    before-validator reshapes its contents (an RC pair hands its activation energy
    to its resistance table) is validated whole.
    """
    if any(not p for p in paths):  # an override sets this very value
        return raw
    if isinstance(validated, BaseModel) and isinstance(raw, dict) and not _reshapes(type(validated)):
        fields = type(validated).model_fields
        heads = {p[0] for p in paths}
        out = {}
        for key, value in raw.items():
            if key not in fields:
                out[key] = value  # pydantic names it
            elif key in heads:
                out[key] = _reusing(value, getattr(validated, key), [p[1:] for p in paths if p[0] == key])
            else:
                out[key] = _untouched(value, getattr(validated, key))
        return out
    if isinstance(validated, list) and isinstance(raw, list) and len(raw) == len(validated):
        heads = {p[0] for p in paths}
        return [_reusing(value, item, [p[1:] for p in paths if p[0] == i]) if i in heads else _untouched(value, item)
                for i, (value, item) in enumerate(zip(raw, validated, strict=True))]
    return raw


def _untouched(raw: Any, validated: Any) -> Any:
    """A value off every override's path: its validated model (or list of them) as it is, else the raw value."""
    if isinstance(validated, BaseModel):
        return validated
    if isinstance(validated, list) and isinstance(raw, list) and len(raw) == len(validated) and validated \
            and all(isinstance(item, BaseModel) for item in validated):
        return list(validated)
    return raw


@lru_cache(maxsize=256)
def _reshapes(model: type[BaseModel]) -> bool:
    """Whether a model has a before-validator (it may hand values of its own to the tables inside it)."""
    return any(d.info.mode == "before" for d in model.__pydantic_decorators__.model_validators.values())


def _check_sizes(data: Any, source: str, path: str = "") -> int:
    """Refuse tables larger than the budget of rows before validating them; returns the values counted."""
    if isinstance(data, dict):
        return sum(_check_sizes(v, source, f"{path}.{k}" if path else str(k)) for k, v in data.items())
    if not isinstance(data, list):
        return 1
    count = sum(_check_sizes(v, source, path) for v in data) if data and isinstance(data[0], (list, dict)) \
        else len(data)
    limit = current().rows
    if count > limit:
        raise ScenarioError(source, path, f"holds {count:.3g} values, over the budget of {limit:.3g} rows: raise it "
                            f"with --max-rows {round_up(count)}, or put the series in a CSV profile")
    return count


def _override_sources(items: list[tuple[str, Any]], label: str, flag: bool = False) -> list[Source]:
    """The overrides as sources of values: ``label`` (a ``--set`` flag is named with its value)."""
    sources = []
    for path, value in items:
        try:
            parts = tuple(split_path(path))
        except ValueError:
            parts = (path,)
        shown = value if isinstance(value, str) else repr(value)
        sources.append(Source(f"{label} {path}={shown}" if flag else label, path=parts))
    return sources


def _validate(data: dict, source: str, base_dir: Path, text: str | None, overrides: list[tuple[str, Any]],
              digest: str, previous: tuple = (), check_files: bool = True,
              cache: ScenarioCache | None = None, origins: Origins | None = None,
              included: tuple[Path, ...] = (), variant: bool = False,
              base: tuple[ScenarioSpec, list] | None = None) -> Scenario:
    """The scenario of raw ``data`` with ``overrides`` applied, validated (its CSV files too if ``check_files``).

    ``base``: the validated specification ``data`` was copied from and the overrides' key paths; its tables
    off those paths are taken as they are (:func:`_reusing`).
    """
    if variant:  # the base was checked when it was loaded: only what the overrides bring
        for path, value in overrides:
            _check_sizes(value, source, path)
    else:
        _check_sizes(data, source)
    labels = origins.overrides[len(origins.overrides) - len(overrides):] if origins is not None else ()
    for i, (path, value) in enumerate(overrides):
        try:
            apply_override(data, path, value)
        except ValueError as exc:
            raise ScenarioError(labels[i].name if labels else source, path, f"cannot override: {exc}") from None
    try:
        spec = ScenarioSpec.model_validate(data if base is None else _reusing(data, *base))
    except ValidationError as exc:
        raise first_error(exc, source, text, origins) from None
    if overrides:
        h = hashlib.sha256(digest.encode())
        h.update(repr(overrides).encode())
        digest = h.hexdigest()
    scenario = Scenario(spec, data, source, base_dir, digest, tuple(previous) + tuple(overrides),
                        ScenarioCache() if cache is None else cache, origins, included)
    if check_files:
        _check_profile_files(scenario)
    return scenario


def names_files(path: str) -> bool:
    """Whether an override at this dotted path can change which CSV files the scenario reads.

    A file is named by ``thermal.ambient_profile`` or a segment's ``file``: an override of one of
    them, or of a table that holds them (``profile``, ``profile.segment[2]``, ``thermal``), or an
    ``include``. ``profile.scale`` or ``profile.segment[2].value`` name none.
    """
    try:
        parts = split_path(path)
    except ValueError:
        return True  # the override fails and says why; nothing is assumed of it
    if parts[0] == "include":
        return True
    if parts[0] == "thermal":
        return len(parts) == 1 or parts[1] == "ambient_profile"
    if parts[0] == "profile":
        return len(parts) == 1 or (parts[1] == "segment" and (len(parts) <= 3 or parts[3] == "file"))
    return False


def data_files(spec: ScenarioSpec) -> list[tuple[str, str, Any]]:
    """The data files a scenario reads: key, file name (relative to the scenario) and reader.

    The one list of them: the loader checks them, a sweep hashes them into its identity.

    Parameters
    ----------
    spec : ScenarioSpec
        The validated scenario.

    Returns
    -------
    list of (str, str, callable)
        The dotted key naming each file, the name as written, and its reader
        (:func:`~thermoelec.scenario.series.read_ambient_csv` or
        :func:`~thermoelec.scenario.series.read_profile_csv`).
    """
    files = []
    if spec.thermal.ambient_profile is not None:
        files.append(("thermal.ambient_profile", spec.thermal.ambient_profile, read_ambient_csv))
    for i, seg in enumerate(spec.profile.segment):
        if seg.file is not None:
            files.append((f"profile.segment[{i + 1}].file", seg.file, read_profile_csv))
    return files


def _check_profile_files(scenario: Scenario) -> None:
    """Read the CSV files the scenario names (into its cache, for :meth:`Scenario.problem`)."""
    for key, name, reader in data_files(scenario.spec):
        scenario.cache.read(reader, scenario.base_dir / name, key)


def _merge(base: dict, top: Mapping) -> dict:
    """``top`` over ``base``, table by table (lists and values of ``top`` replace)."""
    out = _deep_copy(base)
    for key, value in top.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = _deep_copy(value)
    return out


def _with_includes(data: dict, base_dir: Path, source: str) -> tuple[dict, list[bytes], list[Source]]:
    """Resolve ``include = "file.toml"`` (or a list): the included tables are the base, the scenario's win.

    Relative paths are relative to the scenario file; an included file cannot include again.
    Returns the merged data, each included file's bytes and each as a source of values.
    """
    includes = data.pop("include", None)
    if includes is None:
        return data, [], []
    if isinstance(includes, str):
        includes = [includes]
    if not isinstance(includes, list) or not all(isinstance(i, str) for i in includes):
        raise ScenarioError(source, "include", "expected a file name or a list of file names")
    merged: dict = {}
    blobs, sources = [], []
    for name in includes:
        blob, text, included = _read_include(name, base_dir, source)
        merged = _merge(merged, included)
        blobs.append(blob)
        sources.append(Source(str(base_dir / name), included, text))
    return _merge(merged, data), blobs, sources


def _read_include(name: str, base_dir: Path, source: str) -> tuple[bytes, str, dict]:
    """An included file's bytes, text and tables; every problem named as the scenario's ``include`` key."""
    if not name.strip():
        raise ScenarioError(source, "include", "an empty file name")
    path = base_dir / name
    if path.is_dir():
        raise ScenarioError(source, "include", f"included file {name!r} is a folder, not a file")
    try:
        blob = path.read_bytes()
    except FileNotFoundError:
        raise ScenarioError(source, "include", f"included file {name!r} not found (looked for {path})") from None
    except OSError as exc:
        raise ScenarioError(source, "include", f"cannot read the included file {name!r}: {exc.strerror}") from None
    try:
        text = blob.decode("utf-8")
        included = tomllib.loads(text)
    except UnicodeDecodeError:
        raise ScenarioError(str(path), "", "the included file is not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        line = re.search(r"line (\d+)", str(exc))
        raise ScenarioError(str(path), "", f"included file: TOML syntax error: {exc}",
                            int(line.group(1)) if line else None) from None
    if "include" in included:
        raise ScenarioError(str(path), "include", "an included file cannot include others")
    return blob, text, included


def load_scenario(path: str | Path, overrides: Mapping[str, Any] | None = None,
                  overrides_from: str = "override") -> Scenario:
    """Read and validate a scenario file; ``overrides`` replace values by dotted path first.

    Parameters
    ----------
    path : str or pathlib.Path
        The scenario file (TOML, format 1); its CSV and include names are relative to its folder.
    overrides : Mapping of str to Any, optional
        Dotted path to value, as the file would write it (``{"thermal.ambient_temperature": "-20 degC"}``).
    overrides_from : str
        How the overrides were given (``"--set"``), named with the key and value by the error
        of a value they set.

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
    own = _deep_copy(data)
    own.pop("include", None)
    data, included, sources = _with_includes(data, path.parent, source)
    for extra in included:
        digest = hashlib.sha256((digest + hashlib.sha256(extra).hexdigest()).encode()).hexdigest()
    items = list((overrides or {}).items())
    origins = Origins(Source(source, own, text), tuple(sources),
                      tuple(_override_sources(items, overrides_from, flag=True)))
    return _validate(data, source, path.parent, text, items, digest, origins=origins,
                     included=tuple(Path(s.name) for s in sources))


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
    raw, _, _ = _with_includes(raw, Path(base_dir), source)
    digest = hashlib.sha256(repr(sorted(raw.items(), key=lambda kv: kv[0])).encode()).hexdigest()
    return _validate(raw, source, Path(base_dir), None, list((overrides or {}).items()), digest)
