"""Compiled kernels: a build made ahead of time where one fits, numba's just-in-time compiler otherwise.

A ``run`` calls a dozen kernels, each once per CVODE callback, and a sweep one
batched solver per chunk. Loading them from numba's cache costs about a second in
a fresh process or worker (numba's import, then type inference and a cache lookup
per kernel), more than the solve of a short mission. So the kernels called from
Python declare their argument types once
(:func:`ahead_of_time`), and ``make setup`` compiles them into one extension
module (:mod:`thermoelec.engine.ahead`), named after a hash of the engine's and
physics' sources: an edit of either makes a new name, and the stale build is
never loaded.

:func:`njit` returns a :class:`Kernel`, a stand-in for numba's dispatcher. A
call whose arguments fit the declared types exactly runs the build without
importing numba. Any other call, a kernel with no declared types, or no build at
all (``THERMOELEC_AOT=0`` turns it off), turns every kernel into numba's
dispatcher at once (:func:`materialise`): the numba path is the one the tests
and the batched solver have always used, and the build compiles the same Python
functions with the same numba, so both give the same numbers.

Physics functions shared by the kernels are marked with :func:`register_jitable`
here, which defers numba's own registration until numba is needed.
"""

from __future__ import annotations

import functools
import hashlib
import importlib.machinery
import importlib.util
import os
import sys
import threading
from collections.abc import Callable
from dataclasses import dataclass
from numbers import Integral, Real
from pathlib import Path
from typing import Any

import numpy as np

__all__ = [
    "AOT_ENV",
    "Kernel",
    "ahead_of_time",
    "build_folder",
    "build_name",
    "find_build",
    "kernels",
    "materialise",
    "njit",
    "parse_signature",
    "register_jitable",
    "source_key",
]

#: Environment variable: "0" runs every kernel through numba, even where a build exists.
AOT_ENV = "THERMOELEC_AOT"
#: Name of the extension module a build makes, before its source key.
BUILD_PREFIX = "thermoelec_kernels_"
#: The packages whose sources a build compiles (their ``.py`` files make the source key).
SOURCE_PACKAGES = ("engine", "physics")

#: Scalar codes of a signature, and what a Python argument must be to take the build.
_SCALARS: dict[str, tuple[type, ...]] = {"f8": (Real,), "i8": (Integral,), "b1": (bool, np.bool_)}
_DTYPES = {"f8": np.dtype(np.float64), "i8": np.dtype(np.int64), "b1": np.dtype(np.bool_)}
_RETURNS = {"void", *_SCALARS}

_lock = threading.RLock()
_kernels: list[Kernel] = []
_jitables: list[Callable] = []
_materialised = False
_UNLOADED = object()
_build: Any = _UNLOADED


@dataclass(frozen=True)
class Argument:
    """One argument of a declared signature: a scalar (``ndim`` 0) or a C-contiguous array.

    Attributes
    ----------
    code : str
        numba's type code, ``f8``, ``i8`` or ``b1`` [-].
    ndim : int
        0 for a scalar, else the array's number of dimensions [-].
    """

    code: str
    ndim: int


def _split_top_level(text: str) -> list[str]:
    """``text`` split at the commas outside brackets and parentheses, each part stripped; [] for blank text."""
    parts, depth, start = [], 0, 0
    for i, char in enumerate(text):
        depth += (char in "[(") - (char in "])")
        if char == "," and depth == 0:
            parts.append(text[start:i].strip())
            start = i + 1
    tail = text[start:].strip()
    if tail or parts:
        parts.append(tail)
    return parts


def _argument(text: str, signature: str) -> Argument:
    """One argument's text (``f8``, ``i8[::1]``, ``f8[:, :, ::1]``) read as an :class:`Argument`."""
    code, _, dims = text.partition("[")
    code = code.strip()
    if code not in _SCALARS:
        raise ValueError(f"signature {signature!r}: argument {text!r} is not f8, i8 or b1 (or an array of them)")
    if not dims:
        return Argument(code, 0)
    axes = [axis.strip() for axis in dims.rstrip().removesuffix("]").split(",")]
    if axes[-1] != "::1" or any(axis != ":" for axis in axes[:-1]):
        raise ValueError(f"signature {signature!r}: array {text!r} must be C-contiguous, as in f8[:, ::1]")
    return Argument(code, len(axes))


