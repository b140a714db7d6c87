"""Threads the tool starts beside a measurement leave Ctrl-C and the stop signals to the main
thread.

POSIX delivers a process-directed signal to any one thread that does not block it
(pthread_sigmask(3), "Signal mask"); CPython runs its Python handler on the main thread only
(Python docs, `signal` module, "Signals and threads"). A helper thread that takes the signal
therefore leaves the main thread blocked in its wait, and the stop lands late, in the middle
of a unit. Each helper thread blocks SIGINT, SIGTERM and SIGHUP first thing.
"""

from __future__ import annotations

import signal
import threading
from pathlib import Path

import pytest

from acquire.signals import leave_stops_to_the_main_thread

STOPS = {signal.SIGINT, signal.SIGTERM, signal.SIGHUP}

pytestmark = pytest.mark.skipif(
    not hasattr(signal, "pthread_sigmask"), reason="no per-thread signal masks on this system"
)


def _mask_in_thread(target) -> set[int]:
    seen: list[set[int]] = []

    def run() -> None:
        target()
        seen.append(set(signal.pthread_sigmask(signal.SIG_BLOCK, [])))

    thread = threading.Thread(target=run)
    thread.start()
    thread.join(5)
    return seen[0]


def test_a_helper_thread_blocks_the_stop_signals_and_the_main_thread_does_not():
    assert _mask_in_thread(leave_stops_to_the_main_thread) >= STOPS
    assert not STOPS & set(signal.pthread_sigmask(signal.SIG_BLOCK, []))


def test_without_it_a_new_thread_would_take_the_signals():
    """The check above can fail: a plain thread inherits the main thread's open mask."""
    assert not STOPS & _mask_in_thread(lambda: None)


def test_every_module_that_starts_a_thread_leaves_the_stops_to_the_main_thread():
    """A suite rule: a module of the tool that starts a thread calls the helper (the simulator,
    a server of its own with its own signal handling, is not part of a measurement's process)."""
    root = Path(__file__).resolve().parent.parent / "acquire"
    starting = [p for p in root.rglob("*.py") if "threading.Thread(" in p.read_text()]
    assert len(starting) >= 4  # sweep chunks, sweep saver, publisher, state keeper
    missing = [
        str(p.relative_to(root))
        for p in starting
        if "leave_stops_to_the_main_thread()" not in p.read_text()
    ]
    assert not missing, f"threads that may take Ctrl-C from the main thread: {missing}"
