"""A sweep's dataset and heat maps without dask.array: xarray is told it is absent while no one has imported it.

xarray imports dask.array (and scipy.fftpack with it) to tell a dask array from
numpy's, half a second of a sweep's end; a sweep's dataset holds numpy arrays
only (:func:`thermoelec.analysis.sweep.numpy_backed`). Checked in a fresh
process, since this one may have imported dask already: after the dataset and
both maps, dask.array is not imported; afterwards xarray looks again, so the
same dataset chunks into dask arrays (what ``series.zarr`` is written from).
"""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

SCRIPT = textwrap.dedent("""
    import json, sys, tempfile
    from pathlib import Path
    import numpy as np
    import thermoelec
    from thermoelec.analysis import sweep
    from thermoelec.output.sweep_figures import write_sweep_figures
    from tests.helpers import scenario

    loaded = thermoelec.scenario_from_dict(scenario(sweep={"thermal.sink_to_ambient": ["0.1 W/K", "1 W/K", "3 W/K"],
                                                           "profile.segment[1].value": ["2 A", "4 A"]}))
    plan = sweep.plan_sweep(loaded)
    rows = [{**{key: float(i) for key in sweep.METRICS}, "status": "ok", "message": "", "verdict": "pass",
             "failed_checks": "", "stop_reason": "end_of_profile", "engine": "batch"} for i in range(plan.size)]
    ds = sweep.sweep_data(loaded, plan, rows).dataset()
    with tempfile.TemporaryDirectory() as name:
        files = write_sweep_figures(ds, Path(name), formats=("png",), parallel=True)
        drawn = all(path.stat().st_size > 0 for path in files) and len(files) > 1
    seen = "dask.array" in sys.modules
    chunked = ds.chunk()["cell_temperature_max_degC"].data
    print(json.dumps({"dask_seen": seen, "drawn": drawn, "chunked": type(chunked).__module__,
                      "same": bool(np.array_equal(np.asarray(chunked), ds["cell_temperature_max_degC"].values))}))
""")


def test_the_dataset_and_maps_do_not_import_dask_and_xarray_looks_again_afterwards():
    done = subprocess.run([sys.executable, "-c", SCRIPT], capture_output=True, text=True, timeout=300,
                          check=True)
    found = json.loads(done.stdout.strip().splitlines()[-1])
    assert found["drawn"]
    assert not found["dask_seen"], "xarray imported dask.array for the sweep's numpy dataset"
    assert found["chunked"].startswith("dask.array")  # told nothing any more: the dataset chunks as before
    assert found["same"]
