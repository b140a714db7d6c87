"""The station's publisher: a :class:`~acquire.production.station_watch.StationWatcher` that
sends the station's status and units to an MQTT broker from a thread of its own.

:meth:`Publisher.changed` only keeps the newest state and wakes the thread, so the station never
waits for the network. The thread has its own store connection and its own MQTT connection; it
publishes the retained status when it changed (at most one a second, but always the final
"stopped") and sends every unit of the station the store holds beyond its publish position
(:mod:`acquire.publish.sending`). A broker or store that cannot be reached is tried again after
a pause that doubles from :data:`RETRY_FIRST` up to :data:`RETRY_LONGEST` seconds; meanwhile the
units wait in the store. :meth:`Publisher.close` gives the thread up to :data:`CLOSE_PATIENCE`
seconds to send what waits, then :attr:`Publisher.left` says how many units still wait.
"""

from __future__ import annotations

import threading
import time
from collections.abc import Callable
from typing import Any

from acquire.errors import PublishError, StoreError
from acquire.production.station_watch import STOPPED, StationState
from acquire.publish.link import Link
from acquire.publish.message import encode, lost_message, status_message
from acquire.publish.sending import client_id, send_waiting
from acquire.publish.target import PublishTarget, StationTopics
from acquire.signals import leave_stops_to_the_main_thread

#: Least seconds between two status messages (the final "stopped" is never held back).
STATUS_EVERY = 1.0
#: Seconds the thread sleeps between looks at the store when nothing wakes it.
POLL = 1.0
#: First and longest pause (s) before trying an unreachable broker or store again.
RETRY_FIRST, RETRY_LONGEST = 0.5, 5.0
#: Seconds :meth:`Publisher.close` waits for the waiting units and the final status to go out.
CLOSE_PATIENCE = 10.0


class Publisher:
    """Publishes ``station``'s status and units on ``line`` to ``target``; ``open_store(url)``
    opens the thread's own connection to the store at ``store_url``."""

    def __init__(
        self,
        target: PublishTarget,
        store_url: str,
        line: str,
        station: str,
        open_store: Callable[[str], Any],
    ) -> None:
        self._target = target
        self._store_url = store_url
        self._open_store = open_store
        self._line = line
        self._station = station
        self._topics = StationTopics.of(target, line, station)
        self._wake = threading.Event()
        self._lock = threading.Lock()
        self._state: StationState | None = None
        self._told: StationState | None = None
        self._told_at = -STATUS_EVERY
        self._closing_at: float | None = None
        #: Units the broker acknowledged since the publisher started.
        self.sent = 0
        #: Units of the station still waiting after :meth:`close` (None: the store was away).
        self.left: int | None = None
        #: The last problem met (an unreachable broker or store), '' when none.
        self.problem = ""
        self._thread = threading.Thread(target=self._run, name=f"publish {station}", daemon=True)
        self._thread.start()

    @property
    def topics(self) -> StationTopics:
        return self._topics

    @property
    def target(self) -> PublishTarget:
        return self._target

    def changed(self, state: StationState) -> None:
        with self._lock:
            self._state = state
        self._wake.set()

    def close(self) -> None:
        with self._lock:
            self._closing_at = time.monotonic()
        self._wake.set()
        self._thread.join(CLOSE_PATIENCE + 2 * RETRY_LONGEST)

    def _out_of_time(self) -> bool:
        closing = self._closing_at
        return closing is not None and time.monotonic() - closing > CLOSE_PATIENCE

    def _run(self) -> None:
        leave_stops_to_the_main_thread()
        store: Any = None
        link: Link | None = None
        pause = RETRY_FIRST
        self._wake.wait()  # the first state (its will needs one) or close()
        try:
            while not self._out_of_time():
                try:
                    if store is None:
                        store = self._open_store(self._store_url)
                    if link is None or not link.alive:
                        if link is not None:
                            link.close()
                        link = self._connect()
                    closing = self._closing_at is not None  # read before the state:
                    self._tell_status(link)  # the final state comes before close()
                    sent, drained = send_waiting(store, link, self._topics, self._station)
                    self.sent += sent
                    pause = RETRY_FIRST
                    if closing and drained and self._tell_status(link) and link.alive:
                        break
                except (PublishError, StoreError, OSError, ValueError) as exc:
                    self.problem = str(exc)
                    self._wake.wait(pause)
                    self._wake.clear()
                    pause = min(2 * pause, RETRY_LONGEST)
                    continue
                self._rest(link)
        finally:
            self._finish(store, link)

    def _connect(self) -> Link:
        with self._lock:
            state = self._state
        will = None
        if state is not None:
            will = (self._topics.status, encode(lost_message(state, self._line)))
        link = Link(self._target, client_id(), will)
        link.open()
        self._told = None  # a new connection tells the status again
        return link

    def _tell_status(self, link: Link) -> bool:
        """Publish the newest state if it changed; True when the newest state has gone out."""
        with self._lock:
            state = self._state
        if state is None or state is self._told:
            return True
        final = state.state == STOPPED
        if not final and time.monotonic() - self._told_at < STATUS_EVERY:
            return False
        payload = encode(status_message(state, self._line))
        if link.send([(self._topics.status, payload, True)], timeout=5.0) == 1:
            self._told, self._told_at = state, time.monotonic()
            return True
        return False

    def _rest(self, link: Link) -> None:
        """Keep the connection alive until woken, or for :data:`POLL` seconds."""
        until = time.monotonic() + POLL
        while not self._wake.is_set() and link.alive and time.monotonic() < until:
            link.idle(0.1)
        self._wake.clear()

    def _finish(self, store: Any, link: Link | None) -> None:
        if link is not None:
            link.close()
        if store is None:
            return
        try:
            self.left = store.unpublished_count(self._station)
        except StoreError as exc:
            self.problem = str(exc)
        store.close()

    def farewell(self) -> str:
        """What the command prints after :meth:`close`: '' when every unit went out."""
        if self.left == 0:
            return ""
        count = "some units" if self.left is None else f"{self.left} units"
        why = f" ({self.problem})" if self.problem else ""
        return (
            f"{count} of station {self._station} wait to be published to "
            f"{self._target.shown}{why}: they go out the next time a station or `acquire "
            "publish` runs with --publish"
        )


def start_publisher(url: str, line: str, store_url: str, station: str) -> Publisher:
    """A started :class:`Publisher` of ``station``'s units in the store at ``store_url`` to the
    broker at ``url``; a bad URL, name or in-memory store raises InputError."""
    from acquire.errors import InputError
    from acquire.publish.target import parse_publish_url
    from acquire.store import open_store
    from acquire.store.url import parse_store_url

    target = parse_publish_url(url)
    location = parse_store_url(store_url)
    if location.engine == "sqlite" and location.path is None:
        raise InputError("--publish needs a store in a file or a database, not in memory")
    return Publisher(target, store_url, line, station, open_store)
