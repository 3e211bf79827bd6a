"""Warnings and stress indicators: what an engineer must not miss in a result.

Pure functions of the SI problem and the reported series. The warnings are
never silent: they go into the summary's ``warnings`` list, the terminal and the
report. The plausibility ranges are those of common practice for Li-ion cells
(from memory): specific heat 800-1100 J/(kg K), activation energy of the cell
resistance 15-50 kJ/mol, entropic coefficient up to about 0.5 mV/K in magnitude,
thermal conductivity 0.2-30 W/(m K) (radial to axial).

Owns the warnings about a result's validity and the stress indicators; imports
from engine/, physics/ and analysis/ only, never from output/, fit/, the API
or the command line.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

import numpy as np

from thermoelec.engine.problem import Problem
from thermoelec.physics.cell import Cell, ResistanceLaw, arrhenius_ageing_rate
from thermoelec.physics.constants import COULOMBS_PER_AH, ZERO_CELSIUS
from thermoelec.physics.correlations import AIR_PRANDTL, AIR_TEMPERATURE, CORRELATIONS, Correlation, ValidityRange
from thermoelec.physics.thermal import LUMPED_BIOT_LIMIT, biot_number

__all__ = [
    "PLAUSIBLE_RANGES",
    "arrhenius_equivalent_time",
    "biot_check",
    "correlation_warnings",
    "plausibility_warnings",
    "resolution_warnings",
    "stress_indicators",
    "table_range_warnings",
    "time_above",
]

#: Plausible ranges (common practice for Li-ion cells, from memory), SI units.
PLAUSIBLE_RANGES: dict[str, tuple[float, float, str]] = {
    "specific_heat": (800.0, 1100.0, "J/kg/K"),
    "activation_energy": (15e3, 50e3, "J/mol"),
    "entropic_magnitude": (0.0, 0.5e-3, "V/K"),
    "thermal_conductivity": (0.2, 30.0, "W/m/K"),
}

#: Charging-temperature thresholds of the stress indicators (common practice) [K].
CHARGE_STRESS_TEMPERATURES = {"0degC": ZERO_CELSIUS, "10degC": ZERO_CELSIUS + 10.0}


def _degc(kelvin: float) -> float:
    return float(kelvin) - ZERO_CELSIUS


# ---------------------------------------------------------------------------
# Time measures of a sampled series
# ---------------------------------------------------------------------------


def time_above(times: np.ndarray, values: np.ndarray, threshold: float,
               where: np.ndarray | None = None) -> float:
    """Time [s] during which a piecewise-linear series exceeds ``threshold``.

    Between two output rows the series is taken as linear, so a crossing inside
    an interval counts the fraction of the interval beyond the crossing (not the
    whole interval). ``where`` (one flag per interval) restricts the count to
    some intervals, for example those spent charging.
    """
    if len(times) < 2:
        return 0.0
    dt = np.diff(times)
    a = values[:-1] - threshold
    b = values[1:] - threshold
    fraction = np.where((a > 0) & (b > 0), 1.0, 0.0)
    rising = (a <= 0) & (b > 0)
    falling = (a > 0) & (b <= 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        fraction = np.where(rising, b / (b - a), fraction)
        fraction = np.where(falling, a / (a - b), fraction)
    if where is not None:
        fraction = fraction * where
    return float(np.sum(dt * fraction))


def arrhenius_equivalent_time(times: np.ndarray, temperatures: np.ndarray, activation_energy: float,
                              reference_temperature: float) -> float:
    """Time at ``reference_temperature`` that causes the same ageing as the series [s].

    ``t_eq = ∫ exp(-Ea/R (1/T - 1/T_ref)) dt`` (trapezoidal rule over the output
    rows): the usual Arrhenius acceleration-factor approach to rank thermal
    stress.

    References
    ----------
    S. Arrhenius, Z. Phys. Chem. 4 (1889) 226; as an ageing acceleration factor
    e.g. J. Wang et al., J. Power Sources 196 (2011) 3942.
    """
    if len(times) < 2:
        return 0.0
    rate = arrhenius_ageing_rate(np.asarray(temperatures, dtype=float), activation_energy, reference_temperature)
    return float(np.trapezoid(rate, times))


def stress_indicators(problem: Problem, times: np.ndarray, current: np.ndarray,
                      cell_temperature: np.ndarray, coldest: np.ndarray | None = None) -> dict[str, Any]:
    """Ageing and abuse stress of a mission: time hot, cold charging, C-rates, Arrhenius time.

    Parameters
    ----------
    problem : Problem
        The simulated problem (limits, stress settings, capacity, layout).
    times, current, cell_temperature : arrays
        Output rows [s], pack current [A] (> 0 discharging), cell temperature [K] (of the
        hottest cell of a resolved pack: the times hot and the Arrhenius time are its).
    coldest : array, optional
        Temperature of the coldest cell [K], for the times charging cold (default ``cell_temperature``).
    """
    stress = problem.stress
    charging = 0.5 * (current[:-1] + current[1:]) < 0.0 if len(current) > 1 else np.zeros(0, bool)
    cold = -(cell_temperature if coldest is None else coldest)  # time below T  ==  time "above" -T
    capacity_ah = problem.cell.capacity / COULOMBS_PER_AH
    cell_current = current / problem.pack.parallel
    duration = float(times[-1] - times[0]) if len(times) else 0.0
    equivalent = arrhenius_equivalent_time(times, cell_temperature, stress.activation_energy,
                                           stress.reference_temperature)
    indicators: dict[str, Any] = {
        "hot_temperature_degC": _degc(stress.hot_temperature),
        "time_above_hot_temperature_s": time_above(times, cell_temperature, stress.hot_temperature),
        "time_above_temperature_limit_s": time_above(times, cell_temperature,
                                                     problem.limits.cell_temperature_max),
    }
    for label, threshold in CHARGE_STRESS_TEMPERATURES.items():
        indicators[f"time_charging_below_{label}_s"] = time_above(times, cold, -threshold, charging)
    indicators.update({
        "c_rate_discharge_max": float(max(cell_current.max(), 0.0) / capacity_ah),
        "c_rate_charge_max": float(max(-cell_current.min(), 0.0) / capacity_ah) + 0.0,  # no -0.0
        "ageing_activation_energy_kJ_per_mol": stress.activation_energy / 1e3,
        "ageing_reference_temperature_degC": _degc(stress.reference_temperature),
        "equivalent_time_at_reference_s": equivalent,
        "ageing_acceleration_factor": equivalent / duration if duration > 0 else None,
    })
    return indicators


# ---------------------------------------------------------------------------
# Warnings about the model's validity
# ---------------------------------------------------------------------------


def _resistance_laws(cell: Cell) -> Iterator[tuple[str, ResistanceLaw]]:
    yield "cell.r0", cell.r0
    for k, pair in enumerate(cell.rc):
        yield f"cell.rc[{k + 1}].resistance", pair.resistance


def table_range_warnings(cell: Cell, soc: np.ndarray, temperature: np.ndarray) -> list[str]:
    """Warnings where the SoC or cell temperature left a table's range (the table is clamped there)."""
    warnings = []
    soc_low, soc_high = float(np.min(soc)), float(np.max(soc))
    t_low, t_high = float(np.min(temperature)), float(np.max(temperature))
    for key, law in _resistance_laws(cell):
        if len(law.soc) > 1 and (soc_low < law.soc[0] - 1e-9 or soc_high > law.soc[-1] + 1e-9):
            warnings.append(
                f"SoC ran over {soc_low:.3f}..{soc_high:.3f}, outside the {key} table's SoC range "
                f"{law.soc[0]:.3f}..{law.soc[-1]:.3f}: the resistance was held at its edge value (clamped)")
        if len(law.temperature) > 1 and (t_low < law.temperature[0] - 1e-9 or t_high > law.temperature[-1] + 1e-9):
            warnings.append(
                f"cell temperature ran over {_degc(t_low):.1f}..{_degc(t_high):.1f} degC, outside the {key} "
                f"table's temperature range {_degc(law.temperature[0]):.1f}..{_degc(law.temperature[-1]):.1f} "
                "degC: the resistance was held at its edge value (clamped), not extrapolated")
    return warnings


