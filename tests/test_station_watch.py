"""The station tells its watchers what it shows: plain states, a stop at the end."""

from __future__ import annotations

from datetime import UTC, datetime

from acquire.production.screen import StationStatus
from acquire.production.station_watch import (
    BLOCKED,
    RUNNING,
    STOPPED,
    StationFacts,
    WatchedScreen,
    describe,
)

FACTS = StationFacts("ab" * 32, "Maker,Model,1,2", "jig-7", datetime(2026, 1, 2, tzinfo=UTC))


class Screen:
    def __init__(self) -> None:
        self.shown: list[StationStatus] = []

    def show(self, status: StationStatus) -> None:
        self.shown.append(status)

    def ring(self) -> str:
        return "rang"


class Watcher:
    def __init__(self) -> None:
        self.states: list = []
        self.closed = 0

    def changed(self, state) -> None:
        self.states.append(state)

    def close(self) -> None:
        self.closed += 1


def test_every_shown_status_reaches_the_watchers_as_a_state():
    screen, watcher = Screen(), Watcher()
    watched = WatchedScreen(screen, lambda s: describe(s, FACTS, ["too old"], []), [watcher])
    status = StationStatus("st-1", "ana", "L1", "coil", tested=3, passed=2, waiting=1)
    watched.show(status)
    assert screen.shown == [status]
    (state,) = watcher.states
    assert (state.state, state.tested, state.passed, state.waiting) == (RUNNING, 3, 2, 1)
    assert (state.references, state.check_standard, state.fixture) == ("too old", "", "jig-7")
    assert watched.ring() == "rang"  # the rest is the wrapped screen's


def test_a_blocked_status_is_blocked_and_the_end_stops_and_closes():
    screen, watcher = Screen(), Watcher()
    watched = WatchedScreen(screen, lambda s: describe(s, FACTS, [], ["check late"]), [watcher])
    blocked = StationStatus("st-1", "ana", "L1", "coil", blocked="check late. measure it")
    watched.show(blocked)
    watched.end(blocked, "end of input")
    assert [s.state for s in watcher.states] == [BLOCKED, STOPPED]
    assert watcher.states[-1].reason == "end of input"
    assert watcher.closed == 1
    assert watched.last_state is watcher.states[-1]
