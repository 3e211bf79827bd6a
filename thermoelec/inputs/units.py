"""Quantities in input files: a bare number in a default unit or ``"value unit"``, converted to SI with pint.

Owns :func:`to_si`, the one pint unit registry and the cache of conversions.
Imports nothing from thermoelec.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

__all__ = ["from_si", "to_si"]

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@lru_cache(maxsize=1)
def _registry():
    """The one pint registry (building it takes a good fraction of a second: once per process)."""
    import pint

    return pint.UnitRegistry()


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
    return _to_si(value, default_unit, si_unit)


def _to_si(value: Any, default_unit: str, si_unit: str) -> float:
    if isinstance(value, str):
        match = _NUMBER.match(value)
        if not match:
            raise ValueError(f"{value!r} is not a quantity: write a number and a unit, like '1.5 {default_unit}'")
        number, unit = float(match.group(1)), match.group(2) or default_unit
    else:
        number, unit = float(value), default_unit
    if not math.isfinite(number):
        raise ValueError(f"{value!r} is not a finite number")
    import pint

    ureg = _registry()
    try:
        quantity = ureg.Quantity(number, unit)
    except (pint.UndefinedUnitError, pint.errors.DefinitionSyntaxError, AttributeError, TypeError, ValueError):
        raise ValueError(f"unknown unit {unit!r} in {value!r}") from None
    try:
        return float(quantity.to(si_unit).magnitude)
    except pint.DimensionalityError:
        raise ValueError(f"{value!r} has the wrong dimension: expected a quantity in {default_unit}") from None


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