@functools.cache
def parse_signature(signature: str) -> tuple[str, tuple[Argument, ...]]:
    """A signature such as ``"void(f8[::1], f8[:, ::1], i8)"`` read into its return code and arguments.

    Only what the build and its guard both understand is accepted: scalars
    ``f8``, ``i8``, ``b1`` and C-contiguous arrays of them; the return ``void``, a
    scalar or a ``Tuple((...))`` of those (arrays made inside the kernel).

    Parameters
    ----------
    signature : str
        numba's signature text [-].

    Returns
    -------
    returns : str
        Return type, ``void``, ``f8``, ``i8``, ``b1`` or ``Tuple((...))`` as written [-].
    arguments : tuple of Argument
        The arguments in order [-].

    Raises
    ------
    ValueError
        For any other form of signature.
    """
    text = signature.strip()
    opening, depth = -1, 0
    for i in range(len(text) - 1, -1, -1):  # the parenthesis that opens the argument list
        depth += (text[i] == ")") - (text[i] == "(")
        if depth == 0:
            opening = i
            break
    returns = text[:opening].strip() if text.endswith(")") and opening > 0 else ""
    if returns.startswith("Tuple((") and returns.endswith("))"):
        for member in _split_top_level(returns[len("Tuple(("):-2]):
            _argument(member, signature)
    elif returns not in _RETURNS:
        raise ValueError(f"signature {signature!r} is not of the form 'void(f8[::1], i8)' "
                         "(returns void, f8, i8, b1 or a Tuple((...)) of them)")
    return returns, tuple(_argument(part, signature) for part in _split_top_level(text[opening + 1:-1]))


def _fits(args: tuple, arguments: tuple[Argument, ...]) -> bool:
    """Whether ``args`` are exactly what the build was compiled for (it would misread anything else)."""
    if len(args) != len(arguments):
        return False
    for value, argument in zip(args, arguments, strict=True):
        if argument.ndim == 0:
            if not isinstance(value, _SCALARS[argument.code]):
                return False
            continue
        if (type(value) is not np.ndarray or value.dtype != _DTYPES[argument.code] or value.ndim != argument.ndim
                or not value.flags.c_contiguous or not value.flags.writeable):
            return False
    return True


class Kernel:
    """A kernel's stand-in: runs the ahead-of-time build where it fits, numba's dispatcher otherwise.

    Parameters
    ----------
    py_func : callable
        The kernel's Python function [-].
    options : dict
        numba's ``njit`` options [-].

    Attributes
    ----------
    dispatcher : numba dispatcher or None
        The kernel once numba is in use (:func:`materialise`) [-].
    signature : str or None
        Argument types declared for the build (:func:`ahead_of_time`), None for numba only [-].
    arguments : tuple of Argument
        ``signature`` read by :func:`parse_signature`, once: the guard checks every call against it [-].
    """

    def __init__(self, py_func: Callable, options: dict):
        self.py_func = py_func
        self.options = options
        self.signature: str | None = None
        self.arguments: tuple[Argument, ...] = ()
        self.dispatcher = None
        self._compiled: Any = _UNLOADED
        functools.update_wrapper(self, py_func)

    @property
    def export_name(self) -> str:
        """Name of the kernel in the build: its module's last part and its own (``model__rhs``)."""
        return f"{self.py_func.__module__.rpartition('.')[2]}__{self.py_func.__name__}"

    def compiled(self) -> Callable | None:
        """The kernel's function in the ahead-of-time build, None when there is none (looked up once)."""
        if self._compiled is _UNLOADED:
            build = _load_build() if self.signature is not None else None
            self._compiled = getattr(build, self.export_name, None)
        return self._compiled

    def __call__(self, *args):
        compiled = self.compiled()
        if compiled is not None and _fits(args, self.arguments):
            return compiled(*args)
        if self.dispatcher is None:
            materialise()
        return self.dispatcher(*args)

    def __repr__(self) -> str:
        return f"<thermoelec kernel {self.py_func.__module__}.{self.py_func.__name__}>"


def njit(**options) -> Callable[[Callable], Kernel]:
    """numba's ``njit(**options)`` deferred: the decorated function becomes a :class:`Kernel`.

    Parameters
    ----------
    **options
        numba's ``njit`` options (``cache``, ``nogil``, ``error_model``, ``inline``) [-].

    Returns
    -------
    callable
        The decorator: it makes a :class:`Kernel`, or numba's dispatcher at once when numba is
        already in use (:func:`materialise`) [-].
    """

    def decorate(py_func: Callable):
        kernel = Kernel(py_func, options)
        with _lock:
            _kernels.append(kernel)
            if _materialised:
                # a module imported once numba is in use: its globals must hold dispatchers from the start,
                # for numba to compile its kernels that call one another
                _materialise_one(kernel)
                return kernel.dispatcher
        return kernel

    return decorate


