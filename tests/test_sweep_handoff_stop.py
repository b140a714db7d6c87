"""A stop while the sweep waits for its last chunks: every chunk is in the state first, then the
stop is raised (so the sweep ends interrupted with all it measured, and the stop is not lost).

Python runs signal handlers in the main thread between bytecodes (Python docs, `signal`
module, "Execution of Python signal handlers"): a handler that raises can interrupt a thread's
join at any point. The sweep therefore waits on an event its thread sets at the end rather than
trusting ``Thread.join``/``is_alive`` after an interruption.
"""

from __future__ import annotations

import contextlib
import os
import signal
import threading
import time

import pytest

from acquire import signals
from acquire.sweep import _Handoff

pytestmark = pytest.mark.skipif(not hasattr(signal, "pthread_kill"), reason="POSIX only")


class SlowSink:
    def __init__(self) -> None:
        self.added: list[int] = []

    def __call__(self, f, z, u_m=None) -> None:
        time.sleep(0.2)
        self.added.append(len(f))


def _stop_soon(signum: int, after: float) -> threading.Timer:
    timer = threading.Timer(after, lambda: os.kill(os.getpid(), signum))
    timer.start()
    return timer


@pytest.mark.parametrize(
    "tool_handlers, signum",
    [(False, signal.SIGINT), (True, signal.SIGINT), (True, signal.SIGTERM)],
    ids=["python's Ctrl-C", "tool's Ctrl-C", "tool's SIGTERM"],
)
def test_a_stop_during_finish_waits_for_every_chunk_then_is_raised(tool_handlers, signum):
    sink = SlowSink()
    handoff = _Handoff(sink)  # type: ignore[arg-type]
    for k in range(1, 6):
        handoff.hold([0.0] * k, [0j] * k)
    context = signals.installed() if tool_handlers else contextlib.nullcontext()
    with context:
        timer = _stop_soon(signum, 0.3)  # while the thread is still on its second chunk
        try:
            with pytest.raises(KeyboardInterrupt):
                handoff.finish()
        finally:
            timer.cancel()
    assert sink.added == [1, 2, 3, 4, 5]  # nothing left out, nothing twice
