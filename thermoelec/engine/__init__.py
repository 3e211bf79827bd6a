"""The engine: parameter layout, mission plan, right-hand side kernels, the CVODE and batched drivers.

One module per concern, the lowest first; each imports only from modules
above it in this list (and from physics), never from one below::

    events     the root functions, their codes and what each does (nothing of the engine)
    layout     the state, quadrature, output and parameter layouts, block readers (events)
    profile    mission segments (nothing of the engine)
    problem    one scenario in SI units and its parameter vector (layout, profile)
    options    integrator settings (layout)
    mission    the plan of phases both drivers walk, the phase writer (events, layout, problem, profile)
    resolved   numba kernel of a resolved pack's right-hand side, per-cell values (layout)
    model      numba kernels: right-hand side, Jacobian, root functions, Kernels (events, layout, resolved)
    backends   CVODE and solve_ivp, one phase at a time (events, layout, model, options)
    driver     walks the plan on a back end (backends, events, layout, mission, model, options, problem,
               resolved)
    batch      walks the plan for many scenarios in one compiled loop (events, layout, mission, model,
               options, problem)
    ahead      the ahead-of-time build of the kernels run and sweep call (batch, mission, model, resolved)

The kernels know no integrator and no mission, the back ends no mission; only the
driver and the batched solver walk the mission plan.
"""
