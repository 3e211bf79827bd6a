"""The engine: parameter layout, mission plan, right-hand side kernels, the CVODE and batched drivers."""
