"""Quantities in input files: a bare number in a default unit or ``"value unit"``, converted to SI with pint.

Owns :func:`to_si`, the one pint unit registry and the caches of conversions.
Imports nothing from thermoelec.

Start-up: importing pint takes about half a second (it imports dask when dask is
installed) and building its registry another half (a tenth with pint's own disk
cache of the parsed definitions, which the registry is given). A conversion pint
made once is also kept on disk (:class:`ConversionMemo`, in the user's cache
folder, one file per pint installation and version of this module), so a
command whose quantities were all seen before does not import pint at all; the
value kept is the float pint returned, to the last bit. ``THERMOELEC_CACHE_DIR``
names another cache folder; set to an empty string, it turns both disk caches off.
"""

from __future__ import annotations

import atexit
import hashlib
import json
import math
import os
import re
import tempfile
from functools import lru_cache
from pathlib import Path
from typing import Any

__all__ = ["from_si", "to_si"]

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
#: A power operator, and the plain exponent that must follow it (``m^2``, ``s**-1``, ``m**0.5``).
_POWER = re.compile(r"\*\*|\^")
_EXPONENT = re.compile(r"\s*[-+]?\s*(\d+\.?\d*|\.\d+)")
#: The largest exponent and the longest unit text read.
MAX_EXPONENT, MAX_UNIT_LENGTH = 12, 200


#: Environment variable naming the cache folder ("" for no disk cache).
CACHE_ENV = "THERMOELEC_CACHE_DIR"
#: Conversions kept on disk at most; past this the memo starts afresh.
MAX_MEMO_ENTRIES = 50_000


def cache_folder() -> Path | None:
    """thermoelec's cache folder: ``$THERMOELEC_CACHE_DIR``, else the user's cache folder; None for no disk cache."""
    chosen = os.environ.get(CACHE_ENV)
    if chosen is not None:
        return Path(chosen) if chosen.strip() else None
    import platformdirs

    return platformdirs.user_cache_path("thermoelec", appauthor=False)


@lru_cache(maxsize=1)
def _registry():
    """The one pint registry: once per process, from pint's disk cache of its parsed definitions when it has one."""
    import pint

    folder = cache_folder()
    return pint.UnitRegistry(cache_folder=None if folder is None else folder / "pint")


def _pint_stamp() -> str | None:
    """What the memo's conversions depend on: pint's installation (its package and definitions file) and this
    module's own text, by path, size and modification time; found without importing pint. None without pint."""
    from importlib.util import find_spec

    spec = find_spec("pint")
    if spec is None or not spec.origin:
        return None
    package = Path(spec.origin).parent
    parts = []
    for path in (package / "__init__.py", package / "default_en.txt", Path(__file__)):
        try:
            info = path.stat()
        except OSError:
            return None
        parts.append(f"{path}:{info.st_size}:{info.st_mtime_ns}")
    return hashlib.sha1("\n".join(parts).encode()).hexdigest()[:16]


class ConversionMemo:
    """Conversions pint made, kept on disk: key ``[type, value, default unit, SI unit]`` to the SI float.

    Read when first asked; the conversions new to it are merged into the file once, when the
    process ends (written whole to a temporary file and renamed, so a reader never sees half
    of one; two processes ending together may lose each other's additions, which only costs
    a later pint call). Only successful conversions are kept: an invalid quantity goes to pint
    and its message every time. A missing, unreadable or foreign file is an empty memo.
    """

    def __init__(self, path: Path | None):
        self.path = path
        self._known: dict[str, float] | None = None
        self._new: dict[str, float] = {}

    @staticmethod
    def key(value: Any, default_unit: str, si_unit: str) -> str:
        return json.dumps([type(value).__name__, value, default_unit, si_unit])

    def _load(self) -> dict[str, float]:
        if self._known is None:
            self._known = {}
            if self.path is not None:
                try:
                    data = json.loads(self.path.read_text())
                except (OSError, ValueError):
                    data = None
                if isinstance(data, dict):
                    self._known = {k: v for k, v in data.items() if isinstance(v, float)}
        return self._known

    def get(self, key: str) -> float | None:
        return self._load().get(key)

    def add(self, key: str, value: float) -> None:
        if self.path is None:
            return
        if not self._new:
            atexit.register(self.flush)
        self._new[key] = value
        self._load()[key] = value

    def flush(self) -> None:
        """Merge the new conversions into the file (nothing is raised: a cache that cannot be written is none)."""
        if self.path is None or not self._new:
            return
        new, self._new = self._new, {}
        on_disk = ConversionMemo(self.path)._load()
        merged = {**on_disk, **new} if len(on_disk) + len(new) <= MAX_MEMO_ENTRIES else new
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            handle, temporary = tempfile.mkstemp(dir=self.path.parent, prefix=".conversions-", suffix=".tmp")
        except OSError:
            return
        try:
            with os.fdopen(handle, "w") as stream:
                json.dump(merged, stream)
            os.replace(temporary, self.path)
        except OSError:
            Path(temporary).unlink(missing_ok=True)


@lru_cache(maxsize=1)
def _memo() -> ConversionMemo:
    folder = cache_folder()
    stamp = None if folder is None else _pint_stamp()
    return ConversionMemo(None if stamp is None else folder / f"conversions-{stamp}.json")


