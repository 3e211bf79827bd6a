"""The floor of the sweep benchmark: the benchmark mission's equations written by hand, as tightly as we can.

Fixed-step classical RK4, one step per 1 s power segment, over a batch of
scenarios that differ in ambient temperature, sink-to-ambient conductance and
initial SoC. The equations are those of the engine for this mission (Thevenin
cell with one RC pair, OCV and entropic tables, a 2-D R0 table, Bernardi heat,
cell and sink nodes; DESIGN notes), but nothing else: no limit functions, no
energy integrals, no error control, no other load mode, no parameter vector —
every constant of the mission is a literal of the compiled loop, and the loop
runs over the scenarios innermost with the states in contiguous arrays
(structure of arrays), so the compiler can vectorise it. It is what a peer who
writes only this mission by hand would run; thermoelec's batched solver does
more per step and is measured against it.

RK4: W. Kutta, Z. Math. Phys. 46 (1901) 435 (the classical fourth-order method).
"""

from __future__ import annotations

import numba
import numpy as np

# the benchmark mission of bench_single_mission.py (5 Ah NMC-like cell, 4s2p)
SERIES, PARALLEL = 4.0, 2.0
CAPACITY = 5.0 * 3600.0  # [C]
OCV_SOC = np.array([0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0])
OCV_VOLTAGE = np.array([3.0, 3.4, 3.58, 3.68, 3.84, 4.05, 4.2])
OCV_ENTROPIC = np.array([-2e-4, -1e-4, 1e-4, 0.0, -1e-4, -2e-4, -2.5e-4])
T_REF = 298.15  # [K]
R0_SOC = np.array([0.0, 0.5, 1.0])
R0_TEMPERATURE = np.array([263.15, 298.15, 318.15])
R0_VALUES = np.array([[0.06, 0.05, 0.055], [0.02, 0.015, 0.016], [0.015, 0.011, 0.012]])  # rows: temperature
R1, TAU1 = 0.010, 30.0  # [ohm, s]
C_CELLS = SERIES * PARALLEL * 0.07 * 950.0  # [J/K]
C_SINK, G_CELL_SINK = 300.0, 1.0  # [J/K, W/K]


@numba.njit(inline="always")
def _interp(grid, values, x):
    n = grid.size
    if x <= grid[0]:
        return values[0]
    if x >= grid[n - 1]:
        return values[n - 1]
    i = 0
    while grid[i + 1] <= x:
        i += 1
    w = (x - grid[i]) / (grid[i + 1] - grid[i])
    return values[i] * (1.0 - w) + values[i + 1] * w


@numba.njit(inline="always")
def _r0(z, t):
    # bilinear, held at the edges (temperature rows of R0_VALUES)
    zc = min(max(z, 0.0), 1.0)
    i = 0 if zc < 0.5 else 1
    wz = (zc - R0_SOC[i]) / (R0_SOC[i + 1] - R0_SOC[i])
    if t <= R0_TEMPERATURE[0]:
        j, wt = 0, 0.0
    elif t >= R0_TEMPERATURE[2]:
        j, wt = 1, 1.0
    else:
        j = 0 if t < R0_TEMPERATURE[1] else 1
        wt = (t - R0_TEMPERATURE[j]) / (R0_TEMPERATURE[j + 1] - R0_TEMPERATURE[j])
    low = R0_VALUES[j, i] * (1.0 - wz) + R0_VALUES[j, i + 1] * wz
    high = R0_VALUES[j + 1, i] * (1.0 - wz) + R0_VALUES[j + 1, i + 1] * wz
    return low * (1.0 - wt) + high * wt


@numba.njit(inline="always")
def _rates(z, v, tc, ts, power, ambient, g_sa):
    """dz/dt, dv/dt, dTc/dt, dTs/dt of one scenario at a power demand [W] (pack level)."""
    u_ref = _interp(OCV_SOC, OCV_VOLTAGE, z)
    dudt = _interp(OCV_SOC, OCV_ENTROPIC, z)
    u = u_ref + (tc - T_REF) * dudt
    r0 = _r0(z, tc)
    emf = SERIES * (u - v)
    rtot = SERIES * r0 / PARALLEL
    disc = max(emf * emf - 4.0 * rtot * power, 0.0)
    current = 2.0 * power / (emf + np.sqrt(disc))
    icell = current / PARALLEL
    vcell = u - v - icell * r0
    heat = SERIES * PARALLEL * (icell * (u - vcell) - icell * tc * dudt)
    return (-icell / CAPACITY, (R1 * icell - v) / TAU1,
            (heat - G_CELL_SINK * (tc - ts)) / C_CELLS,
            (G_CELL_SINK * (tc - ts) - g_sa * (ts - ambient)) / C_SINK)


@numba.njit(error_model="numpy", fastmath=False)
def rk4_floor(powers, ambient, g_sa, soc0, t0):
    """RK4 over every 1 s segment for every scenario; returns the final states and the peak cell temperature.

    Parameters
    ----------
    powers : float array, shape (n_segments,)
        Pack power of each 1 s segment [W].
    ambient, g_sa, soc0, t0 : float arrays, shape (n_scenarios,)
        Ambient [K], sink-to-ambient conductance [W/K], initial SoC [-], initial temperature [K].

    Returns
    -------
    tuple of arrays
        SoC [-], RC voltage [V], cell and sink temperature [K] at the end, and the peak cell temperature [K].
    """
    n = ambient.size
    z, v, tc, ts = soc0.copy(), np.zeros(n), t0.copy(), t0.copy()
    peak = t0.copy()
    h = 1.0
    for seg in range(powers.size):
        power = powers[seg]
        for s in range(n):  # scenarios innermost: contiguous, independent
            a, g = ambient[s], g_sa[s]
            z0, v0, c0, s0 = z[s], v[s], tc[s], ts[s]
            k1 = _rates(z0, v0, c0, s0, power, a, g)
            k2 = _rates(z0 + 0.5 * h * k1[0], v0 + 0.5 * h * k1[1], c0 + 0.5 * h * k1[2], s0 + 0.5 * h * k1[3],
                        power, a, g)
            k3 = _rates(z0 + 0.5 * h * k2[0], v0 + 0.5 * h * k2[1], c0 + 0.5 * h * k2[2], s0 + 0.5 * h * k2[3],
                        power, a, g)
            k4 = _rates(z0 + h * k3[0], v0 + h * k3[1], c0 + h * k3[2], s0 + h * k3[3], power, a, g)
            z[s] = z0 + h / 6.0 * (k1[0] + 2.0 * k2[0] + 2.0 * k3[0] + k4[0])
            v[s] = v0 + h / 6.0 * (k1[1] + 2.0 * k2[1] + 2.0 * k3[1] + k4[1])
            tc[s] = c0 + h / 6.0 * (k1[2] + 2.0 * k2[2] + 2.0 * k3[2] + k4[2])
            ts[s] = s0 + h / 6.0 * (k1[3] + 2.0 * k2[3] + 2.0 * k3[3] + k4[3])
            if tc[s] > peak[s]:
                peak[s] = tc[s]
    return z, v, tc, ts, peak
