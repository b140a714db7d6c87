"""What a station is doing, told to whoever watches it beyond its own screen.

The station redraws its screen after every unit, refusal, block and message. A
:class:`WatchedScreen` stands in for that screen: it shows the status as before, then turns it
into a :class:`StationState` (plain words and counts, no terminal markup) and hands it to each
:class:`StationWatcher`: the line's store (for the overview page) and the MQTT publisher. A
watcher that fails must never stop the station: :meth:`WatchedScreen.show` catches nothing, so
each watcher keeps its own errors to itself and is quick (it hands slow work to a thread).

At the end of a session the command calls :meth:`WatchedScreen.end` once with the final status
and why the session ended; watchers then get a ``"stopped"`` state and are closed.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from datetime import datetime
from typing import Any, Protocol

from acquire.production.screen import StationStatus
from acquire.store.schema import utc_now

#: The station measures units.
RUNNING = "running"
#: The station refuses units until its references or check standard are put right.
BLOCKED = "blocked"
#: The session has ended.
STOPPED = "stopped"
STATES = (RUNNING, BLOCKED, STOPPED)


@dataclass(frozen=True)
class StationState:
    """One station as the line sees it.

    ``state`` is one of :data:`STATES`; ``reason`` says why it is blocked or stopped ('' while
    it runs). ``tested`` and ``passed`` count serials of this session's lot at this station
    (latest attempt), ``waiting`` units kept in the local outbox for the store.
    ``references`` and ``check_standard`` are '' when fine, else the problem in words (too old,
    another fixture, out of control). ``started_at`` is when the session started,
    ``updated_at`` when this state was made (both UTC).
    """

    station: str
    state: str
    reason: str
    lot: str
    plan: str
    plan_hash: str
    operator: str
    meter: str
    fixture: str
    tested: int
    passed: int
    waiting: int
    references: str
    check_standard: str
    started_at: datetime
    updated_at: datetime


class StationWatcher(Protocol):
    """Told of every change of a station; must be quick and must not raise."""

    def changed(self, state: StationState) -> None: ...

    def close(self) -> None: ...


@dataclass(frozen=True)
class StationFacts:
    """What a session's states share: who, what, since when."""

    plan_hash: str
    meter: str
    fixture: str
    started_at: datetime


def describe(
    status: StationStatus, facts: StationFacts, references: Sequence[str], checks: Sequence[str]
) -> StationState:
    """The :class:`StationState` of a running or blocked station showing ``status``;
    ``references`` and ``checks`` are the reference and check-standard problems it has now."""
    return StationState(
        station=status.station,
        state=BLOCKED if status.blocked else RUNNING,
        reason=status.blocked,
        lot=status.lot,
        plan=status.plan,
        plan_hash=facts.plan_hash,
        operator=status.operator,
        meter=facts.meter,
        fixture=facts.fixture,
        tested=status.tested,
        passed=status.passed,
        waiting=status.waiting,
        references="; ".join(references),
        check_standard="; ".join(checks),
        started_at=facts.started_at,
        updated_at=utc_now(),
    )


class WatchedScreen:
    """A station screen that also tells ``watchers`` every status it shows.

    ``state_of`` turns a status into a :class:`StationState` (see :func:`describe`). Every other
    attribute (``ring``, ``ask``, ``summary``, ...) is the wrapped screen's.
    """

    def __init__(
        self,
        screen: Any,
        state_of: Callable[[StationStatus], StationState],
        watchers: Sequence[StationWatcher],
    ) -> None:
        self._screen = screen
        self._state_of = state_of
        self._watchers = tuple(watchers)
        self._last: StationState | None = None

    def show(self, status: StationStatus) -> None:
        self._screen.show(status)
        if self._watchers:
            self._tell(self._state_of(status))

    def end(self, status: StationStatus, why: str) -> None:
        """Tell the watchers the session ended (``why``, e.g. "end of input"), then close them."""
        if self._watchers:
            state = replace(self._state_of(status), state=STOPPED, reason=why)
            self._tell(state)
        for watcher in self._watchers:
            watcher.close()

    @property
    def last_state(self) -> StationState | None:
        """The state last told (None before the first)."""
        return self._last

    def _tell(self, state: StationState) -> None:
        self._last = state
        for watcher in self._watchers:
            watcher.changed(state)

    def __getattr__(self, name: str) -> Any:
        return getattr(self._screen, name)
