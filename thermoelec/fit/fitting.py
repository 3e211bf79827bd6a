"""Cell and thermal parameters from test logs: OCV, pulse resistance and RC pairs, Arrhenius, thermal.

- OCV from a slow discharge and a slow charge: the two curves against SoC
  (charge counted from the logs), combined with current weights so that the
  resistive drop cancels exactly for a linear resistance,
  ``U = (I_c V_dis + I_d V_ch) / (I_c + I_d)``; the hysteresis half-gap is what
  is left of ``(V_ch - V_dis) / 2`` after the resistive part (common practice).
- Pulse (HPPC) windows: R0 and the RC pairs by nonlinear least squares
  (``scipy.optimize.least_squares``) of the discrete-time Thevenin model with
  the measured current held between samples (zero-order hold; G. L. Plett,
  *Battery Management Systems*, Vol. I, ch. 2), the OCV from the OCV fit, and a
  free voltage offset. 95 % confidence intervals from the Jacobian at the
  solution, ``cov = s² (JᵀJ)⁻¹`` (Gauss-Newton linearisation; e.g. Seber & Wild,
  *Nonlinear Regression*, Wiley 1989, §2.1).
- Arrhenius: ``ln R = ln R_ref(z) + Ea/R_gas (1/T - 1/T_ref)`` by linear least
  squares, one activation energy shared by every SoC.
- Thermal: the lumped one-node (``C dT/dt = P - G (T - Ta)``) or two-node rig,
  integrated exactly between samples (matrix exponential of the linear system
  with the inputs held), fitted by least squares on the temperature traces.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import expm
from scipy.optimize import least_squares

from thermoelec.fit.logs import Pulse, TestLog, find_pulses
from thermoelec.inputs import ScenarioError
from thermoelec.physics.cell import GAS_CONSTANT

__all__ = [
    "ArrheniusFit",
    "OcvFit",
    "PulseFit",
    "ResidualStructure",
    "ThermalFit",
    "fit_arrhenius",
    "fit_ocv",
    "fit_pulse_log",
    "fit_thermal",
    "ocv_interpolation_error",
    "tabulate_pulses",
]

Z95 = 1.959963984540054  # two-sided 95 % quantile of the normal distribution


@dataclass(frozen=True)
class ResidualStructure:
    """How far the residuals of a fit are from independent noise.

    Attributes
    ----------
    lag1 : float
        Lag-1 autocorrelation of the residuals [-] (0 for white noise; near 1 for a smooth,
        systematic residual: a sign of model mismatch).
    durbin_watson : float
        ``sum (r_t - r_t-1)^2 / sum r_t^2`` [-], about ``2 (1 - lag1)``: 2 for white noise
        (J. Durbin, G. S. Watson, Biometrika 37 (1950) 409).
    bandwidth : int
        Lags of the Newey-West covariance [-] (Andrews' AR(1) plug-in).
    largest : float
        The largest residual magnitude [the data's unit].
    inflation : float
        Width of the HAC interval over that of the independent-noise one, the median over the parameters [-].
    """

    lag1: float
    durbin_watson: float
    bandwidth: int
    largest: float
    inflation: float

    @property
    def mismatch(self) -> bool:
        """The residuals are structured (lag-1 autocorrelation above 0.5): the model misses something."""
        return self.lag1 > MISMATCH_LAG1


#: A lag-1 autocorrelation of the residuals above this flags a model mismatch [-].
MISMATCH_LAG1 = 0.5


def _andrews_bandwidth(residual: np.ndarray) -> tuple[int, float]:
    """Lags of the Bartlett-kernel HAC covariance by Andrews' AR(1) plug-in rule, and the lag-1 autocorrelation.

    ``L = 1.1447 (alpha n)^(1/3)``, ``alpha = 4 rho^2 / ((1 - rho)^2 (1 + rho)^2)``
    (D. W. K. Andrews, Econometrica 59 (1991) 817, eq. 6.4 and table I, Bartlett kernel).
    """
    n = len(residual)
    centred = residual - residual.mean()
    denominator = float(centred @ centred)
    rho = float(centred[1:] @ centred[:-1]) / denominator if denominator > 0 else 0.0
    rho = min(max(rho, -0.99), 0.99)
    alpha = 4 * rho**2 / ((1 - rho) ** 2 * (1 + rho) ** 2)
    return int(min(max(np.ceil(1.1447 * (alpha * n) ** (1 / 3)), 0), n - 1)), rho


def _confidence(result, structure: bool = False):
    """Half-widths of 95 % confidence intervals of a least-squares solution, robust to autocorrelated residuals.

    The covariance is the sandwich ``(J'J)^-1 S (J'J)^-1`` with ``S`` the Newey-West
    heteroskedasticity and autocorrelation consistent estimate, Bartlett weights
    ``1 - l / (L + 1)`` over ``L`` lags chosen by Andrews' rule (W. K. Newey, K. D. West,
    Econometrica 55 (1987) 703; D. W. K. Andrews, Econometrica 59 (1991) 817). For white
    residuals it is about the usual ``s^2 (J'J)^-1`` (Seber & Wild, *Nonlinear Regression*,
    1989, §2.1); for a smooth systematic residual (a model that misses something) it widens
    the intervals instead of claiming a precision the fit does not have. With ``structure``
    the :class:`ResidualStructure` is returned too.
    """
    jac, residual = np.asarray(result.jac), np.asarray(result.fun)
    n, k = jac.shape
    try:
        bread = np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        half = np.full(len(result.x), np.inf)
        return (half, ResidualStructure(0.0, 2.0, 0, float(np.max(np.abs(residual))), 1.0)) if structure else half
    lags, rho = _andrews_bandwidth(residual)
    scores = jac * residual[:, None]
    meat = scores.T @ scores
    for lag in range(1, lags + 1):
        gamma = scores[lag:].T @ scores[:-lag]
        meat += (1.0 - lag / (lags + 1.0)) * (gamma + gamma.T)
    scale = n / max(n - k, 1)
    hac = np.clip(np.diag(bread @ meat @ bread) * scale, 0.0, None)
    white = np.clip(np.diag(bread) * float(residual @ residual) / max(n - k, 1), 0.0, None)
    half = Z95 * np.sqrt(np.maximum(hac, white))  # never narrower than the independent-noise interval
    if not structure:
        return half
    dw = float(np.sum(np.diff(residual) ** 2) / max(float(residual @ residual), 1e-300))
    ratio = np.sqrt(np.maximum(hac, white) / np.where(white > 0, white, 1.0))
    return half, ResidualStructure(rho, dw, lags, float(np.max(np.abs(residual))), float(np.median(ratio)))


# ---------------------------------------------------------------------------
# OCV
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class OcvFit:
    """OCV table and capacity from a slow discharge and charge."""

    soc: np.ndarray
    voltage: np.ndarray
    capacity_C: float
    charge_capacity_C: float
    half_gap_V: np.ndarray
    hysteresis_V: np.ndarray | None
    discharge_current_A: float
    charge_current_A: float
    curves: dict[str, np.ndarray] = field(default_factory=dict)


def _local_linear(x: np.ndarray, y: np.ndarray, grid: np.ndarray, half_width: float) -> np.ndarray:
    """Local linear regression of ``y(x)`` at each grid point (noise averages out, slope bias does not)."""
    out = np.empty(len(grid))
    for i, g in enumerate(grid):
        mask = np.abs(x - g) <= half_width
        if mask.sum() < 3:
            out[i] = np.interp(g, x, y)
            continue
        out[i] = np.polyfit(x[mask] - g, y[mask], 1)[1]  # the intercept at g
    return out


def fit_ocv(discharge: TestLog, charge: TestLog, points: int = 21, resistance: float | None = None,
            window: float = 0.002) -> OcvFit:
    """OCV against SoC from a slow full discharge and a slow full charge.

    The discharge defines the capacity (charge counted from full to empty) and
    SoC ``1 - q / Q``; the charge its own SoC ``q / Q_charge``. Each curve is
    read at the grid points by a local linear fit over ``±window`` of SoC (the
    noise averages out; a kink of the OCV biases it by at most its slope change
    times ``window / 4``). ``resistance``
    (R0 plus the RC resistances, Ω) turns the half-gap into a hysteresis.
    """
    for log, sign, what in ((discharge, 1.0, "discharge"), (charge, -1.0, "charge")):
        assert log.current is not None
        if np.median(sign * log.current) <= 0:
            raise ScenarioError(log.name, "current", f"this log should be the slow {what}, but its current is "
                                f"{'not positive' if sign > 0 else 'not negative'} (current > 0 discharges; check "
                                "the sign convention)")
    q_dis = discharge.charge()
    q_ch = -charge.charge()
    capacity, capacity_charge = float(q_dis[-1]), float(q_ch[-1])
    z_dis = 1.0 - q_dis / capacity
    z_ch = q_ch / capacity_charge
    grid = np.linspace(0.0, 1.0, points)
    v_dis = _local_linear(z_dis, discharge.voltage, grid, window)
    v_ch = _local_linear(z_ch, charge.voltage, grid, window)
    i_d = float(np.median(discharge.current))
    i_c = float(-np.median(charge.current))
    ocv = (i_c * v_dis + i_d * v_ch) / (i_c + i_d)
    half_gap = 0.5 * (v_ch - v_dis)
    hysteresis = None if resistance is None else half_gap - 0.5 * (i_d + i_c) * resistance
    curves = {"discharge_soc": z_dis, "discharge_voltage": discharge.voltage, "charge_soc": z_ch,
              "charge_voltage": charge.voltage}
    return OcvFit(grid, ocv, capacity, capacity_charge, half_gap, hysteresis, i_d, i_c, curves)


# ---------------------------------------------------------------------------
# Pulses
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class PulseFit:
    """One pulse window: SoC and temperature, R0, RC pairs, 95 % intervals, data and model."""

    soc: float
    temperature: float
    r0: float
    r0_step: float
    rc_resistance: np.ndarray
    rc_time_constant: np.ndarray
    r0_ci: float
    rc_resistance_ci: np.ndarray
    rc_time_constant_ci: np.ndarray
    offset_V: float
    rms_V: float
    time: np.ndarray
    voltage: np.ndarray
    model: np.ndarray
    residuals: ResidualStructure | None = None
    ocv_error_V: float = 0.0


def _thevenin_response(params: np.ndarray, current: np.ndarray, dt: np.ndarray, ocv: np.ndarray,
                       n_rc: int) -> np.ndarray:
    r0, offset = params[0], params[1]
    voltage = ocv + offset - current * r0
    for k in range(n_rc):
        r, tau = params[2 + 2 * k], np.exp(params[3 + 2 * k])
        decay = np.exp(-dt / tau)
        v = np.zeros(len(current))
        for n in range(len(current) - 1):
            v[n + 1] = v[n] * decay[n] + r * current[n] * (1.0 - decay[n])
        voltage = voltage - v
    return voltage


def fit_window(log: TestLog, window: Pulse, soc: np.ndarray, ocv_soc: np.ndarray, ocv_voltage: np.ndarray,
               n_rc: int) -> PulseFit:
    """Fit R0 and ``n_rc`` RC pairs to one pulse window (starting from rest); ``soc`` per sample of the log."""
    sl = slice(window.start, window.end + 1)
    time, current, voltage = log.time[sl], log.current[sl], log.voltage[sl]
    dt = np.diff(time)
    z = soc[sl]
    loaded = np.abs(current) > 0.02 * float(np.max(np.abs(current)))
    z0 = float(np.mean(z[loaded]))  # the SoC the pulses probe
    ocv = np.interp(z, ocv_soc, ocv_voltage)
    first = window.pulses[0][0] - window.start
    step = current[first] - current[first - 1]
    r0_step = float(-(voltage[first] - voltage[first - 1]) / step)
    guess = [max(r0_step, 1e-6), 0.0]
    span = float(time[-1] - time[0])
    for k in range(n_rc):
        guess += [0.5 * r0_step / n_rc, np.log(10.0 * 10.0**k)]
    low = [0.0, -0.5] + [0.0, np.log(0.5 * float(np.min(dt)))] * n_rc
    high = [np.inf, 0.5] + [np.inf, np.log(10.0 * span)] * n_rc

    def residual(params: np.ndarray) -> np.ndarray:
        return _thevenin_response(params, current, dt, ocv, n_rc) - voltage

    result = least_squares(residual, guess, bounds=(low, high), x_scale="jac", method="trf")
    ci, residuals = _confidence(result, structure=True)
    x = result.x
    taus = np.exp(x[3::2][:n_rc])
    order = np.argsort(taus)
    rc_r = x[2::2][:n_rc][order]
    rc_r_ci = ci[2::2][:n_rc][order]
    tau_ci = taus[order] * ci[3::2][:n_rc][order]  # delta method on ln tau
    temperature = float(np.mean(log.temperature[sl])) if log.temperature is not None else float("nan")
    return PulseFit(z0, temperature, float(x[0]), r0_step, rc_r, taus[order], float(ci[0]), rc_r_ci, tau_ci,
                    float(x[1]), float(np.sqrt(np.mean(result.fun**2))), time, voltage, voltage + result.fun,
                    residuals, ocv_interpolation_error(ocv_soc, ocv_voltage, float(np.min(z)), float(np.max(z))))


def ocv_interpolation_error(ocv_soc: np.ndarray, ocv_voltage: np.ndarray, low: float, high: float) -> float:
    """The error the OCV table's linear interpolation may make over a pulse window's SoC span [V].

    The window's model reads the OCV at every sample's SoC from the table, so its local slope is
    taken into account; what the table cannot give is its curvature between grid points. The bound
    is ``h^2 |U''| / 8`` over the intervals the window touches (the error of linear interpolation,
    e.g. Burden & Faires, *Numerical Analysis*, thm. 3.3), with ``|U''|`` from the second differences
    of the table itself (so it measures the grid against its own curvature; 0 where the table is linear).
    """
    z, u = np.asarray(ocv_soc, float), np.asarray(ocv_voltage, float)
    if len(z) < 3:
        return 0.0
    slopes = np.diff(u) / np.diff(z)
    curvature = np.abs(np.diff(slopes)) / (0.5 * (z[2:] - z[:-2]))  # at the inner grid points
    h = np.diff(z)
    worst = 0.0
    for i in range(len(h)):
        if z[i + 1] < low or z[i] > high:
            continue
        near = [curvature[j] for j in (i - 1, i) if 0 <= j < len(curvature)]
        worst = max(worst, h[i] ** 2 * max(near) / 8.0)
    return float(worst)


def fit_pulse_log(log: TestLog, capacity: float, ocv_soc: np.ndarray, ocv_voltage: np.ndarray, n_rc: int = 1,
                  temperature: float | None = None) -> list[PulseFit]:
    """Every pulse window of one log (at one temperature)."""
    if log.temperature is None and temperature is None:
        raise ScenarioError(log.name, "temperature", "the log has no temperature column: give --temperature")
    # SoC by charge counting from the first sample, which must be relaxed (the test starts with a rest);
    # counting beats reading each pulse's rest voltage through the OCV where the OCV is steep
    soc = float(np.interp(log.voltage[0], ocv_voltage, ocv_soc)) - log.charge() / capacity
    fits = [fit_window(log, w, soc, ocv_soc, ocv_voltage, n_rc) for w in find_pulses(log)]
    if temperature is not None:
        fits = [PulseFit(**{**f.__dict__, "temperature": temperature}) for f in fits]
    return fits


@dataclass(frozen=True)
class PulseTables:
    """Parameters tabulated over SoC (rows: temperatures), ready for the scenario format."""

    soc: np.ndarray
    temperature: np.ndarray
    r0: np.ndarray               # (n_t, n_z) [Ω]
    rc_resistance: np.ndarray    # (n_rc, n_t, n_z) [Ω]
    rc_time_constant: np.ndarray  # (n_rc,) [s] at the reference temperature
    reference_temperature: float


def tabulate_pulses(per_log: list[list[PulseFit]], reference_temperature: float = 298.15) -> PulseTables:
    """Put the pulse fits of several temperatures on one SoC axis (that of the first log).

    The RC time constants come out at the reference temperature (the log
    temperature nearest to it), scaled as the scenario format does:
    ``tau(T) = R(z, T) C`` with ``C = tau_ref / R(z, T_ref)``.
    """
    per_log = sorted(per_log, key=lambda fits: fits[0].temperature)
    axis = np.sort(np.array([f.soc for f in per_log[0]]))
    temperature = np.array([float(np.mean([f.temperature for f in fits])) for fits in per_log])
    n_rc = len(per_log[0][0].rc_resistance)

    def on_axis(fits: list[PulseFit], values: np.ndarray) -> np.ndarray:
        z = np.array([f.soc for f in fits])
        order = np.argsort(z)
        return np.interp(axis, z[order], values[order])

    r0 = np.array([on_axis(fits, np.array([f.r0 for f in fits])) for fits in per_log])
    rc_r = np.array([[on_axis(fits, np.array([f.rc_resistance[k] for f in fits])) for fits in per_log]
                     for k in range(n_rc)])
    ref = int(np.argmin(np.abs(temperature - reference_temperature)))
    taus = []
    for k in range(n_rc):
        scaled = []
        for i, fits in enumerate(per_log):
            tau = on_axis(fits, np.array([f.rc_time_constant[k] for f in fits]))
            scaled.append(tau * rc_r[k, ref] / rc_r[k, i])
        taus.append(float(np.median(np.concatenate(scaled))))
    return PulseTables(axis, temperature, r0, rc_r, np.array(taus), float(temperature[ref]))


@dataclass(frozen=True)
class ArrheniusFit:
    """``R(z, T) = R_ref(z) exp(Ea/R (1/T - 1/T_ref))``."""

    activation_energy: float
    activation_energy_ci: float
    reference_temperature: float
    reference_values: np.ndarray
    rms_log_residual: float


def fit_arrhenius(temperature: np.ndarray, table: np.ndarray, reference_temperature: float) -> ArrheniusFit:
    """One activation energy shared by every SoC column of ``table`` (rows: ``temperature`` [K])."""
    n_t, n_z = table.shape
    if n_t < 2:
        raise ValueError("an Arrhenius fit needs at least two temperatures")
    rows = []
    for i in range(n_t):
        for j in range(n_z):
            row = np.zeros(n_z + 1)
            row[j] = 1.0
            row[-1] = (1.0 / temperature[i] - 1.0 / reference_temperature) / GAS_CONSTANT
            rows.append(row)
    design = np.array(rows)
    target = np.log(table).ravel()
    solution, *_ = np.linalg.lstsq(design, target, rcond=None)
    residual = target - design @ solution
    dof = max(len(target) - len(solution), 1)
    cov = np.linalg.pinv(design.T @ design) * float(residual @ residual) / dof
    return ArrheniusFit(float(solution[-1]), float(Z95 * np.sqrt(max(cov[-1, -1], 0.0))), reference_temperature,
                        np.exp(solution[:-1]), float(np.sqrt(np.mean(residual**2))))


# ---------------------------------------------------------------------------
# Thermal
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ThermalFit:
    """Lumped thermal parameters with 95 % intervals; ``sink_*`` only for a two-node rig."""

    heat_capacity: float
    conductance: float
    heat_capacity_ci: float
    conductance_ci: float
    time_constant: float
    rms_K: float
    time: np.ndarray
    temperature: np.ndarray
    model: np.ndarray
    sink_heat_capacity: float | None = None
    sink_conductance: float | None = None
    sink_heat_capacity_ci: float | None = None
    sink_conductance_ci: float | None = None
    sink_temperature: np.ndarray | None = None
    sink_model: np.ndarray | None = None
    residuals: ResidualStructure | None = None

    def steady_rise(self, power: float) -> float:
        """Steady temperature rise at ``power`` [W] of the one-node model [K]."""
        return power / self.conductance


def _simulate_linear(a: np.ndarray, b: np.ndarray, x0: np.ndarray, inputs: np.ndarray, dt: np.ndarray) -> np.ndarray:
    """``x' = A x + B u`` with ``u`` held over each step: exact, via the augmented matrix exponential."""
    n, m = a.shape[0], b.shape[1]
    out = np.empty((len(dt) + 1, n))
    out[0] = x0
    cache: dict[float, tuple[np.ndarray, np.ndarray]] = {}
    for k, h in enumerate(dt):
        key = round(float(h), 9)
        if key not in cache:
            aug = np.zeros((n + m, n + m))
            aug[:n, :n], aug[:n, n:] = a * h, b * h
            e = expm(aug)
            cache[key] = (e[:n, :n], e[:n, n:])
        phi, gamma = cache[key]
        out[k + 1] = phi @ out[k] + gamma @ inputs[k]
    return out


def fit_thermal(log: TestLog, power: np.ndarray | None = None, ambient: float | None = None) -> ThermalFit:
    """Heat capacity and conductance(s) from a heating-and-cooling trace.

    One node (cell to ambient) without a sink column; two nodes (cell to sink to
    ambient) with one. ``power`` [W] per sample defaults to the log's power
    column; ``ambient`` [K] to its ambient column.
    """
    if log.temperature is None:
        raise ScenarioError(log.name, "temperature", "a thermal fit needs the cell temperature column")
    heat = power if power is not None else log.power
    if heat is None:
        raise ScenarioError(log.name, "heater_power_W", "a thermal fit needs the heat input: a power column")
    if ambient is None and log.ambient is None:
        raise ScenarioError(log.name, "ambient_temperature_degC", "give the ambient temperature column or --ambient")
    if float(np.max(heat)) <= 0.0:
        raise ScenarioError(log.name, "heater_power_W", "no heat input in the log: a thermal fit needs a heating phase")
    ta = log.ambient if log.ambient is not None else np.full(len(log.time), float(ambient))
    dt = np.diff(log.time)
    inputs = np.column_stack([heat, ta])[:-1]
    t_cell = log.temperature
    rise = float(np.max(t_cell) - np.min(t_cell)) or 1.0
    g_guess = float(np.max(heat)) / rise
    c_guess = g_guess * 0.2 * float(log.time[-1] - log.time[0])
    if log.sink_temperature is None:
        def simulate(params):
            c, g = np.exp(params)
            return _simulate_linear(np.array([[-g / c]]), np.array([[1 / c, g / c]]), t_cell[:1], inputs, dt)[:, 0]

        result = least_squares(lambda x: simulate(x) - t_cell, np.log([c_guess, g_guess]), x_scale="jac")
        c, g = np.exp(result.x)
        half, residuals = _confidence(result, structure=True)
        ci = half * np.exp(result.x)
        return ThermalFit(float(c), float(g), float(ci[0]), float(ci[1]), float(c / g),
                          float(np.sqrt(np.mean(result.fun**2))), log.time, t_cell, t_cell + result.fun,
                          residuals=residuals)
    t_sink = log.sink_temperature

    def simulate2(params):
        c, g, cs, gs = np.exp(params)
        a = np.array([[-g / c, g / c], [g / cs, -(g + gs) / cs]])
        b = np.array([[1 / c, 0.0], [0.0, gs / cs]])
        return _simulate_linear(a, b, np.array([t_cell[0], t_sink[0]]), inputs, dt)

    def residual2(params):
        x = simulate2(params)
        return np.concatenate([x[:, 0] - t_cell, x[:, 1] - t_sink])

    result = least_squares(residual2, np.log([c_guess, 2 * g_guess, 3 * c_guess, g_guess]), x_scale="jac")
    c, g, cs, gs = np.exp(result.x)
    half, residuals = _confidence(result, structure=True)
    ci = half * np.exp(result.x)
    model = simulate2(result.x)
    n = len(t_cell)
    return ThermalFit(float(c), float(g), float(ci[0]), float(ci[1]), float(c / g),
                      float(np.sqrt(np.mean(result.fun**2))), log.time, t_cell, model[:, 0], float(cs), float(gs),
                      float(ci[2]), float(ci[3]), t_sink, model[:, 1] if n else None, residuals)
