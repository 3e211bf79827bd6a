"""The kernels compiled ahead of time (thermoelec.jit, thermoelec.engine.ahead) against numba's just-in-time ones.

The build compiles the same Python functions with the same numba, so a ``run``
through it must write the same files, byte for byte, as one through numba's
dispatchers (``THERMOELEC_AOT=0``), without importing numba at all. A call the
build was not compiled for (a strided or float32 array, say) must go to numba
and give the answer of a contiguous float64 call: the build would misread it.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

import thermoelec
from thermoelec import jit
from thermoelec.engine import ahead
from thermoelec.engine import layout as L
from thermoelec.engine.events import N_EVENTS

from ..helpers import rc_current_phase

ROOT = Path(__file__).resolve().parents[2]
SCENARIOS = ROOT / "scenarios"


@pytest.fixture(scope="module")
def build_path(tmp_path_factory) -> Path:
    """Today's build: the one ``make setup`` made, else one made here (a minute or two)."""
    present = jit.find_build(jit.build_folder())
    if present is not None:
        return present
    # a numba without its ahead-of-time compiler (deprecated upstream) still runs everything, through its cache
    pytest.importorskip("numba.pycc", reason="this numba has no ahead-of-time compiler (numba.pycc)")
    return ahead.build(tmp_path_factory.mktemp("aot"))


@pytest.fixture(scope="module")
def cache_with_build(build_path, tmp_path_factory) -> Path:
    """A cache folder of its own holding the build, for commands run in a fresh process."""
    cache = tmp_path_factory.mktemp("cache")
    (cache / "aot").mkdir()
    shutil.copy2(build_path, cache / "aot" / build_path.name)
    return cache


def _kernel(name: str) -> jit.Kernel:
    ahead.declared_kernels()
    return next(kernel for kernel in jit.kernels() if kernel.export_name == name)


_RUN = "import sys; from thermoelec.cli import main; code = main(sys.argv[1:]); print('numba' in sys.modules); " \
       "sys.exit(code)"


def _run(scenario_file: Path, out: Path, cache: Path, aot: bool, command: tuple[str, ...] = ("run",)) -> str:
    env = {**os.environ, "THERMOELEC_CACHE_DIR": str(cache), "PYTHONPATH": str(ROOT),
           jit.AOT_ENV: "1" if aot else "0"}
    done = subprocess.run([sys.executable, "-c", _RUN, command[0], str(scenario_file), "--out", str(out),
                           "--no-figures", *command[1:]], env=env, capture_output=True, text=True, timeout=600)
    assert done.returncode == 0, done.stderr
    return done.stdout.strip().splitlines()[-1]


@pytest.mark.parametrize("name", ["ebike_route", "cargo_robot_pack"])
def test_a_run_through_the_build_writes_the_files_of_a_run_through_numba(name, cache_with_build, tmp_path):
    # ebike_route: a CSV power profile, then a CC-CV charge; cargo_robot_pack: every cell of a 14s4p pack resolved
    built = _run(SCENARIOS / f"{name}.toml", tmp_path / "built", cache_with_build, aot=True)
    jitted = _run(SCENARIOS / f"{name}.toml", tmp_path / "jitted", cache_with_build, aot=False)
    assert built == "False", "a run through the build imported numba"
    assert jitted == "True"
    for output in ("summary.json", "timeseries.csv"):
        assert (tmp_path / "built" / output).read_bytes() == (tmp_path / "jitted" / output).read_bytes(), output


@pytest.mark.parametrize("name", ["drone_delivery", "cargo_robot_pack"])
def test_a_sweep_through_the_build_writes_the_table_of_a_sweep_through_numba(name, cache_with_build, tmp_path):
    # the batched solver: drone_delivery on its plain right-hand side, cargo_robot_pack on the general one
    sweep = ("sweep", "--sweep", "thermal.ambient_temperature=5 degC,35 degC", "--workers", "1", "--quiet")
    built = _run(SCENARIOS / f"{name}.toml", tmp_path / "built", cache_with_build, True, sweep)
    jitted = _run(SCENARIOS / f"{name}.toml", tmp_path / "jitted", cache_with_build, False, sweep)
    assert (built, jitted) == ("False", "True")
    assert (tmp_path / "built" / "sweep.csv").read_bytes() == (tmp_path / "jitted" / "sweep.csv").read_bytes()


def test_the_batched_solve_lets_other_threads_run(build_path):
    # a sweep's command solves chunks itself while its pool's threads feed the workers: the solve must not
    # hold the GIL (nogil in numba, release_gil in the build), or a worker waits for each of its chunks
    from thermoelec.engine import batch

    loaded = thermoelec.load_scenario(SCENARIOS / "ebike_route.toml")
    problem, options = loaded.problem(), loaded.solver_options()
    batch.solve_batch([problem], options)  # loaded once
    problems = [problem] * 160  # about half a second
    done = threading.Event()
    solver = threading.Thread(target=lambda: (batch.solve_batch(problems, options), done.set()))
    longest_gap, last = 0.0, time.perf_counter()
    started = last
    solver.start()
    while not done.is_set():
        now = time.perf_counter()
        longest_gap, last = max(longest_gap, now - last), now
    solver.join()
    # holding the GIL, this loop would stand still for the whole solve
    assert longest_gap < 0.5 * (time.perf_counter() - started)


def _rc_problem():
    problem, p = rc_current_phase()
    y = problem.initial_state()
    y[1] = 0.02
    return p, y


