"""Output folders as a unit: the lock, the staged commit, stale outputs, a commit cut short, signals.

Sources: the POSIX semantics the module relies on (rename(2) replaces a file
atomically; flock(2) locks are dropped when their process dies), checked here
through the files a second process sees.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

import thermoelec
from thermoelec.analysis import transaction
from thermoelec.analysis.interrupts import Interrupted, deferred_signals, termination_signals, unswallowed_signals
from thermoelec.analysis.transaction import JOURNAL, MANIFEST, OutputFolder, hold
from thermoelec.inputs import ScenarioError

from ..helpers import scenario


def write(folder: Path, files: dict[str, str]) -> None:
    for name, text in files.items():
        path = folder / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)


def listing(folder: Path) -> dict[str, str]:
    """Every file under a folder but the lock, by relative path."""
    return {str(p.relative_to(folder)): p.read_text() for p in sorted(folder.rglob("*"))
            if p.is_file() and p.name != transaction.LOCK}


def commit(folder: Path, files: dict[str, str], manifest: bool = True) -> None:
    with hold(folder, "test", manifest) as held, held.transaction() as stage:
        write(stage, files)


def test_a_commit_replaces_the_outputs_and_removes_stale_ones_but_not_foreign_files(tmp_path):
    out = tmp_path / "out"
    commit(out, {"summary.json": "1", "figure.png": "1", "cases/a/x.csv": "1"})
    (out / "mine.txt").write_text("the user's")
    commit(out, {"summary.json": "2", "cases/b/x.csv": "2"})
    assert listing(out) == {"summary.json": "2", "cases/b/x.csv": "2", "mine.txt": "the user's",
                            MANIFEST: (out / MANIFEST).read_text()}
    assert json.loads((out / MANIFEST).read_text())["outputs"] == ["cases", "summary.json"]
    assert not list(out.glob(".thermoelec-*-*"))  # no staging or trash folder left


def test_a_failure_while_staging_leaves_the_previous_outputs(tmp_path):
    out = tmp_path / "out"
    commit(out, {"summary.json": "old", "series.csv": "old"})
    before = listing(out)
    with pytest.raises(OSError), hold(out, "test") as held, held.transaction() as stage:
        write(stage, {"summary.json": "new"})
        raise OSError("disk full")
    assert listing(out) == before and not list(out.glob(".thermoelec-*-*"))


def test_a_signal_during_the_commit_waits_for_it(tmp_path, monkeypatch):
    # SIGTERM arrives at the first rename of the commit: it is held back, the commit completes,
    # then the interrupt is raised: the folder holds the complete new outputs
    out = tmp_path / "out"
    commit(out, {"summary.json": "old", "series.csv": "old", "figure.png": "old"})
    real = os.replace
    sent = []

    def replace_then_signal(src, dst):
        if not sent:
            sent.append(dst)
            os.kill(os.getpid(), signal.SIGTERM)
        real(src, dst)

    monkeypatch.setattr(transaction.os, "replace", replace_then_signal)
    with pytest.raises(Interrupted) as caught, termination_signals():
        commit(out, {"summary.json": "new", "series.csv": "new"})
    assert caught.value.exit_status == 143 and sent
    files = listing(out)
    assert files.pop(MANIFEST) and files == {"summary.json": "new", "series.csv": "new"}


def test_deferred_signals_raise_after_the_block_and_not_inside():
    order = []
    with pytest.raises(Interrupted) as caught, termination_signals():
        with deferred_signals():
            os.kill(os.getpid(), signal.SIGINT)
            time.sleep(0.05)
            order.append("block finished")
    assert order == ["block finished"] and caught.value.exit_status == 130


def test_a_signal_landing_in_a_weakref_callback_is_raised_again_not_printed(capsys):
    # A signal's exception raised inside a weakref callback (the garbage collector runs them at any
    # point) is unraisable: Python prints "Exception ignored in ..." with a traceback and drops it.
    # Under termination_signals it is delivered again and raised at the next ordinary point.
    import weakref

    class Thing:
        pass

    def callback(_ref):
        raise Interrupted(signal.SIGTERM)  # what the handler does when the signal arrives here

    with pytest.raises(Interrupted) as caught, termination_signals():
        thing = Thing()
        ref = weakref.ref(thing, callback)
        del thing  # the callback runs now and its exception is unraisable
        for _ in range(1000):  # the signal raised again is taken at one of these points
            time.sleep(0.001)
    assert ref() is None and caught.value.signum == signal.SIGTERM
    assert "Traceback" not in capsys.readouterr().err


def _swallowing_callback() -> None:
    """What a C library's wrapper of a Python callback may do: take the callback's exception as its failure."""
    try:
        os.kill(os.getpid(), signal.SIGTERM)  # the handler raises Interrupted here, at once
        time.sleep(1.0)
    except BaseException:
        pass


def test_a_signal_swallowed_inside_the_block_is_raised_after_it():
    order = []
    with pytest.raises(Interrupted) as caught, termination_signals():
        with unswallowed_signals():
            _swallowing_callback()
            order.append("block went on")
        order.append("after the block")
    assert order == ["block went on"] and caught.value.exit_status == 143
    with termination_signals(), unswallowed_signals():  # no signal, nothing raised
        order.append("quiet block")
    assert order[-1] == "quiet block"


def test_a_signal_swallowed_by_cvodes_callback_wrapper_ends_the_run_not_as_a_solver_failure(monkeypatch):
    # The right-hand side's wrapper taking the signal's exception as the callback's failure: CVODE
    # reports an unrecoverable right-hand side and returns normally. The run must end as signalled.
    from thermoelec.engine.model import Kernels

    built = Kernels._cvode_rhs

    def wrapped(self):
        rhs, calls = built(self), [0]

        def cvode_rhs(t, y, ydot):
            calls[0] += 1
            if calls[0] == 50:
                _swallowing_callback()
                return -1
            return rhs(t, y, ydot)

        return cvode_rhs

    monkeypatch.setattr(Kernels, "_cvode_rhs", wrapped)
    data = scenario(segments=[{"mode": "current", "value": "1 A", "duration": "600 s"}])
    with pytest.raises(Interrupted) as caught, termination_signals():
        result = thermoelec.simulate(data)
        pytest.fail(f"the run went on to a result: {result.status} {result.message}")
    assert caught.value.signum == signal.SIGTERM


def test_a_commit_cut_short_is_completed_by_the_next_command(tmp_path):
    # the state a SIGKILL between two renames of a commit leaves: the journal (the new manifest),
    # one entry moved in, one still staged; the next command completes the commit first
    out = tmp_path / "out"
    commit(out, {"summary.json": "old", "series.csv": "old", "figure.png": "old"})
    staging = out / ".thermoelec-staging-99999"
    write(staging, {"series.csv": "new"})
    (out / "summary.json").write_text("new")
    (out / JOURNAL).write_text(json.dumps({"outputs": ["series.csv", "summary.json"], "stale": ["figure.png"],
                                           "staging": staging.name, "manifest": True}))
    with hold(out, "test") as held:
        assert any("completed the commit" in note for note in held.notes)
    files = listing(out)
    assert files.pop(MANIFEST) and files == {"summary.json": "new", "series.csv": "new"}


HOLDER = textwrap.dedent("""
    import sys, time
    from pathlib import Path
    from thermoelec.analysis.transaction import hold
    with hold(Path(sys.argv[1]), "thermoelec sweep held.toml --out DIR"):
        print("held", flush=True)
        time.sleep(60)
