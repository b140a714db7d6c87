"""Repeating an operation on a session after a drop, a timeout or a garbled reply.

:func:`call` runs an action on a :class:`~drivers.session.Session`; when it fails in a way a
fresh connection may cure (:data:`TRANSIENT`), the session is reopened (its owner's
configuration restored through ``on_reopen``) and the action repeated, a bounded number of
times. An action that is not safe to repeat is not: the session is reopened so it stays usable
and the failure is raised. Messages name the resource and what was tried, each failure once
(:class:`~drivers.failure_text.Attempts`), with one piece of advice at the end.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Protocol, TypeVar

from drivers.errors import ConnectionLost, InstrumentError, MeterTimeout, ReplyError
from drivers.failure_text import ADVICE_OPEN, Attempts

T = TypeVar("T")


class Session(Protocol):
    """What :func:`call` needs of a :class:`drivers.session.Session`."""

    resource_name: str
    retries: int

    def reconnect(self, attempt: int = 1) -> None: ...


#: Failures after which reconnecting and repeating may help.
TRANSIENT = (ConnectionLost, MeterTimeout, ReplyError)

#: What an operation is called in messages: the text, or a function that gives it (for a
#: name costly to make and needed only when something fails, e.g. each point of a sweep).
Described = str | Callable[[], str]


def call(session: Session, what: Described, action: Callable[[], T], idempotent: bool = True) -> T:
    """Run ``action`` on ``session``; after a transient failure reconnect and repeat it (at most
    ``session.retries`` times), or, if it is not ``idempotent``, reconnect and raise.

    ``what`` names the operation in messages; a function giving the name is called only when
    a message needs it."""
    try:
        return action()
    except TRANSIENT as exc:
        last = exc
    attempts = Attempts(session.resource_name)
    attempts.failed(last)
    name = described(what)
    while True:
        if not idempotent:
            reopen(session, name, attempts)
            raise type(last)(
                f"{name} on {session.resource_name} failed ({attempts.last}); it was not "
                "repeated because repeating it is not safe; the connection was reopened"
            ) from last
        if len(attempts.tried) > session.retries:
            raise gave_up(session.resource_name, name, attempts, last) from last
        reopen(session, name, attempts)
        try:
            return action()
        except TRANSIENT as exc:
            attempts.failed(exc)
            last = exc


def described(what: Described) -> str:
    """The name of an operation given as text or as a function giving it."""
    return what if isinstance(what, str) else what()


def reopen(session: Session, what: str, attempts: Attempts) -> None:
    """Reconnect, waiting longer each time; raise :class:`ConnectionLost` if it never works."""
    for attempt in range(1, session.retries + 2):
        try:
            session.reconnect(attempt)
            return
        except InstrumentError as exc:
            attempts.reopen_failed(exc)
    raise ConnectionLost(
        f"lost {session.resource_name} during {what} ({attempts.told()}) and could not reopen "
        f"it ({attempts.reopening_told()}). {ADVICE_OPEN}"
    )


def gave_up(resource: str, what: str, attempts: Attempts, last: Exception) -> InstrumentError:
    """The error raised when every repetition failed."""
    tried = f"tried {len(attempts.tried)} times, reconnecting in between"
    if isinstance(last, ReplyError):
        return ReplyError(
            f"{what} on {resource}: every reply was malformed ({tried}): {attempts.told()}. "
            "If this repeats, the dialect's reading pair or commands may not match the meter"
        )
    return ConnectionLost(
        f"{what} on {resource} failed ({tried}): {attempts.told()}. "
        "Check the cable/network and that the meter is not busy, then try again"
    )
