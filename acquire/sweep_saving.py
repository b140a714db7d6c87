"""Saving a sweep's points while it runs: on a thread of its own, patient with the store.

A :class:`PointSaver` writes the points a :class:`~acquire.sweep_state.SweepState` holds to the
store's sweep writer: every ``interval`` seconds, the points that arrived since the last write
go in batches of at most :data:`LARGEST_BATCH` (one transaction each, so the rows being
built take little memory however fast the points come), on the saver's own thread, so the
thread that talks to the meter never waits for the store. When a write fails with a
:class:`~acquire.errors.StoreError` (the database is out of reach, the network was cut) the
points stay where they are, in the state's memory, and the saver tries again after a pause
that doubles from :data:`FIRST_PAUSE_S` up to :data:`LONGEST_PAUSE_S`; once the store
answers, everything waiting goes in, in order.

:meth:`PointSaver.close` writes what is left and records how the sweep ended, waiting up to
``patience`` seconds for the store. If the store does not come back in that time the saver
gives up and says so (:class:`SaveReport`): how many points the store holds, and why the rest
could not be written. Those points are still in the sweep's outcome (and any CSV file made from
it); the sweep stays ``running`` in the store, which marks it interrupted once this process has
ended (:mod:`acquire.store.sweeps`).
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass
from typing import Any

from acquire.errors import StoreError
from acquire.signals import leave_stops_to_the_main_thread
from acquire.store.sweep_batch import SweepNotRunning
from acquire.sweep_state import SweepState
from acquire.uncertainty import expanded

#: First and longest pause (seconds) between attempts to write to a store that failed.
FIRST_PAUSE_S, LONGEST_PAUSE_S = 0.1, 2.0
#: The most points written in one transaction.
LARGEST_BATCH = 2048
#: Seconds one attempt may take beyond the patience (a connection being refused or timing out).
ATTEMPT_ALLOWANCE_S = 15.0


@dataclass(frozen=True)
class SaveReport:
    """What the store holds of a sweep once its saver closed.

    ``saved`` points are committed; ``finished`` is True when the end status was written too.
    ``problem`` is the store's last error when something is missing ('' when nothing is), and
    ``waits`` how many times a write failed and had to wait for the store.
    """

    saved: int
    finished: bool
    problem: str = ""
    waits: int = 0

    @property
    def complete(self) -> bool:
        return self.finished and not self.problem


class PointSaver:
    """Writes the points of ``state`` through ``writer`` on a thread (see the module doc).

    ``known`` says whether the state's uncertainty and flags are evaluated (else the writer
    gets none). Call :meth:`start` before the first point and :meth:`close` after the last.
    """

    def __init__(
        self,
        writer: Any,
        state: SweepState,
        known: bool,
        interval: float = 0.25,
        patience: float = 30.0,
    ) -> None:
        self._writer = writer
        self._state = state
        self._known = known
        self._interval = interval
        self._patience = patience
        self._closing = threading.Event()
        self._end: tuple[str, str] = ("interrupted", "")
        self._deadline = 0.0
        self._abandon = False
        self._saved = 0
        self._finished = False
        self._problem = ""
        self._waits = 0
        self._failure: BaseException | None = None
        self._thread = threading.Thread(target=self._run, name="sweep-saver", daemon=True)

    @property
    def saved(self) -> int:
        """How many points the store has committed so far."""
        return self._saved

    def start(self) -> None:
        self._thread.start()

    def close(self, status: str, note: str) -> SaveReport:
        """Write what is left, mark the sweep ``status`` with ``note``, and report.

        Waits for the store up to the patience given; Ctrl-C while waiting stops the wait.
        A failure other than the store's (a bug) is raised here.
        """
        self._end = (status, note)
        self._deadline = time.monotonic() + self._patience
        self._closing.set()
        try:
            self._thread.join(self._patience + ATTEMPT_ALLOWANCE_S)
        except KeyboardInterrupt:
            self._abandon = True
            self._problem = self._problem or "the wait for the store was stopped with Ctrl-C"
        if self._thread.is_alive():
            self._abandon = True
            self._problem = self._problem or "the store did not answer"
        if self._failure is not None:
            raise self._failure
        missing = self._saved < self._state.count or not self._finished
        return SaveReport(
            self._saved, self._finished, self._problem if missing else "", self._waits
        )

    def _run(self) -> None:
        leave_stops_to_the_main_thread()
        pause = 0.0
        try:
            while not self._abandon:
                if not self._closing.is_set():
                    self._closing.wait(pause or self._interval)
                elif pause:
                    left = self._deadline - time.monotonic()
                    if left <= 0:
                        return
                    time.sleep(min(pause, left))
                closing = self._closing.is_set()
                try:
                    self.write_waiting()
                    if closing:
                        self._writer.finish(*self._end)
                        self._finished = True
                        return
                    pause = 0.0
                except StoreError as exc:
                    self._problem = str(exc)
                    self._waits += 1
                    if isinstance(exc, SweepNotRunning):
                        return
                    pause = min(pause * 2, LONGEST_PAUSE_S) if pause else FIRST_PAUSE_S
        except BaseException as exc:  # noqa: BLE001 - handed to the sweep's thread by close()
            self._failure = exc

    def write_waiting(self) -> None:
        """Write every point received and not yet stored, :data:`LARGEST_BATCH` at a time.

        The saver's thread calls it; it must not run on two threads at once."""
        state = self._state
        n = state.count
        if n <= self._saved:
            return
        f, raw, corrected = state.points()
        while self._saved < n:
            part = slice(self._saved, min(n, self._saved + LARGEST_BATCH))
            self._writer.add_points(
                f[part].copy(),
                raw[part].copy(),
                None if corrected is None else corrected[part].copy(),
                uncertainty=expanded(state.cov[part]) if self._known else None,
                flags=list(map(str, state.flags[part])) if self._known else None,
            )
            self._saved = part.stop
