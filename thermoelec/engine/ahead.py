"""The ahead-of-time build of the kernels a ``run`` and a sweep call: ``python -m thermoelec.engine.ahead``.

``make setup`` runs it once. It compiles every kernel declared with
:func:`thermoelec.jit.ahead_of_time` into one extension module with numba's
ahead-of-time compiler (``numba.pycc``), from the same Python functions and with
the same numba as the just-in-time path, so the two give the same numbers; the
module is named after :func:`thermoelec.jit.source_key` and kept in
``aot`` of thermoelec's cache folder (``$THERMOELEC_CACHE_DIR``). A build for
other sources is removed when a new one lands. Without a build everything
still runs, through numba's cache, a second or so slower to start (each sweep
worker too).
"""

from __future__ import annotations

import argparse
import contextlib
import importlib
import os
import shutil
import sys
import tempfile
import time
import warnings
from collections.abc import Iterator
from pathlib import Path

from thermoelec import jit

__all__ = ["BUILD_OPTIONS", "KERNEL_MODULES", "build", "declared_kernels", "main"]

#: The modules whose kernels a ``run`` and a sweep's batched solver call from Python; importing them declares
#: their kernels.
KERNEL_MODULES = ("thermoelec.engine.model", "thermoelec.engine.mission", "thermoelec.engine.resolved",
                  "thermoelec.engine.batch")


def declared_kernels() -> list[jit.Kernel]:
    """The kernels with declared argument types, after importing :data:`KERNEL_MODULES`.

    Returns
    -------
    list of thermoelec.jit.Kernel
        In definition order [-].
    """
    for name in KERNEL_MODULES:
        importlib.import_module(name)
    return [kernel for kernel in jit.kernels() if kernel.signature is not None]


#: The njit options every declared kernel must have: the build compiles all of them with these.
BUILD_OPTIONS = {"error_model": "numpy", "nogil": True}


@contextlib.contextmanager
def _kernel_flags() -> Iterator[None]:
    """numba's ahead-of-time compiler with the kernels' own options (:data:`BUILD_OPTIONS`).

    pycc compiles with the "python" error model and holds the GIL by default. With
    the numpy model a division by zero gives inf or nan, as in the just-in-time
    kernels, not a Python exception; without the GIL a sweep's command process
    keeps feeding its workers while it solves a chunk itself.
    """
    from numba.pycc import compiler

    plain = compiler.Flags

    class KernelFlags(plain):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self.error_model = BUILD_OPTIONS["error_model"]
            self.release_gil = BUILD_OPTIONS["nogil"]

    compiler.Flags = KernelFlags
    try:
        yield
    finally:
        compiler.Flags = plain


def build(folder: Path) -> Path:
    """Compile the declared kernels into ``folder``; returns the extension module's path.

    The module is written in a temporary folder beside the target and moved
    into place in one step, so a reader never sees half a build; builds of other
    sources in ``folder`` are removed after.

    Parameters
    ----------
    folder : pathlib.Path
        Folder of builds, created when missing [-].

    Returns
    -------
    pathlib.Path
        The build [-].
    """
    kernels = declared_kernels()
    differing = [kernel.export_name for kernel in kernels
                 if any(kernel.options.get(key) != value for key, value in BUILD_OPTIONS.items())]
    if differing:
        raise ValueError(f"kernels declared for the build need the options {BUILD_OPTIONS}: {', '.join(differing)}")
    jit.materialise()
    from numba.pycc import CC

    folder.mkdir(parents=True, exist_ok=True)
    name = jit.build_name()
    with tempfile.TemporaryDirectory(dir=folder, prefix=".building-") as scratch:
        compiler = CC(name)
        compiler.output_dir = scratch
        compiler.verbose = False
        for kernel in kernels:
            compiler.export(kernel.export_name, kernel.signature)(kernel.py_func)
        with warnings.catch_warnings(), _kernel_flags():
            warnings.simplefilter("ignore")  # numba's notice that pycc is deprecated; setuptools' notices
            compiler.compile()
        made = next(path for path in Path(scratch).iterdir() if path.name.startswith(name + "."))
        target = folder / made.name
        os.replace(made, target)
    for stale in folder.glob(jit.BUILD_PREFIX + "*"):
        if stale != target:
            shutil.rmtree(stale) if stale.is_dir() else stale.unlink(missing_ok=True)
    return target


def main(argv: list[str] | None = None) -> int:
    """Build the kernels unless today's build is there; 0 on success, 1 with a message on failure.

    Parameters
    ----------
    argv : list of str, optional
        Command-line arguments (``--folder``, ``--force``) [-].

    Returns
    -------
    int
        Exit status [-].
    """
    parser = argparse.ArgumentParser(prog="python -m thermoelec.engine.ahead", description=__doc__.splitlines()[0])
    parser.add_argument("--folder", type=Path, help="folder of builds (default: aot in thermoelec's cache folder)")
    parser.add_argument("--force", action="store_true", help="build even when today's build is there")
    args = parser.parse_args(argv)
    folder = args.folder if args.folder is not None else jit.build_folder()
    if folder is None:
        print("thermoelec kernels: no cache folder (THERMOELEC_CACHE_DIR is empty); nothing built", file=sys.stderr)
        return 0
    present = jit.find_build(folder)
    if present is not None and not args.force:
        print(f"thermoelec kernels: built ahead of time, {present}")
        return 0
    print("thermoelec kernels: compiling the kernels of run and sweep ahead of time (once, a minute or two)")
    start = time.perf_counter()
    try:
        target = build(folder)
    except Exception as exc:  # a failed build only costs start-up time: say so, never stop the set-up
        print(f"thermoelec kernels: the ahead-of-time build failed ({type(exc).__name__}: {exc}); "
              "run falls back to numba's cache", file=sys.stderr)
        return 1
    print(f"thermoelec kernels: built in {time.perf_counter() - start:.0f} s, {target}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
