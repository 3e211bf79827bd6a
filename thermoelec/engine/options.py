"""Integrator settings: tolerances, output grid, back end and its Newton matrix.

:class:`SolverOptions` is what the scenario layer hands to both drivers. This
module imports nothing of the engine but the layout (for the number of
quadratures); it names the back ends only in text, so it must not import
:mod:`thermoelec.engine.backends`, the kernels or the drivers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from thermoelec.engine.layout import N_QUADRATURES

__all__ = ["ATOL_SCALES", "FIRST_STEP_FRACTION", "FIRST_STEP_MAX", "LINEAR_SOLVERS", "SolverOptions",
           "automatic_first_step"]

#: Newton matrices of the CVODE back end (``SolverOptions.linear_solver``): the full Jacobian, its
#: diagonal, a band of it (CVODE's own difference quotients) or none (Krylov: GMRES on Jacobian-vector
#: products); "auto" picks by the pack model (see SolverOptions).
LINEAR_SOLVERS = ("auto", "dense", "diagonal", "band", "krylov")
#: Longest automatic first step after a restart [s] (``SolverOptions.first_step``).
FIRST_STEP_MAX = 1.0
#: The automatic first step as a fraction of the median segment: half for a lumped pack; a
#: quarter for a resolved one, whose cells' currents keep redistributing within their groups
#: after each jump of the demand (the RC shift takes each cell's current at the phase start):
#: on a 14s4p pack over 3 600 one-second segments a quarter takes 19 % fewer right-hand sides
#: and a third of the error-test failures of a half.
FIRST_STEP_FRACTION = {"lumped": 0.5, "resolved": 0.25}


#: Typical scales of the states [-, V, K, J]: the default absolute tolerance is rtol times these.
#: Mission energies and charges are kJ and kC; a much smaller integral scale lets the
#: roundoff of an integrand (a large conductance times a tiny temperature difference)
#: drive the step size down to milliseconds without making any reported value better.
ATOL_SCALES = {"soc": 1e-2, "voltage": 1e-2, "temperature": 1.0, "integral": 1e3}


@dataclass(frozen=True)
class SolverOptions:
    """Integrator settings.

    Attributes
    ----------
    backend : str
        A key of :data:`thermoelec.engine.backends.BACKENDS`.
    rtol : float
        Relative tolerance [-].
    atol_soc, atol_voltage, atol_temperature, atol_integral : float or None
        Absolute tolerances of SoC [-], RC voltages [V], temperatures [K] and the
        energy / charge integrals [J, C]. By default each is ``rtol`` times a
        typical scale of its state (:data:`ATOL_SCALES`), so that tightening
        ``rtol`` tightens every state.
    output_interval : float
        Spacing of the reported series [s]; phase ends and events are always reported.
    max_steps : int
        Internal steps allowed per phase before the integrator gives up.
    first_step : float or "auto"
        CVODE's first step after each restart [s]; 0 lets CVODE estimate it, at a
        cost of two to four extra right-hand-side calls at every restart (a third
        of the work on a 1 Hz profile). ``"auto"``: half the median segment
        length (a quarter for a resolved pack, :data:`FIRST_STEP_FRACTION`), at
        most :data:`FIRST_STEP_MAX`, so that at the default ``rtol``
        a profile of equal short segments takes two equal steps in each and the
        second reuses the first's Newton matrix; scaled by ``sqrt(rtol / 1e-6)``,
        as the local error of the first (order-1) step grows with its square
        (CVODE's own estimate scales so too). The CVODE back end integrates the
        RC voltages relative to their exact zero-order-hold response, so what is
        left after a restart is slow; a step that proves too long fails its
        error test and CVODE shortens it, so this sets cost, not accuracy. A step
        never passes a phase end.
    linear_solver : str
        Newton matrix of the CVODE back end: ``"dense"`` (the full Jacobian),
        ``"diagonal"`` (its diagonal only: one right-hand-side call to form, no
        matrix to hand over), ``"band"`` (a band of the Jacobian around the cell
        blocks, from CVODE's own difference quotients), ``"krylov"`` (no matrix:
        GMRES on Jacobian-vector products, each one right-hand side), or
        ``"auto"``: for a lumped pack diagonal in a phase in which it converges fast
        (:data:`thermoelec.engine.backends.DIAGONAL_CONTRACTION`), dense otherwise and
        for a phase the diagonal one failed; for a resolved pack Krylov (the
        diagonal's bound would cost a full Jacobian per phase, more than the phase,
        and unchecked it drifts), dense for a phase Krylov failed. Measured on a
        14s4p pack over 3 600 one-second power segments: Krylov 1.5-2 s, an unchecked
        diagonal 0.9 s, band 109 s (the sink node couples to every cell, outside any
        band, and CVODE's grouped difference quotients smear it into the band: Newton
        fails), dense 75 s (the matrix handed over element by element).
    scipy_method : str
        ``solve_ivp`` method for the scipy back end.
    """

    backend: str = "cvode"
    rtol: float = 1e-6
    atol_soc: float | None = None
    atol_voltage: float | None = None
    atol_temperature: float | None = None
    atol_integral: float | None = None
    output_interval: float = 1.0
    max_steps: int = 50_000
    first_step: float | str = "auto"
    linear_solver: str = "auto"
    scipy_method: str = "LSODA"

    def atol_vector(self, n_rc: int, n_cells: int = 1) -> np.ndarray:
        """Per-state absolute tolerances in state order (:mod:`thermoelec.engine.layout`).

        Parameters
        ----------
        n_rc : int
            Number of RC pairs of the cell [-].
        n_cells : int
            Number of cell blocks: 1 for a lumped pack [-].

        Returns
        -------
        float64 array, shape (n_states,)
            Tolerance of each cell's SoC [-], RC voltages [V] and temperature [K], of the
            sink and coolant temperatures [K] and of each quadrature [J, C].
        """
        def atol(name: str) -> float:
            given = getattr(self, f"atol_{name}")
            return given if given is not None else self.rtol * ATOL_SCALES[name]

        block = np.concatenate([[atol("soc")], np.full(n_rc, atol("voltage")), [atol("temperature")]])
        return np.concatenate([np.tile(block, n_cells), [atol("temperature"), atol("temperature")],
                               np.full(N_QUADRATURES, atol("integral"))])



def automatic_first_step(durations, rtol: float, fraction: float = FIRST_STEP_FRACTION["lumped"]) -> float:
    """The ``"auto"`` first step of :class:`SolverOptions` [s].

    Parameters
    ----------
    durations : iterable of float
        Segment lengths of the mission [s] (infinite ones are left out).
    rtol : float
        Relative tolerance [-].
    fraction : float
        Fraction of the median segment (:data:`FIRST_STEP_FRACTION`) [-].

    Returns
    -------
    float
        ``fraction`` of the median segment, at most :data:`FIRST_STEP_MAX`, times ``sqrt(rtol / 1e-6)`` [s].
    """
    finite = [d for d in durations if math.isfinite(d) and d > 0.0]
    typical = fraction * float(np.median(finite)) if finite else FIRST_STEP_MAX
    return min(FIRST_STEP_MAX, typical) * math.sqrt(rtol / 1e-6)