def biot_check(problem: Problem) -> tuple[float | None, list[str]]:
    """Biot number of one cell and a warning when the lumped cell node is not valid (``Bi >= 0.1``).

    The surface coefficient is the cells' total conductance to sink and ambient
    spread over the outer surface of all cells, ``h = (G_cs + G_ca) / (N A)``,
    and ``L_c = V / A`` (Incropera et al., 6th ed., §5.1). In a resolved pack it
    is the best-cooled cell's: its own paths to sink, ambient, coolant and
    neighbours over its surface. Without the cell geometry and conductivity the
    check is not made.
    """
    geometry = problem.cell.geometry
    if geometry is None:
        return None, []
    n_cells = problem.pack.series * problem.pack.parallel
    area = geometry.surface_area()
    volume = geometry.volume()
    conductance = problem.thermal.cell_to_sink + problem.thermal.cell_to_ambient
    coefficient = conductance / (n_cells * area)
    rp = problem.resolved
    if rp is not None:
        each = rp.cell_to_sink + rp.cell_to_ambient + rp.plate_conductance
        for (i, j), g in zip(rp.layout.neighbours, rp.neighbour_conductance, strict=True):
            each[i] += g
            each[j] += g
        coefficient = float(each.max()) / area
    bi = float(biot_number(coefficient, volume, area, geometry.thermal_conductivity))
    if bi < LUMPED_BIOT_LIMIT:
        return bi, []
    return bi, [
        f"Biot number {bi:.3g} >= {LUMPED_BIOT_LIMIT} ({geometry.shape} cell, h = {coefficient:.3g} W/m^2/K from "
        f"{'the best-cooled cell' if rp is not None else 'cell_to_sink + cell_to_ambient'} over the cells' surface, "
        f"L_c = V/A = {1e3 * volume / area:.3g} mm, "
        f"k = {geometry.thermal_conductivity:.3g} W/m/K): one lumped cell node does not hold; the cell core runs "
        "hotter than the reported cell temperature"]


