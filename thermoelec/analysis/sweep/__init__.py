"""Sweeps: many variants of one scenario, run in chunks, checkpointed, gathered into one labelled dataset.

The package in five concerns, one module each:

- :mod:`~thermoelec.analysis.sweep.plan`: the ``[sweep]`` table and ``--sweep``
  items read into a plan of axes (grid or zip) and each scenario's overrides;
- :mod:`~thermoelec.analysis.sweep.checkpoint`: the sweep's identity (everything
  that changes an answer, by content hash) and its finished chunks in
  ``DIR/chunks/``, read back by scenario index for ``--resume``;
- :mod:`~thermoelec.analysis.sweep.run`: chunks of scenarios solved together by
  the batched solver (:mod:`thermoelec.engine.batch`, the default), or solo on
  their own back end (CVODE by default) when the batch hands one back, when
  series are kept or with ``engine = "solo"``; spread over local processes or a
  dask.distributed cluster, each finished chunk checkpointed for ``--resume``;
  a scenario that fails is recorded with its message and never stops the sweep;
- :mod:`~thermoelec.analysis.sweep.dataset`: the labelled xarray dataset of
  metrics, ``sweep.nc``, the kept series in ``series.zarr``, pass / fail;
- :mod:`~thermoelec.analysis.sweep.search`: the design search (the least or
  greatest value of one key meeting a criterion).

The figures of a sweep are the output layer's (:mod:`thermoelec.output.sweep_figures`).
Nothing here imports output/, fit/, the API or the command line. This module
re-exports the names the command line, the benchmarks and the tests use.
"""

from thermoelec.analysis.metrics import METRICS
from thermoelec.analysis.sweep.checkpoint import Checkpoints, sweep_identity
from thermoelec.analysis.sweep.dataset import (
    SweepData,
    numpy_backed,
    passes,
    sweep_data,
    sweep_dataset,
    sweep_table,
    write_series,
    write_sweep,
)
from thermoelec.analysis.sweep.plan import SweepAxis, SweepPlan, check_values, iter_combinations, plan_sweep
from thermoelec.analysis.sweep.run import KEPT_SERIES, decimate, default_chunk_size, run_chunk, run_sweep, solo_metrics
from thermoelec.analysis.sweep.search import Criterion, design_search, parse_criterion

__all__ = ["KEPT_SERIES", "METRICS", "Checkpoints", "Criterion", "SweepAxis", "SweepData", "SweepPlan", "check_values",
           "decimate", "default_chunk_size", "design_search", "iter_combinations", "numpy_backed", "parse_criterion",
           "passes", "plan_sweep", "run_chunk", "run_sweep", "solo_metrics", "sweep_data", "sweep_dataset",
           "sweep_identity", "sweep_table", "write_series", "write_sweep"]
