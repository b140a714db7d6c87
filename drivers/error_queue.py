"""The meter's error queue: read, judged, and read first whenever something went wrong.

A meter that refuses a command says why on its SCPI error queue (SCPI-99 volume 2, chapter 21)
and often answers the next query oddly or not at all. :class:`ErrorQueue` keeps that reason:

- after a reply that could not be understood, it reads the queue on the same connection before
  anything else is sent, and a meter-reported error ends the operation with the meter's own
  words instead of being retried as a garbled reply;
- after a reconnect, it reads the queue before the dialect's ``clear_status`` (``*CLS``) can
  erase it, so on a meter with one queue for all connections the reason survives the drop;
- when the session gives up, :meth:`ErrorQueue.reason` names what the meter reported.
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from typing import TypeVar

from drivers import scpi
from drivers.dialect import Dialect
from drivers.errors import InstrumentError, ReplyError, SettingRefused
from drivers.failure_text import first_sentence
from drivers.retry import Described, described
from drivers.scpi import ErrorEntry
from drivers.session import Session

T = TypeVar("T")
log = logging.getLogger(__name__)


class ErrorQueue:
    """The error queue of the meter behind ``session``, asked with ``dialect``'s commands."""

    def __init__(self, session: Session, dialect: Dialect) -> None:
        self._session = session
        self._dialect = dialect
        self.found: list[ErrorEntry] = []

    def ask(self) -> str:
        """One error-queue reply, as sent."""
        return self._session.query(self._dialect.operations["next_error"].format())

    def drain(self) -> list[ErrorEntry]:
        """Read and empty the queue (oldest first)."""
        return scpi.drain_errors(self.ask, self._dialect.warning_codes)

    def check(self, context: str, recovered: bool = False) -> None:
        """Drain the queue; warn for warnings and raise :class:`SettingRefused` naming every
        error. With ``recovered``, what a reconnect read during this check counts too (on a
        meter with one queue for all connections, it is the rest of this queue)."""
        entries = self.drain()
        if recovered:
            entries, self.found = self.found + entries, []
        scpi.raise_for_errors(entries, f"{self._session.resource_name}: {context}")

    def before_clear(self, reopened: bool) -> None:
        """Read the queue before ``clear_status`` empties it.

        On a first open the entries are older than this session and only logged; after a
        reconnect they are the meter's reason for the failure and are kept in :attr:`found`.
        A queue that never reports 0 is left for ``clear_status`` when the dialect has one.
        """
        entries: list[ErrorEntry] = []
        for _ in range(scpi.MAX_QUEUE):
            entry = scpi.parse_error(self.ask(), self._dialect.warning_codes)
            if entry.code == 0:
                break
            entries.append(entry)
        else:
            if not self._dialect.has("clear_status"):
                raise ReplyError(
                    f"{self._session.resource_name}: the error queue still had entries after "
                    f"{scpi.MAX_QUEUE} reads ({entries[-1]}); clear it at the meter and try again"
                )
        if not entries:
            return
        listed = "; ".join(map(str, entries))
        if reopened:
            log.warning("%s: after reconnecting, the meter reported %s", self.resource, listed)
            self.found.extend(entries)
        else:
            log.info("%s: discarded errors queued before this session: %s", self.resource, listed)

    def explained(self, what: Described, action: Callable[[], T]) -> Callable[[], T]:
        """``action``, but a reply it cannot understand is followed by reading the queue on the
        same connection; if the meter reported an error, that ends the operation (``what``
        names it: text, or a function giving it, called only then)."""

        def run() -> T:
            try:
                return action()
            except ReplyError as exc:
                if not self._session.suspect:
                    self._read_after(exc)
                reason = self.reason(what, exc)
                if reason is not None:
                    raise reason from exc
                raise

        return run

    def reason(self, what: Described, failure: Exception) -> SettingRefused | None:
        """The meter's own reason for ``failure`` if a recovery read one, else None."""
        listed = self._errors()
        if listed is None:
            return None
        then = first_sentence(str(failure)).split("; ")[0]
        name = described(what)
        return SettingRefused(
            f"{name} on {self.resource}: the meter reported {listed} (and then {then}). Check "
            "the values sent against the meter's limits and the dialect's commands for them"
        )

    def with_reason(self, failure: InstrumentError) -> InstrumentError | None:
        """``failure`` (the session gave up) told with what the meter reported on reconnects,
        or None if it reported nothing."""
        listed = self._errors()
        if listed is None:
            return None
        return type(failure)(
            f"{first_sentence(str(failure))}; the meter reported {listed}. Check the values sent "
            "against the meter's limits and the dialect's commands for them"
        )

    def _errors(self) -> str | None:
        errors = [e for e in self.found if e.severity == "error"]
        return "; ".join(map(str, errors)) if errors else None

    @property
    def resource(self) -> str:
        return self._session.resource_name

    def _read_after(self, failure: Exception) -> None:
        try:
            entries = self.drain()
        except InstrumentError as exc:
            log.info("%s: could not read the error queue after %s: %s", self.resource, failure, exc)
            return
        self.found.extend(entries)

    # -- private -------------------------------------------------------------------------------

    #: The session the queue is read through (shared with the meter).
    _session: Session
    #: The dialect naming the error query, clear_status and the meter's warning codes.
    _dialect: Dialect