def _outside(value: float, key: str, what: str, scale: float = 1.0, unit_label: str | None = None) -> list[str]:
    low, high, unit = PLAUSIBLE_RANGES[what]
    if low <= value <= high:
        return []
    label = unit_label or unit
    return [f"{key} = {value * scale:.4g} {label} is outside the plausible range "
            f"{low * scale:.4g}..{high * scale:.4g} {label} for Li-ion cells (common practice): check the value "
            "and its unit"]


def plausibility_warnings(cell: Cell) -> list[str]:
    """Warnings for cell parameters outside the plausible ranges of :data:`PLAUSIBLE_RANGES`."""
    warnings = _outside(cell.specific_heat, "cell.specific_heat", "specific_heat")
    for key, law in _resistance_laws(cell):
        if law.activation_energy > 0:
            key = key.removesuffix(".resistance")
            warnings += _outside(law.activation_energy, f"{key}.activation_energy", "activation_energy", 1e-3,
                                 "kJ/mol")
    entropic = float(np.max(np.abs(cell.ocv_entropic))) if len(cell.ocv_entropic) else 0.0
    warnings += _outside(entropic, "largest |cell.ocv.entropic|", "entropic_magnitude", 1e3, "mV/K")
    if cell.geometry is not None:
        warnings += _outside(cell.geometry.thermal_conductivity, "cell.thermal_conductivity", "thermal_conductivity")
    return warnings


def shortest_rc_time_constant(cell: Cell) -> float | None:
    """Smallest RC time constant at the reference temperature, over the SoC grid [s]."""
    taus = []
    for pair in cell.rc:
        law = pair.resistance
        if pair.time_constant is not None:
            taus.append(pair.time_constant)
        else:
            taus.append(float(pair.capacitance * np.min(law.values)))
    return min(taus) if taus else None


def resolution_warnings(problem: Problem, output_interval: float) -> list[str]:
    """Warn when the output interval hides dynamics between the reported rows.

    Stops and events are located by the integrator whatever the interval, and
    every segment boundary is reported; but an RC relaxation faster than the
    output interval happens between rows, and so does any peak of it.
    """
    tau = shortest_rc_time_constant(problem.cell)
    if tau is not None and output_interval > tau:
        return [f"solver.output_interval ({output_interval:g} s) is longer than the shortest RC time constant "
                f"({tau:.3g} s): the reported series skips the fast voltage relaxation between rows; stops and "
                "events are still located exactly, but give an interval below the time constant to see it"]
    return []


#: Below this sink-to-air difference [K] free convection carries next to nothing, so its range is not checked.
FREE_CONVECTION_MIN_DIFFERENCE = 0.5


def _range_warning(entry: Correlation, rng: ValidityRange, values: np.ndarray) -> list[str]:
    if values.size == 0 or rng.contains(values):
        return []
    where = f"{entry.method}, {rng.form}" if rng.form else entry.method
    return [f"the {entry.name} correlation ({where}) is valid for {rng.describe()}, but the run reached "
            f"{rng.quantity} = {float(values.min()):.3g}..{float(values.max()):.3g}: its coefficient is "
            "extrapolated there"]


def correlation_warnings(problem: Problem, series: dict[str, np.ndarray]) -> list[str]:
    """Warn where a convection correlation was used outside its validity range, or air properties were held.

    The ranges (in Re, Re Pr, Ra or Pr) are those of the correlation's
    entry in :data:`thermoelec.physics.correlations.CORRELATIONS`, each checked
    over the output rows where it applies: a forced correlation while the air
    moves, a natural one where the sink and the air differ by more than
    :data:`FREE_CONVECTION_MIN_DIFFERENCE`, and a range of one surface side
    (hot or cold) only where the sink is on that side.
    """
    conv = problem.thermal.convection
    if conv is None:
        return []
    warnings: list[str] = []
    ts = series["sink_temperature_degC"] + ZERO_CELSIUS
    ta = series["ambient_temperature_degC"] + ZERO_CELSIUS
    film = 0.5 * (ts + ta)
    if film.min() < AIR_TEMPERATURE[0] or film.max() > AIR_TEMPERATURE[-1]:
        warnings.append(f"air film temperature {_degc(film.min()):.1f}..{_degc(film.max()):.1f} degC leaves the "
                        f"air property table ({_degc(AIR_TEMPERATURE[0]):.0f}..{_degc(AIR_TEMPERATURE[-1]):.0f} "
                        "degC): properties held at its edge")
    reynolds, rayleigh = series["reynolds_number"], series["rayleigh_number"]
    pr = np.interp(film, AIR_TEMPERATURE, AIR_PRANDTL)
    hot = ts > ta
    used = {"forced": reynolds > 0, "natural": np.abs(ts - ta) > FREE_CONVECTION_MIN_DIFFERENCE}
    for name in (conv.forced, conv.natural):
        if name is None:
            continue
        entry = CORRELATIONS[name]
        rows = used[entry.kind]
        for rng in entry.validity:
            where = rows & rng.applies(hot)
            warnings += _range_warning(entry, rng, rng.value(reynolds, rayleigh, pr)[where])
    return warnings