def ahead_of_time(signature: str) -> Callable[[Kernel], Kernel]:
    """Declare a kernel's argument types, so the ahead-of-time build compiles it (put above :func:`njit`).

    Parameters
    ----------
    signature : str
        numba's signature text, C-contiguous arrays only (:func:`parse_signature`) [-].

    Returns
    -------
    callable
        The decorator; it raises TypeError for anything but a :class:`Kernel` or the dispatcher
        :func:`njit` returns once numba is in use [-].
    """
    arguments = parse_signature(signature)[1]

    def declare(kernel):
        made = kernel if isinstance(kernel, Kernel) else next(
            (k for k in kernels() if k.dispatcher is not None and k.dispatcher is kernel), None)
        if made is None:
            raise TypeError(f"ahead_of_time({signature!r}) must decorate a kernel made by thermoelec.jit.njit")
        made.signature, made.arguments = signature, arguments
        return kernel

    return declare


def register_jitable(py_func: Callable) -> Callable:
    """Mark a plain function as callable from kernels (numba's ``register_jitable``, deferred).

    Parameters
    ----------
    py_func : callable
        A function of floats and arrays, plain Python when called from Python [-].

    Returns
    -------
    callable
        ``py_func`` itself [-].
    """
    with _lock:
        _jitables.append(py_func)
        if _materialised:
            from numba.extending import register_jitable as numba_register

            numba_register(py_func)
    return py_func


def kernels() -> list[Kernel]:
    """Every kernel made so far, in the order their modules defined them."""
    with _lock:
        return list(_kernels)


def _materialise_one(kernel: Kernel) -> None:
    import numba

    kernel.dispatcher = numba.njit(**kernel.options)(kernel.py_func)


def materialise() -> None:
    """Make every kernel numba's dispatcher, and put the dispatchers in place of the stand-ins.

    numba compiles a kernel that calls another by reading its module's globals,
    where it must find dispatchers: so every name in thermoelec's modules bound to
    a :class:`Kernel` is rebound to its dispatcher. Safe to call more than once.
    """
    global _materialised
    with _lock:
        if _materialised:
            return
        from numba.extending import register_jitable as numba_register

        for py_func in _jitables:
            numba_register(py_func)
        for kernel in _kernels:
            _materialise_one(kernel)
        for name, module in list(sys.modules.items()):
            if name == "thermoelec" or name.startswith("thermoelec."):
                namespace = vars(module)
                for key, value in list(namespace.items()):
                    if isinstance(value, Kernel):
                        namespace[key] = value.dispatcher
        _materialised = True


def source_key() -> str:
    """Hash of numba's version and the sources a build compiles: this module, the engine's and physics' files.

    numba's version is read from its installed metadata, so the key costs no numba import; "" without numba.
    """
    from importlib.metadata import PackageNotFoundError, version

    try:
        numba_version = version("numba")
    except PackageNotFoundError:
        return ""
    package = Path(__file__).resolve().parent
    sources = sorted(path for sub in SOURCE_PACKAGES for path in (package / sub).glob("*.py"))
    digest = hashlib.sha256(numba_version.encode())
    for path in [Path(__file__).resolve(), *sources]:
        digest.update(str(path.relative_to(package)).encode())
        digest.update(path.read_bytes())
    return digest.hexdigest()[:16]


def build_name(key: str | None = None) -> str:
    """The build's module name for ``key`` (default :func:`source_key`)."""
    return BUILD_PREFIX + (key if key is not None else source_key())


def build_folder() -> Path | None:
    """Where builds live: ``aot`` in thermoelec's cache folder (``$THERMOELEC_CACHE_DIR``); None for no disk cache."""
    from thermoelec.inputs.units import cache_folder

    folder = cache_folder()
    return None if folder is None else folder / "aot"


def find_build(folder: Path | None) -> Path | None:
    """The build file for today's sources in ``folder``, None when there is none."""
    if folder is None or not folder.is_dir():
        return None
    key = source_key()
    if not key:
        return None
    name = build_name(key)
    for suffix in importlib.machinery.EXTENSION_SUFFIXES:
        candidate = folder / (name + suffix)
        if candidate.is_file():
            return candidate
    return None


def _load_build():
    """The ahead-of-time build as a module, loaded once; None when off, missing or unloadable."""
    global _build
    with _lock:
        if _build is _UNLOADED:
            _build = None
            if os.environ.get(AOT_ENV, "1").strip() != "0":
                path = find_build(build_folder())
                if path is not None:
                    _build = _import_extension(path)
        return _build


def _import_extension(path: Path):
    """The extension module at ``path``, None when it does not load (a build from another Python, say)."""
    name = path.name.split(".", 1)[0]
    try:
        spec = importlib.util.spec_from_file_location(name, path)
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
    except (ImportError, OSError):
        return None
    return module
