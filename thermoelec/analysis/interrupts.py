"""Termination signals: SIGINT and SIGTERM as one exception, held back while outputs are committed.

Owns :class:`Interrupted` (a :class:`KeyboardInterrupt` that knows its signal and
exit status, 130 for SIGINT, 143 for SIGTERM, as shells report them: 128 plus
the signal number), :func:`termination_signals` (the command line's handlers:
the signal is raised as :class:`Interrupted` in the main thread, so every
``finally`` runs: a sweep ends its workers, a half-staged output folder is
removed), :func:`deferred_signals` (a critical section: a signal that arrives
inside it is raised when it ends, so the few renames that put a command's
outputs in place are never cut in half) and :func:`unswallowed_signals` (a
block after which a signal whose exception a C library's callback wrapper
swallowed is raised again). Imports nothing from thermoelec.
"""

from __future__ import annotations

import signal
import sys
import threading
from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["TERMINATION_SIGNALS", "Interrupted", "deferred_signals", "termination_signals", "unswallowed_signals"]

#: The signals that end a command cleanly.
TERMINATION_SIGNALS = (signal.SIGINT, signal.SIGTERM)

#: Seconds after which a signal whose exception could not be raised is sent again [s].
REDELIVERY_DELAY = 0.005

#: ``depth`` of :func:`deferred_signals` blocks, the ``pending`` signal they hold back, and ``raised``:
#: how many :class:`Interrupted` the handler (or :func:`unswallowed_signals`) has raised, with the
#: ``last`` one's signal number.
_state = {"depth": 0, "pending": None, "raised": 0, "last": None}


class Interrupted(KeyboardInterrupt):
    """A command ended by SIGINT (Ctrl-C) or SIGTERM.

    Parameters
    ----------
    signum : int
        The signal's number.
    """

    def __init__(self, signum: int):
        super().__init__(signal.Signals(signum).name)
        self.signum = signum

    @property
    def name(self) -> str:
        """The signal's name (``SIGTERM``)."""
        return signal.Signals(self.signum).name

    @property
    def exit_status(self) -> int:
        """128 plus the signal number: 130 for SIGINT, 143 for SIGTERM [-]."""
        return 128 + self.signum


def _handler(signum: int, frame) -> None:
    if _state["depth"] > 0:
        _state["pending"] = _state["pending"] or signum
        return
    _raise(signum)


def _raise(signum: int) -> None:
    """Raise :class:`Interrupted` for ``signum``, counted (see :func:`unswallowed_signals`)."""
    _state["raised"] += 1
    _state["last"] = signum
    raise Interrupted(signum)


def _send_again(signum: int, raised: int) -> None:
    """The redelivery timer: send ``signum`` to the main thread unless an Interrupted was raised since."""
    if _state["raised"] == raised:
        signal.pthread_kill(threading.main_thread().ident, signum)


def _redeliver(unraisable, fallback) -> None:
    """``sys.unraisablehook`` under :func:`termination_signals`: a signal's exception is delivered again.

    A signal that arrives while Python runs a weakref callback or a ``__del__``
    (the garbage collector runs them at any point) raises its exception there,
    where Python can only print it with a traceback and drop it: the command
    would go on as if never signalled. The signal is sent to the main thread
    again instead, from a timer a few milliseconds later (sent at once, its handler
    would run inside this hook and raise here), to be taken at the next ordinary
    point (unless one was raised meanwhile: one signal, one exception); anything
    else goes to ``fallback``.
    """
    if isinstance(unraisable.exc_value, Interrupted):
        again = threading.Timer(REDELIVERY_DELAY, _send_again, (unraisable.exc_value.signum, _state["raised"]))
        again.daemon = True
        again.start()
        return
    fallback(unraisable)


@contextmanager
def termination_signals() -> Iterator[None]:
    """Raise SIGINT and SIGTERM as :class:`Interrupted` in the main thread inside the block.

    Outside the main thread (where Python cannot set handlers) the block runs
    with the handlers as they are. A signal whose exception lands where Python
    cannot raise it (a weakref callback, a ``__del__``) is delivered again.

    Yields
    ------
    None
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = {sig: signal.signal(sig, _handler) for sig in TERMINATION_SIGNALS}
    previous_hook = sys.unraisablehook
    sys.unraisablehook = lambda unraisable: _redeliver(unraisable, previous_hook)
    try:
        yield
    finally:
        sys.unraisablehook = previous_hook
        for sig, handler in previous.items():
            signal.signal(sig, handler)


@contextmanager
def deferred_signals() -> Iterator[None]:
    """Hold back SIGINT and SIGTERM inside the block and raise the first one that came when it ends.

    Nested blocks end their deferral with the outermost. Only effective under
    :func:`termination_signals` (elsewhere the default handlers act at once).

    Yields
    ------
    None

    Raises
    ------
    Interrupted
        After the block, when a signal arrived inside it.
    """
    _state["depth"] += 1
    try:
        yield
    finally:
        _state["depth"] -= 1
        if _state["depth"] == 0 and _state["pending"] is not None:
            signum, _state["pending"] = _state["pending"], None
            _raise(signum)


@contextmanager
def unswallowed_signals() -> Iterator[None]:
    """Raise a termination signal after the block whose exception was raised inside it and never came out.

    A signal's :class:`Interrupted` raised inside a C library's wrapper of a
    Python callback (SUNDIALS' right-hand side as scikits.odes wraps it) may be
    taken by the wrapper as the callback's failure: the solver reports an
    unrecoverable right-hand side and returns normally, and the command would
    record a solver failure and exit 0. A block that ends normally after such
    a signal raises it again here, so the command ends as signalled (and writes
    nothing of the failed solve). A block that ends with an exception leaves it
    as it is.

    Yields
    ------
    None

    Raises
    ------
    Interrupted
        After the block, when a signal's exception was raised inside it and the block ended normally.
    """
    if threading.current_thread() is not threading.main_thread():
        yield  # signals are raised in the main thread only: another thread's block saw none of them
        return
    raised = _state["raised"]
    yield
    if _state["raised"] != raised:
        _raise(_state["last"])
