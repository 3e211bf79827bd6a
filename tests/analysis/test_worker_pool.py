"""The sweep's worker processes: forks of the command where that is safe, else from a fork server.

A fork copies the calling thread only (POSIX ``fork``: a lock another thread
holds stays locked in the child), so the workers are forks only while this
process runs no other Python thread; either way they end with the pool, and
at once when it is stopped (:func:`thermoelec.analysis.sweep.run.stop_pool`).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
import threading

import psutil

from thermoelec.analysis.sweep.run import _short_tail, process_pool, stop_pool

#: In a fresh process (this one may run threads other tests left): the workers' parents, and whether a fork
#: server ran.
FORKED = textwrap.dedent("""
    import json, os, psutil, threading
    from thermoelec.analysis.sweep.run import process_pool
    assert threading.active_count() == 1
    with process_pool(1) as pool:
        pids = {pool.submit(os.getpid).result(timeout=60) for _ in range(4)}
        parents = [psutil.Process(pid).ppid() for pid in pids]
        server = any("forkserver" + " import main" in " ".join(c.cmdline())  # not this script's own text
                     for c in psutil.Process().children(recursive=True))
    _, alive = psutil.wait_procs([psutil.Process(pid) for pid in pids if psutil.pid_exists(pid)], timeout=10)
    print(json.dumps({"me": os.getpid(), "parents": parents, "server": server, "alive": len(alive)}))
""")


def test_workers_are_forks_of_the_command_when_it_runs_no_other_thread():
    done = subprocess.run([sys.executable, "-c", FORKED], capture_output=True, text=True, timeout=120, check=True)
    found = json.loads(done.stdout.strip().splitlines()[-1])
    assert found["parents"] == [found["me"]] and not found["server"]
    assert found["alive"] == 0  # ended with the pool


def test_with_another_thread_running_the_workers_come_from_a_fork_server_and_stop_with_the_pool():
    done = threading.Event()
    other = threading.Thread(target=done.wait, daemon=True)
    other.start()
    try:
        with process_pool(1) as pool:
            workers = [psutil.Process(pid) for pid in {pool.submit(os.getpid).result(timeout=60) for _ in range(4)}]
            assert workers[0].ppid() != os.getpid()  # the fork server's child
            assert any("forkserver import main" in " ".join(c.cmdline())
                       for c in psutil.Process().children(recursive=True))
            stop_pool(pool)
            _, alive = psutil.wait_procs(workers, timeout=10)
            assert not alive
    finally:
        done.set()
        other.join()


#: A sweep of 8 scenarios in chunks of 2 on two workers and on one, in a fresh process: how often ``meanwhile``
#: was called, whether the workers were already forks then, and that the thread it started kept none from forking.
MEANWHILE = textwrap.dedent("""
    import json, os, sys, tempfile, threading
    from pathlib import Path
    import psutil
    import thermoelec
    from thermoelec.analysis import sweep
    from tests.helpers import scenario

    loaded = thermoelec.scenario_from_dict(scenario(sweep={"thermal.sink_to_ambient": ["0.5 W/K", "1 W/K"],
                                                           "cell.initial_soc": [0.5, 0.6, 0.7, 0.8]}))
    plan = sweep.plan_sweep(loaded)
    found = {}
    for workers in (2, 1):
        calls = []

        def meanwhile():
            children = psutil.Process().children(recursive=True)
            calls.append({"workers": len(children), "forks": all(c.ppid() == os.getpid() for c in children)})
            threading.Thread(target=lambda: None).start()  # what the command starts: the imports ahead

        with tempfile.TemporaryDirectory() as name:
            rows = sweep.run_sweep(loaded, plan, Path(name) / "o", workers=workers, chunk_size=2, progress=False,
                                   meanwhile=meanwhile)
        found[workers] = {"calls": calls, "ok": sum(r["status"] == "ok" for r in rows)}
    print(json.dumps(found))
""")


def test_the_sweep_calls_meanwhile_once_after_its_workers_are_forked():
    done = subprocess.run([sys.executable, "-c", MEANWHILE], capture_output=True, text=True, timeout=300,
                          check=True)
    found = json.loads(done.stdout.strip().splitlines()[-1])
    assert found["2"]["calls"] == [{"workers": 1, "forks": True}] and found["2"]["ok"] == 8
    assert len(found["1"]["calls"]) == 1 and found["1"]["ok"] == 8


def test_the_last_chunks_are_split_smaller_and_keep_every_scenario_in_order():
    # ten chunks of 256 on two processes: the last four in quarters, the last four quarters in halves
    pieces = [list(range(k, k + 256)) for k in range(0, 2560, 256)]
    split = _short_tail(pieces, 2)
    assert [len(p) for p in split] == [256] * 6 + [64] * 12 + [32] * 8
    assert [i for p in split for i in p] == list(range(2560))
    assert _short_tail([list(range(40))], 2) == [list(range(32)), list(range(32, 40))]  # none below 32 but the rest