def test_the_build_and_numba_give_the_same_right_hand_side_roots_and_jacobian(build_path):
    built = jit._import_extension(build_path)
    p, y = _rc_problem()
    n = y.size
    rhs, roots, jacobian = _kernel("model__rhs"), _kernel("model__roots"), _kernel("model__jacobian")
    jit.materialise()
    alg = np.empty(L.N_ALGEBRAICS)
    for kernel, make in ((rhs, lambda: (y.copy(), np.empty(n), p.copy(), alg.copy())),
                         (roots, lambda: (y.copy(), np.empty(N_EVENTS), p.copy(), alg.copy(), np.empty(n))),
                         (jacobian, lambda: (y.copy(), np.empty((n, n)), p.copy(), alg.copy(), np.empty(n),
                                             np.empty(n), np.empty(n)))):
        by_build, by_numba = make(), make()
        getattr(built, kernel.export_name)(*by_build)
        kernel.dispatcher(*by_numba)
        np.testing.assert_array_equal(by_build[1], by_numba[1], err_msg=kernel.export_name)


@pytest.mark.parametrize("layout", ["strided", "float32"])
def test_a_call_the_build_was_not_made_for_goes_to_numba_with_the_same_answer(layout):
    p, y = _rc_problem()
    rhs = _kernel("model__rhs")
    expected = np.empty(y.size)
    rhs(y, expected, p, np.empty(L.N_ALGEBRAICS))
    if layout == "strided":
        odd = np.zeros(2 * y.size)
        odd[::2] = y
        odd = odd[::2]
    else:
        odd = y.astype(np.float32)
    assert not jit._fits((odd, expected, p, p), rhs.arguments)
    ydot = np.empty(y.size)
    rhs(odd, ydot, p, np.empty(L.N_ALGEBRAICS))
    reference = np.empty(y.size)
    rhs(np.ascontiguousarray(odd, dtype=np.float64), reference, p, np.empty(L.N_ALGEBRAICS))
    np.testing.assert_array_equal(ydot, reference)
    if layout == "strided":
        np.testing.assert_array_equal(ydot, expected)


def test_signatures_are_read_into_scalars_and_contiguous_arrays():
    returns, arguments = jit.parse_signature("f8(f8[::1], i8, f8[:, ::1], b1[::1], f8[:, :, ::1])")
    assert returns == "f8"
    assert arguments == (jit.Argument("f8", 1), jit.Argument("i8", 0), jit.Argument("f8", 2),
                         jit.Argument("b1", 1), jit.Argument("f8", 3))
    assert jit.parse_signature("void()") == ("void", ())
    returns, arguments = jit.parse_signature("Tuple((f8[:, ::1], i8[::1]))(f8[:, ::1], b1)")
    assert returns == "Tuple((f8[:, ::1], i8[::1]))"
    assert arguments == (jit.Argument("f8", 2), jit.Argument("b1", 0))


@pytest.mark.parametrize("signature", ["void(f8[:])", "void(f8[::1, :])", "void(f4[::1])", "void f8", "c16(f8)",
                                       "void(f8[:, :])", "Tuple((f8[:], i8))(f8)", "(f8)"])
def test_signatures_the_guard_cannot_check_are_refused(signature):
    with pytest.raises(ValueError, match="signature"):
        jit.parse_signature(signature)


def test_kernels_made_once_numba_is_in_use_compile_calls_between_them():
    # a kernel module imported after the first numba call: its kernels are dispatchers from the start
    jit.materialise()

    @jit.njit(cache=False)
    def half(x):
        return 0.5 * x

    @jit.ahead_of_time("f8(f8)")
    @jit.njit(cache=False)
    def quarter(x):
        return half(half(x))

    assert quarter(3.0) == 0.75  # 3 / 4 exactly in binary
    assert next(k for k in jit.kernels() if k.dispatcher is quarter).signature == "f8(f8)"


def test_only_a_kernel_takes_declared_types():
    with pytest.raises(TypeError, match=r"thermoelec\.jit\.njit"):
        jit.ahead_of_time("void(f8[::1])")(lambda x: None)


class _Marked(np.ndarray):
    pass


def _readonly(shape):
    array = np.zeros(shape)
    array.flags.writeable = False
    return array


@pytest.mark.parametrize(("args", "fits"), [
    ((np.zeros(3), 2, np.zeros((2, 2))), True),
    ((np.zeros(3), np.int64(2), np.zeros((2, 2))), True),
    ((np.zeros(6)[::2], 2, np.zeros((2, 2))), False),                         # strided
    ((np.zeros(3, dtype=np.float32), 2, np.zeros((2, 2))), False),            # float32
    ((np.zeros(3), 2, np.asfortranarray(np.zeros((2, 3)))), False),          # Fortran order
    ((np.zeros(3), 2, np.zeros(4)), False),                                   # one dimension short
    ((_readonly(3), 2, np.zeros((2, 2))), False),                             # read-only
    ((np.zeros(3).view(_Marked), 2, np.zeros((2, 2))), False),                # a subclass
    ((np.zeros(3), 2.0, np.zeros((2, 2))), False),                            # a float for an integer
    ((np.zeros(3), 2), False),                                                 # an argument short
])
def test_the_guard_passes_only_exactly_the_declared_types(args, fits):
    assert jit._fits(args, jit.parse_signature("void(f8[::1], i8, f8[:, ::1])")[1]) is fits


def test_an_integer_or_a_numpy_float_is_a_float_argument():
    arguments = jit.parse_signature("void(f8, b1)")[1]
    assert jit._fits((3, True), arguments)
    assert jit._fits((np.float64(3.5), np.bool_(False)), arguments)
    assert not jit._fits((3.5, 1), arguments)


def test_the_build_command_keeps_todays_build(cache_with_build, capsys):
    assert ahead.main(["--folder", str(cache_with_build / "aot")]) == 0
    assert "built ahead of time" in capsys.readouterr().out