""")


def _holder(out: Path) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-c", HOLDER, str(out)], stdout=subprocess.PIPE, text=True,
                            env={**os.environ, "PYTHONPATH": str(Path(__file__).resolve().parents[2])})
    assert proc.stdout.readline().strip() == "held"
    return proc


def test_a_second_command_is_refused_naming_the_holder_and_a_stale_lock_is_taken_over(tmp_path):
    out = tmp_path / "out"
    proc = _holder(out)
    try:
        with pytest.raises(ScenarioError, match=rf"in use by process {proc.pid} .*held\.toml"):
            OutputFolder(out, "test").__enter__()
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait()
    # the killed holder's lock: its name is in the file, the kernel has dropped the lock
    with hold(out, "test") as held:
        assert any(f"process {proc.pid}" in note and "no longer running" in note for note in held.notes)


def test_output_paths_are_checked_before_anything_runs(tmp_path):
    (tmp_path / "file").write_text("x")
    for bad, message in (("", "empty"), (str(tmp_path / "file"), "is a file")):
        with pytest.raises(ScenarioError, match=message):
            transaction.check_output_path(bad)


#: Holds ``argv[1]``, forks a child that sleeps on (as a sweep's worker solves on), prints the child's pid and
#: kills itself outright.
_KILLED_HOLDER = textwrap.dedent("""
    import os, signal, sys, time
    from pathlib import Path
    from thermoelec.analysis.transaction import hold
    with hold(Path(sys.argv[1]), "thermoelec sweep"):
        child = os.fork()
        if child == 0:
            quiet = os.open(os.devnull, os.O_WRONLY)
            os.dup2(quiet, 1)  # the pipes are the test's: it reads them to their end
            os.dup2(quiet, 2)
            time.sleep(60)
            os._exit(0)
        print(child, flush=True)
        os.kill(os.getpid(), signal.SIGKILL)
""")


def test_a_forked_child_does_not_keep_the_folder_locked_once_its_command_is_killed(tmp_path):
    # flock(2): the lock lives while any descriptor of the open file is open, and a fork copies them
    done = subprocess.run([sys.executable, "-c", _KILLED_HOLDER, str(tmp_path)], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == -signal.SIGKILL, done.stderr
    child = int(done.stdout.split()[0])
    try:
        os.kill(child, 0)  # still running
        with hold(tmp_path, "the next command") as folder:  # the folder is free: taken over with a note
            assert any("no longer running" in note for note in folder.notes)
    finally:
        os.kill(child, signal.SIGKILL)