def to_si(value: Any, default_unit: str, si_unit: str) -> float:
    """A quantity of an input file in SI.

    Pure, so repeated conversions (a sweep validates thousands of variants of one
    file) come from a cache.

    Parameters
    ----------
    value : float or int or str
        A bare number [``default_unit``] or a string ``"number unit"`` in any unit pint
        knows of the same dimension (``"2.5 Ah"``, ``"-20 degC"``, ``"25 mohm"``).
    default_unit : str
        Unit of a bare number, as pint spells it (``"degC"``, ``"Ah"``, ``""`` for dimensionless).
    si_unit : str
        Unit of the result (``"K"``, ``"C"``).

    Returns
    -------
    float
        The value [``si_unit``].

    Raises
    ------
    ValueError
        For anything but a finite number with a known unit of the right dimension
        (the message says which); a bool is not a number here.

    Examples
    --------
    >>> round(to_si("-20 degC", "degC", "K"), 9)
    253.15
    >>> to_si(2.5, "Ah", "C")
    9000.0
    """
    if isinstance(value, bool) or not isinstance(value, (int, float, str)):
        raise ValueError(f"expected a number or a quantity string like '1.5 {default_unit}', got {value!r}")
    return _to_si_cached(value, type(value), default_unit, si_unit)


@lru_cache(maxsize=65536)
def _to_si_cached(value: Any, kind: type, default_unit: str, si_unit: str) -> float:
    # ``kind`` in the key: 1 and 1.0 hash alike but a str "1" must not meet them
    memo = _memo()
    key = memo.key(value, default_unit, si_unit)
    known = memo.get(key)
    if known is not None:
        return known
    result = _to_si(value, default_unit, si_unit)
    memo.add(key, result)
    return result


def _to_si(value: Any, default_unit: str, si_unit: str) -> float:
    if isinstance(value, str):
        match = _NUMBER.match(value)
        if not match:
            example = f"1.5 {default_unit}".strip()
            raise ValueError(f"{value!r} is not a quantity: write a number and a unit, like {example!r}")
        number, unit = float(match.group(1)), match.group(2) or default_unit
    else:
        number, unit = float(value), default_unit
    if not math.isfinite(number):
        raise ValueError(f"{value!r} is not a finite number")
    import pint

    ureg = _registry()
    _check_expression(unit, value)
    try:
        quantity = ureg.Quantity(number, unit)
    except pint.UndefinedUnitError:
        raise ValueError(f"unknown unit {unit!r} in {value!r}") from None
    except Exception as exc:  # pint's parser fails in many ways (tokenizer, zero division, bare assertions)
        raise ValueError(f"cannot read the unit {unit!r} in {value!r} ({_reason(exc)})") from None
    try:
        result = float(quantity.to(si_unit).magnitude)
    except pint.DimensionalityError:
        raise ValueError(f"{value!r} has the wrong dimension: expected a quantity in {default_unit or 'no unit'}"
                         ) from None
    except Exception as exc:  # an offset unit in a product (degC * m) and the like
        raise ValueError(f"cannot convert {value!r} to {si_unit or 'a plain number'} ({_reason(exc)})") from None
    if not math.isfinite(result):
        raise ValueError(f"{value!r} is not a finite quantity in {si_unit or 'plain numbers'}")
    return result


def _check_expression(unit: str, value: Any) -> None:
    """Refuse unit text pint would take too long over: very long, or a power that is not a small number
    on a unit name (pint evaluates ``10**10**10`` exactly, for ever)."""
    if len(unit) > MAX_UNIT_LENGTH:
        raise ValueError(f"the unit of {value!r} is longer than {MAX_UNIT_LENGTH} characters")
    for power in _POWER.finditer(unit):
        base = unit[:power.start()].rstrip()
        exponent = _EXPONENT.match(unit, power.end())
        if not base or not (base[-1].isalpha() or base[-1] == "_") or exponent is None or \
                float(exponent.group(1)) > MAX_EXPONENT or _POWER.match(unit[exponent.end():].lstrip()):
            raise ValueError(f"cannot read the unit {unit!r} in {value!r} (a power goes on a unit name and is a "
                             f"plain number of at most {MAX_EXPONENT}, as in 'W/m^2/K')")


def _reason(exc: Exception) -> str:
    """The parser's own reason, where it gives one that says more than its exception type."""
    if isinstance(exc, ZeroDivisionError):
        return "division by zero"
    text = str(exc).strip()
    if not text or text.startswith("("):  # a bare assertion, a tokenizer's tuple
        return "not a unit expression: check the operators and parentheses"
    return text.splitlines()[0][:120]


@lru_cache(maxsize=4096)
def _factor(si_unit: str, unit: str) -> tuple[float, float]:
    """``(scale, offset)`` with ``value [unit] = scale * value [si_unit] + offset`` (offsets: degC, degF)."""
    ureg = _registry()
    zero = float(ureg.Quantity(0.0, si_unit).to(unit).magnitude)
    one = float(ureg.Quantity(1.0, si_unit).to(unit).magnitude)
    return one - zero, zero


def from_si(value: float, si_unit: str, unit: str) -> float:
    """An SI value in another unit of the same dimension (the reverse of :func:`to_si`, for listings).

    Parameters
    ----------
    value : float
        The value [``si_unit``].
    si_unit : str
        Its unit, as pint spells it (``"K"``, ``"C"``, ``""`` for dimensionless).
    unit : str
        The unit wanted (``"degC"``, ``"Ah"``).

    Returns
    -------
    float
        The value [``unit``].

    Examples
    --------
    >>> round(from_si(253.15, "K", "degC"), 9)
    -20.0
    >>> round(from_si(9000.0, "C", "Ah"), 12)
    2.5
    """
    if si_unit == unit:
        return float(value)
    scale, offset = _factor(si_unit, unit)
    return float(value) * scale + offset
