"""Termination signals: SIGINT and SIGTERM as one exception, held back while outputs are committed.

Owns :class:`Interrupted` (a :class:`KeyboardInterrupt` that knows its signal and
exit status, 130 for SIGINT, 143 for SIGTERM, as shells report them: 128 plus
the signal number), :func:`termination_signals` (the command line's handlers:
the signal is raised as :class:`Interrupted` in the main thread, so every
``finally`` runs: a sweep ends its workers, a half-staged output folder is
removed) and :func:`deferred_signals` (a critical section: a signal that arrives
inside it is raised when it ends, so the few renames that put a command's
outputs in place are never cut in half). Imports nothing from thermoelec.
"""

from __future__ import annotations

import signal
import sys
import threading
from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["TERMINATION_SIGNALS", "Interrupted", "deferred_signals", "termination_signals"]

#: The signals that end a command cleanly.
TERMINATION_SIGNALS = (signal.SIGINT, signal.SIGTERM)

#: Seconds after which a signal whose exception could not be raised is sent again [s].
REDELIVERY_DELAY = 0.005

_state = {"depth": 0, "pending": None}


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
    raise Interrupted(signum)


def _redeliver(unraisable, fallback) -> None:
    """``sys.unraisablehook`` under :func:`termination_signals`: a signal's exception is delivered again.

    A signal that arrives while Python runs a weakref callback or a ``__del__``
    (the garbage collector runs them at any point) raises its exception there,
    where Python can only print it with a traceback and drop it: the command
    would go on as if never signalled. The signal is sent to the main thread
    again instead, from a timer a few milliseconds later (sent at once, its handler
    would run inside this hook and raise here), to be taken at the next ordinary
    point; anything else goes to ``fallback``.
    """
    if isinstance(unraisable.exc_value, Interrupted):
        again = threading.Timer(REDELIVERY_DELAY, signal.pthread_kill,
                                (threading.main_thread().ident, unraisable.exc_value.signum))
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
            raise Interrupted(signum)
