"""A station's state kept in the store, so that the line overview page can show it.

:class:`StateKeeper` is a :class:`~acquire.production.station_watch.StationWatcher`. A change a
supervisor must see at once (state, reason, lot, plan, operator, the reference or check-standard
problems, and the final "stopped") is written on the station's thread as it happens: one small
write. Everything else (the counts) and the heartbeat go out from a thread of the keeper's own
every :data:`HEARTBEAT_S` seconds: it writes the newest state again, made now, so a station
waiting at its prompt for the next serial is not taken for a silent one (the page calls a station
silent when its newest state is over a minute old). The heartbeat uses the store from its own
thread (the store gives each thread its own connection), which leaves Ctrl-C and the stop
signals to the main thread.

A store that cannot be reached (:class:`~acquire.errors.StoreError`) is kept quiet: the state is
written again with the next heartbeat. The station's screen never hears of it.
"""

from __future__ import annotations

import threading
from dataclasses import replace
from typing import Protocol

from acquire.errors import StoreError
from acquire.production.station_watch import STOPPED, StationState
from acquire.signals import leave_stops_to_the_main_thread
from acquire.store.schema import utc_now

#: Seconds between heartbeats (writes of the newest state, made again).
HEARTBEAT_S = 5.0
#: The fields whose change is written at once.
NOTICED = ("state", "reason", "lot", "plan", "operator", "references", "check_standard")
#: Seconds :meth:`StateKeeper.close` waits for the heartbeat thread and a write under way.
CLOSE_WAIT_S = 2.0


class StateStore(Protocol):
    """Where states go (a :class:`~acquire.store.Store`)."""

    def save_station_state(self, state: StationState) -> None: ...


class StateKeeper:
    """Writes a station's states to ``store`` (see the module docstring); ``heartbeat`` is the
    seconds between heartbeats."""

    def __init__(self, store: StateStore, heartbeat: float = HEARTBEAT_S) -> None:
        self._store = store
        self._heartbeat = heartbeat
        self._lock = threading.Lock()
        self._latest: StationState | None = None
        self._written: StationState | None = None
        self._failures = 0
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None

    @property
    def failures(self) -> int:
        """How many writes failed (each state is written again with the next heartbeat)."""
        return self._failures

    def changed(self, state: StationState) -> None:
        self._latest = state
        last = self._written
        if last is None or any(getattr(state, f) != getattr(last, f) for f in NOTICED):
            self._write(state)
        if self._thread is None and state.state != STOPPED:
            self._thread = threading.Thread(
                target=self._beat, name="station state heartbeat", daemon=True
            )
            self._thread.start()

    def close(self) -> None:
        """Stop the heartbeat; the final state is written once more if its write failed."""
        self._stop.set()
        if self._thread is not None:
            self._thread.join(CLOSE_WAIT_S)
        latest = self._latest
        if latest is not None and self._written is not latest:
            self._write(latest, wait=CLOSE_WAIT_S)

    def _beat(self) -> None:
        leave_stops_to_the_main_thread()
        while not self._stop.wait(self._heartbeat):
            latest = self._latest
            if latest is None or latest.state == STOPPED:
                continue
            self._write(latest, told=latest, wait=-1)

    def _write(
        self, state: StationState, told: StationState | None = None, wait: float = 0
    ) -> None:
        """Save ``state``; a heartbeat's (``told``: the state it restates) is dropped when a
        newer state came meanwhile. Waits ``wait`` seconds (-1: as long as it takes) for a write
        under way on the other thread; the station's own writes never wait: a state skipped so
        goes out with the next heartbeat."""
        got = self._lock.acquire() if wait < 0 else self._lock.acquire(timeout=wait)
        if not got:
            return
        try:
            if told is not None and told is not self._latest:
                return
            try:  # stamped now, under the lock: a later write never carries an older time
                self._store.save_station_state(replace(state, updated_at=utc_now()))
            except StoreError:
                self._failures += 1
                return
            self._written = state if told is None else told
        finally:
            self._lock.release()
