"""Analysis: results and their metrics, diagnostics, case comparisons, sweeps and design search."""
