"""Analysis: results and their metrics, diagnostics, case comparisons, sweeps and design search.

Above scenario/, engine/ and physics/, below output/: modules here compute and
write data (JSON, CSV, NetCDF, zarr) and never draw, so they import neither
output/ nor matplotlib, nor fit/, the API or the command line.
"""
