"""A station's state kept in the store, so that the line overview page can show it.

:class:`StateKeeper` is a :class:`~acquire.production.station_watch.StationWatcher`. It writes a
state at once when what a supervisor reads changes (state, reason, lot, plan, operator, the
reference or check-standard problems), else at most every :data:`HEARTBEAT_S` seconds (the
page calls a station silent when its state grows old), and always the final "stopped". One small
write on the station's thread and store connection; a store that cannot be reached
(:class:`~acquire.errors.StoreError`) is kept quiet, and the newest state is tried again one
heartbeat later (so a store that is away costs the station one try per heartbeat, not one per
unit), and the final "stopped" always.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Protocol

from acquire.errors import StoreError
from acquire.production.station_watch import STOPPED, StationState

#: Seconds between writes of an unchanged state (the page's heartbeat).
HEARTBEAT_S = 5.0
#: The fields whose change is written at once.
NOTICED = ("state", "reason", "lot", "plan", "operator", "references", "check_standard")


class StateStore(Protocol):
    """Where states go (a :class:`~acquire.store.Store`)."""

    def save_station_state(self, state: StationState) -> None: ...


class StateKeeper:
    """Writes a station's states to ``store`` (see the module docstring).

    ``clock`` gives seconds (monotonic); tests hand in their own.
    """

    def __init__(
        self,
        store: StateStore,
        clock: Callable[[], float] = time.monotonic,
        heartbeat: float = HEARTBEAT_S,
    ) -> None:
        self._store = store
        self._clock = clock
        self._heartbeat = heartbeat
        self._written: StationState | None = None
        self._written_at = 0.0
        self._retry_at: float | None = None
        self._failures = 0

    @property
    def failures(self) -> int:
        """How many writes failed (each is tried again with the next state)."""
        return self._failures

    def changed(self, state: StationState) -> None:
        if self._due(state):
            self._write(state)

    def close(self) -> None:
        """Nothing to release: the station's store is closed by the station."""

    def _due(self, state: StationState) -> bool:
        if state.state == STOPPED:
            return True
        if self._retry_at is not None:
            return self._clock() >= self._retry_at
        last = self._written
        if last is None:
            return True
        if any(getattr(state, name) != getattr(last, name) for name in NOTICED):
            return True
        return self._clock() - self._written_at >= self._heartbeat

    def _write(self, state: StationState) -> None:
        try:
            self._store.save_station_state(state)
        except StoreError:
            self._failures += 1
            self._retry_at = self._clock() + self._heartbeat
            return
        self._retry_at = None
        self._written = state
        self._written_at = self._clock()
