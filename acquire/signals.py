"""Stop signals: SIGTERM and SIGHUP end the program the way Ctrl-C does.

By default a POSIX process dies on SIGTERM (a service manager or ``kill`` stopping it) and on
SIGHUP (its terminal closed) without running any of its own code, so a sweep would stay
``running`` in the store and a station would end without its summary. :func:`install` gives
both signals a handler that raises :class:`StopSignal` in the main thread: a
:class:`KeyboardInterrupt`, so everything that already ends cleanly on Ctrl-C (the sweep marks
itself interrupted with its points saved, the station prints its summary) ends the same way,
and the command exits with Ctrl-C's code. A signal the process was started with ignored (SIGHUP
under ``nohup``) stays ignored. SIGKILL cannot be caught; the store marks such a sweep
interrupted when it is next opened on this host (:mod:`acquire.store.sweeps`).

:func:`held` puts a stop off while a block runs (a station recording a unit it has measured):
a stop signal or Ctrl-C that arrives meanwhile ends the program right after the block, so what
was measured is never dropped between measuring and saving. Ctrl-C is given the same handler
as the others for that (it still raises a plain KeyboardInterrupt), unless it was ignored.
"""

from __future__ import annotations

import signal
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from types import FrameType

#: The signals that end the program as Ctrl-C does (those this platform has).
STOP_SIGNALS = ("SIGTERM", "SIGHUP")


class StopSignal(KeyboardInterrupt):
    """Raised in the main thread when a stop signal arrives; ``name`` says which."""

    def __init__(self, signum: int) -> None:
        self.signum = signum
        self.name = signal.Signals(signum).name
        super().__init__(self.name)


_holds = 0
_pending: list[int] = []


def _stop(signum: int) -> KeyboardInterrupt:
    return KeyboardInterrupt() if signum == signal.SIGINT else StopSignal(signum)


def _raise(signum: int, frame: FrameType | None) -> None:
    if _holds:
        _pending.append(signum)
        return
    raise _stop(signum)


@contextmanager
def held() -> Iterator[None]:
    """Hold stop signals and Ctrl-C while the block runs; one that came is raised after it.

    (Only once :func:`install` has set the handlers; an exception from the block goes first.)
    """
    global _holds
    _holds += 1
    try:
        yield
    finally:
        _holds -= 1
    if not _holds and _pending:
        signum = _pending[0]
        _pending.clear()
        raise _stop(signum)


def install() -> list[str]:
    """Make SIGTERM and SIGHUP raise :class:`StopSignal`; the names of those now handled.

    Only the main thread may set handlers: called from another thread it does nothing.
    """
    if threading.current_thread() is not threading.main_thread():
        return []
    installed = []
    if signal.getsignal(signal.SIGINT) is signal.default_int_handler:
        signal.signal(signal.SIGINT, _raise)
    for name in STOP_SIGNALS:
        signum = getattr(signal, name, None)
        if signum is None or signal.getsignal(signum) is signal.SIG_IGN:
            continue
        signal.signal(signum, _raise)
        installed.append(name)
    return installed


@contextmanager
def installed() -> Iterator[list[str]]:
    """:func:`install` for the length of the block, then the handlers that were there before
    (so a program that runs a command in its own process, a test say, gets its own back)."""
    if threading.current_thread() is not threading.main_thread():
        yield []
        return
    names = ["SIGINT", *STOP_SIGNALS]
    before = {n: signal.getsignal(getattr(signal, n)) for n in names if hasattr(signal, n)}
    try:
        yield install()
    finally:
        for name, handler in before.items():
            if handler is not None:
                signal.signal(getattr(signal, name), handler)


def stop_reason(stop: KeyboardInterrupt) -> str:
    """How a stop reads for the operator: "stopped by SIGTERM", or "stopped with Ctrl-C"."""
    if isinstance(stop, StopSignal):
        return f"stopped by {stop.name}"
    return "stopped with Ctrl-C"


def leave_stops_to_the_main_thread() -> None:
    """Block Ctrl-C and the stop signals in the calling (helper) thread, so that the system
    hands them to the main thread, interrupting what it waits for there, exactly as without the
    helper thread. Call it first thing in every thread the tool starts beside a measurement."""
    if hasattr(signal, "pthread_sigmask"):
        names = ("SIGINT", "SIGTERM", "SIGHUP")
        signal.pthread_sigmask(
            signal.SIG_BLOCK, {getattr(signal, n) for n in names if hasattr(signal, n)}
        )
