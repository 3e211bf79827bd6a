"""Uncertain inputs of a sweep: distributions of keys and the sample designs that draw them.

A key of ``[sweep]`` (or ``--sweep``) may take a distribution instead of a list:
its parameters are quantities with units, as every value of the format. The
registry :data:`DISTRIBUTIONS` names each with its parameters; a distribution
maps a uniform number ``u`` in [0, 1) to a value by its inverse CDF
(:meth:`Distribution.ppf`), so every design below draws any mix of them jointly:

- ``latin_hypercube`` (the default): one point in each of ``N`` equal-probability
  strata of every input, the strata paired at random (M. D. McKay, R. J. Beckman,
  W. J. Conover, Technometrics 21 (1979) 239), from :class:`scipy.stats.qmc.LatinHypercube`;
- ``sobol``: a scrambled Sobol' sequence (I. M. Sobol', USSR Comput. Math. Math.
  Phys. 7 (1967) 86; Owen's scrambling), from :class:`scipy.stats.qmc.Sobol`;
- ``saltelli``: the Saltelli design for variance-based sensitivity indices, two
  Sobol' matrices ``A`` and ``B`` and the ``d`` matrices ``AB_i`` (``A`` with column
  ``i`` from ``B``): ``N (d + 2)`` runs (A. Saltelli et al., Comput. Phys. Commun.
  181 (2010) 259), analysed by :func:`scipy.stats.sobol_indices`;
- ``random``: plain Monte Carlo (numpy's PCG64 generator), the reference the others beat.

Every design is reproducible from its seed (:class:`Sampling`). Owns
:data:`DISTRIBUTIONS`, :data:`SAMPLERS`, :class:`Distribution`, :func:`parse_distribution`,
:class:`Sampling` and :func:`design`. Imports from scenario/ and inputs/ only.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from thermoelec.inputs.errors import ScenarioError
from thermoelec.inputs.units import to_si
from thermoelec.scenario.options import split_quantity

__all__ = ["DISTRIBUTIONS", "SAMPLERS", "Distribution", "Sampling", "design", "parse_distribution"]

#: Distributions by name: their location parameters (in the value's unit), scale parameters (differences in
#: it), plain numbers, and optional truncation bounds.
DISTRIBUTIONS: dict[str, dict[str, tuple[str, ...]]] = {
    "normal": {"location": ("mean",), "scale": ("std",), "number": (), "bounds": ("low", "high")},
    "uniform": {"location": ("low", "high"), "scale": (), "number": (), "bounds": ()},
    "triangular": {"location": ("low", "mode", "high"), "scale": (), "number": (), "bounds": ()},
    "lognormal": {"location": ("median",), "scale": (), "number": ("sigma",), "bounds": ("low", "high")},
    "empirical": {"location": (), "scale": (), "number": (), "bounds": ()},
    "integers": {"location": ("low", "high"), "scale": (), "number": (), "bounds": ()},
}
#: Sample designs by name, with what they are (the dataset names the one used).
SAMPLERS: dict[str, str] = {
    "latin_hypercube": "Latin hypercube (McKay, Beckman & Conover 1979), scipy.stats.qmc.LatinHypercube",
    "sobol": "scrambled Sobol' sequence (Sobol' 1967, Owen scrambling), scipy.stats.qmc.Sobol",
    "saltelli": "Saltelli design for Sobol' indices (Saltelli et al. 2010): matrices A, B and AB_i, N (d + 2) runs",
    "random": "plain Monte Carlo, numpy PCG64",
}
#: A truncation keeping less than this share of a distribution excludes everything in practice.
MIN_KEPT_PROBABILITY = 1e-12


@dataclass(frozen=True)
class Distribution:
    """The distribution of one swept key, its parameters in ``unit`` (the unit the scenario file writes).

    Attributes
    ----------
    path : str
        Dotted path of the key.
    kind : str
        A name of :data:`DISTRIBUTIONS`.
    parameters : tuple of (str, float)
        Its parameters by name [unit; ``sigma`` of a lognormal is of the logarithm, -].
    unit : str
        Unit of the values (empty for a bare number).
    values : tuple of float
        The values an ``empirical`` distribution resamples [unit].
    """

    path: str
    kind: str
    parameters: tuple[tuple[str, float], ...]
    unit: str
    values: tuple[float, ...] = ()

    def get(self, name: str, default: float | None = None) -> float | None:
        """A parameter by name."""
        return dict(self.parameters).get(name, default)

    def _frozen(self):
        from scipy import stats

        p = dict(self.parameters)
        if self.kind == "normal":
            return stats.norm(p["mean"], p["std"])
        if self.kind == "lognormal":
            return stats.lognorm(p["sigma"], scale=p["median"])
        if self.kind == "uniform":
            return stats.uniform(p["low"], p["high"] - p["low"])
        if self.kind == "triangular":
            width = p["high"] - p["low"]
            return stats.triang((p["mode"] - p["low"]) / width, loc=p["low"], scale=width)
        return None

    def kept_probability(self) -> float:
        """The share of the untruncated distribution inside the truncation bounds [-] (1 without)."""
        base = self._frozen()
        low, high = self.get("low"), self.get("high")
        if base is None or self.kind not in ("normal", "lognormal"):
            return 1.0
        return float(base.cdf(math.inf if high is None else high) - base.cdf(-math.inf if low is None else low))

    def ppf(self, u: np.ndarray) -> np.ndarray:
        """Values at uniform numbers ``u`` in [0, 1) by the inverse CDF (truncation as a window of it) [unit]."""
        u = np.asarray(u, float)
        if self.kind == "empirical":
            ordered = np.sort(np.asarray(self.values))
            return ordered[np.minimum((u * len(ordered)).astype(int), len(ordered) - 1)]
        if self.kind == "integers":
            low, high = int(self.get("low")), int(self.get("high"))
            return low + np.minimum((u * (high - low + 1)).astype(int), high - low)
        base = self._frozen()
        if self.kind in ("normal", "lognormal") and (self.get("low") is not None or self.get("high") is not None):
            low, high = self.get("low"), self.get("high")
            f_low = float(base.cdf(low)) if low is not None else 0.0
            f_high = float(base.cdf(high)) if high is not None else 1.0
            return base.ppf(f_low + u * (f_high - f_low))
        return base.ppf(u)

    def describe(self) -> str:
        """The distribution in words, with its unit: ``normal(mean 20 mohm, std 1 mohm)``."""
        if self.kind == "empirical":
            return f"empirical({len(self.values)} values, {self.unit or 'bare numbers'})"
        unit = f" {self.unit}" if self.unit else ""
        text = ", ".join(f"{name} {value:g}{'' if name == 'sigma' else unit}" for name, value in self.parameters)
        return f"{self.kind}({text})"

    def fingerprint(self) -> list:
        """Everything that defines it, as JSON-able data (for a sweep's resume identity)."""
        return [self.path, self.kind, [[k, repr(v)] for k, v in self.parameters], self.unit,
                [repr(v) for v in self.values]]


def _location(value: Any, unit: str | None, key: str, source: str) -> tuple[float, str]:
    """A location parameter in ``unit`` (the first one given sets the unit: ``unit`` None)."""
    parts = split_quantity(value)
    if parts is None:
        raise ScenarioError(source, key, f"{value!r} is not a quantity: write a number and a unit")
    number, given = parts
    if unit is None or given == unit or not given:
        return number, given if unit is None else unit
    if not unit:
        raise ScenarioError(source, key, f"{value!r} has a unit where the first parameter is a bare number")
    try:
        return to_si(f"{number!r} {given}", given, unit), unit
    except ValueError as exc:
        raise ScenarioError(source, key, f"{value!r} does not convert to {unit}: {exc}") from None


def _difference(value: Any, unit: str, key: str, source: str) -> float:
    """A scale parameter (a standard deviation): a difference in ``unit`` (2 K is 2 degC of spread)."""
    parts = split_quantity(value)
    if parts is None:
        raise ScenarioError(source, key, f"{value!r} is not a quantity: write a number and a unit")
    number, given = parts
    if not given or given == unit:
        return number
    try:
        return to_si(f"{number!r} {given}", given, unit) - to_si(f"0 {given}", given, unit)
    except ValueError as exc:
        raise ScenarioError(source, key, f"{value!r} does not convert to {unit or 'a bare number'}: {exc}") from None


def parse_distribution(path: str, spec: Mapping[str, Any], source: str) -> Distribution:
    """A distribution from its table, ``{distribution = "normal", mean = "20 mohm", std = "1 mohm"}``.

    Raises
    ------
    ScenarioError
        For an unknown distribution or parameter, a missing one, a parameter without a number or in a
        unit that does not convert, a standard deviation or sigma not > 0, low >= high (or a mode
        outside them), a truncation that excludes everything, an empty empirical list.
    """
    key = f"sweep.{path}"
    kind = spec.get("distribution")
    if kind not in DISTRIBUTIONS:
        raise ScenarioError(source, f"{key}.distribution", f"unknown distribution {kind!r}; valid: "
                            + ", ".join(DISTRIBUTIONS))
    form = DISTRIBUTIONS[kind]
    allowed = {"distribution", *form["location"], *form["scale"], *form["number"], *form["bounds"]}
    if kind == "empirical":
        allowed.add("values")
    unknown = sorted(set(spec) - allowed)
    if unknown:
        raise ScenarioError(source, f"{key}.{unknown[0]}", f"a {kind} distribution takes "
                            + ", ".join(sorted(allowed - {'distribution'})))
    required = [*form["location"], *form["scale"], *form["number"]] + (["values"] if kind == "empirical" else [])
    missing = [name for name in required if name not in spec]
    if missing:
        raise ScenarioError(source, f"{key}.{missing[0]}", f"a {kind} distribution needs "
                            + ", ".join(required))
    unit: str | None = None
    parameters: list[tuple[str, float]] = []
    values: tuple[float, ...] = ()
    if kind == "empirical":
        raw = spec["values"]
        if not isinstance(raw, list) or not raw:
            raise ScenarioError(source, f"{key}.values", "expected a non-empty list of values to resample")
        converted = []
        for i, item in enumerate(raw, start=1):
            number, unit = _location(item, unit, f"{key}.values[{i}]", source)
            converted.append(number)
        values = tuple(converted)
    for name in form["location"]:
        number, unit = _location(spec[name], unit, f"{key}.{name}", source)
        parameters.append((name, number))
    unit = unit or ""
    for name in form["scale"]:
        parameters.append((name, _difference(spec[name], unit, f"{key}.{name}", source)))
    for name in form["number"]:
        parts = split_quantity(spec[name])
        if parts is None or parts[1]:
            raise ScenarioError(source, f"{key}.{name}", f"{name} is a plain number (of the logarithm)")
        parameters.append((name, parts[0]))
    for name in form["bounds"]:
        if name in spec:
            parameters.append((name, _location(spec[name], unit, f"{key}.{name}", source)[0]))
    dist = Distribution(path, kind, tuple(parameters), unit, values)
    _check_distribution(dist, key, source)
    return dist


def _check_distribution(dist: Distribution, key: str, source: str) -> None:
    p = dict(dist.parameters)
    for name in ("std", "sigma"):
        if name in p and not p[name] > 0:
            raise ScenarioError(source, f"{key}.{name}", f"{name} must be > 0, got {p[name]:g}")
    if dist.kind == "lognormal" and not p["median"] > 0:
        raise ScenarioError(source, f"{key}.median", f"a lognormal's median must be > 0, got {p['median']:g}")
    if "low" in p and "high" in p and not p["low"] < p["high"]:
        raise ScenarioError(source, f"{key}.low", f"low ({p['low']:g}) must be below high ({p['high']:g})")
    if dist.kind == "triangular" and not p["low"] <= p["mode"] <= p["high"]:
        raise ScenarioError(source, f"{key}.mode", f"mode ({p['mode']:g}) must lie within low..high")
    if dist.kind == "integers" and (p["low"] != int(p["low"]) or p["high"] != int(p["high"])):
        raise ScenarioError(source, f"{key}.low", "integers draws whole numbers: low and high must be whole")
    if dist.kind in ("normal", "lognormal") and dist.kept_probability() < MIN_KEPT_PROBABILITY:
        raise ScenarioError(source, f"{key}.low", f"the truncation excludes everything: {dist.describe()} keeps "
                            f"a probability of {dist.kept_probability():.3g}")


_CALL = re.compile(r"^\s*([a-z_]+)\s*\((.*)\)\s*$")


def distribution_from_text(path: str, text: str, source: str) -> Distribution | None:
    """A distribution from a ``--sweep`` value, ``normal(20 mohm, 1 mohm)``, ``uniform(20 degC, 30 degC)``,
    ``triangular(LOW, MODE, HIGH)``, ``lognormal(MEDIAN, SIGMA)``, ``empirical(V1, V2, ...)``,
    ``integers(LOW, HIGH)``; ``low=`` / ``high=`` truncate a normal or a lognormal. None when the text is no call."""
    match = _CALL.match(text)
    if not match or match.group(1) not in DISTRIBUTIONS:
        return None
    kind = match.group(1)
    args = [a.strip() for a in match.group(2).split(",") if a.strip()]
    spec: dict[str, Any] = {"distribution": kind}
    form = DISTRIBUTIONS[kind]
    positional = [*form["location"], *form["scale"], *form["number"]]
    plain = [a for a in args if "=" not in a]
    for name, value in (a.split("=", 1) for a in args if "=" in a):
        spec[name.strip()] = value.strip()
    if kind == "empirical":
        spec["values"] = plain
    else:
        if len(plain) != len(positional):
            raise ScenarioError(source, f"sweep.{path}", f"{kind}() takes {', '.join(positional)} "
                                f"(got {len(plain)} values in {text!r})")
        spec.update(dict(zip(positional, plain, strict=True)))
    return parse_distribution(path, spec, source)


@dataclass(frozen=True)
class Sampling:
    """The uncertain keys of a sweep and how they are drawn: reproducible from ``seed``.

    Attributes
    ----------
    distributions : tuple of Distribution
        The sampled keys, drawn jointly.
    samples : int
        ``N``: the points of the design (a ``saltelli`` design runs ``N (d + 2)``).
    seed : int
        The seed of the design's random numbers.
    method : str
        A name of :data:`SAMPLERS`.
    percentiles : tuple of float
        The percentiles the statistics report [%].
    """

    distributions: tuple[Distribution, ...]
    samples: int
    seed: int
    method: str
    percentiles: tuple[float, ...] = (5.0, 50.0, 95.0)
    _cache: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def size(self) -> int:
        """Scenarios per grid point: ``N``, or ``N (d + 2)`` for the Saltelli design."""
        d = len(self.distributions)
        return self.samples * (d + 2) if self.method == "saltelli" else self.samples

    def uniforms(self) -> np.ndarray:
        """The design's uniform numbers, shape ``(size, d)`` (:func:`design`), computed once."""
        if "u" not in self._cache:
            self._cache["u"] = design(self.method, len(self.distributions), self.samples, self.seed)
        return self._cache["u"]

    def values(self) -> np.ndarray:
        """The sampled values of every key [each key's unit], shape ``(size, d)``."""
        if "x" not in self._cache:
            u = self.uniforms()
            self._cache["x"] = np.column_stack([d.ppf(u[:, j]) for j, d in enumerate(self.distributions)])
        return self._cache["x"]

    def blocks(self) -> np.ndarray:
        """The block of each point: ``A``, ``B``, ``AB_1``... for the Saltelli design, else ``A`` for all."""
        if self.method != "saltelli":
            return np.array(["A"] * self.size, dtype=object)
        names = ["A", "B", *(f"AB_{i + 1}" for i in range(len(self.distributions)))]
        return np.repeat(np.array(names, dtype=object), self.samples)

    def overrides(self, i: int) -> dict[str, Any]:
        """Overrides of sample ``i``: each key's value as the scenario file writes it."""
        row = self.values()[i]
        out: dict[str, Any] = {}
        for dist, x in zip(self.distributions, row, strict=True):
            if dist.kind == "integers":
                out[dist.path] = int(x)
            else:
                out[dist.path] = f"{float(x)!r} {dist.unit}" if dist.unit else float(x)
        return out

    def fingerprint(self) -> list:
        """Everything that defines the samples, as JSON-able data (for a sweep's resume identity)."""
        return [[d.fingerprint() for d in self.distributions], self.samples, self.seed, self.method,
                [repr(p) for p in self.percentiles]]


def design(method: str, d: int, n: int, seed: int) -> np.ndarray:
    """Uniform numbers of a sample design in [0, 1), shape ``(n, d)`` (``(n (d + 2), d)`` for ``saltelli``).

    Parameters
    ----------
    method : str
        A name of :data:`SAMPLERS`.
    d : int
        Number of inputs [-].
    n : int
        Points of the design [-] (a power of 2 for ``saltelli``, as scipy's Sobol' indices ask).
    seed : int
        Seed of the generator [-]; the same seed gives the same design.

    Returns
    -------
    float64 array
        Rows in the order ``A``, then for ``saltelli`` ``B`` and ``AB_1`` ... ``AB_d``.
    """
    import warnings

    from scipy.stats import qmc

    rng = np.random.default_rng(seed)
    if method == "random":
        return rng.random((n, d))
    if method == "latin_hypercube":
        return qmc.LatinHypercube(d, rng=rng).random(n)
    with warnings.catch_warnings():  # balance needs a power of 2; the count is the user's choice for "sobol"
        warnings.simplefilter("ignore", UserWarning)
        if method == "sobol":
            return qmc.Sobol(d, rng=rng).random(n)
        base = qmc.Sobol(2 * d, rng=rng).random(n)
    a, b = base[:, :d], base[:, d:]
    blocks = [a, b]
    for i in range(d):
        ab = a.copy()
        ab[:, i] = b[:, i]
        blocks.append(ab)
    return np.vstack(blocks)
