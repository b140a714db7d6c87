"""The one-line message of a store operation that failed, for both ways of reaching a store.

:meth:`acquire.store.engine.Database.error` (SQLAlchemy) and the plain-SQLite sweep path
(:mod:`acquire.store.sqlite_connection`) name the kind of failure in the same words, so the user
reads the same line whichever path the command took.
"""

from __future__ import annotations

from acquire.errors import StoreError

#: Seconds a writer waits for another process to release an SQLite store before giving up.
BUSY_TIMEOUT_S = 30.0

#: What to check, by kind of failure (the driver's exception class, as PEP 249 names them).
_HINTS = {
    "value": "a value given to the store cannot be stored as it is; change or leave it out",
    "integrity": "the record refers to something that is not in the store, or clashes with one",
    "data": "a value cannot be held by this database (PostgreSQL text cannot hold NUL)",
    "locked": (
        f"another program kept the store busy for more than {BUSY_TIMEOUT_S:.0f} s; "
        "try again, or use PostgreSQL for several stations"
    ),
    "operational": "check that the database is reachable, running and writable by this user",
    "other": "check the store URL and that the database is a results store of this program",
}


def first_line(exc: BaseException) -> str:
    """The first line of an exception's text (its repr when it has none)."""
    text = str(exc).strip()
    return text.splitlines()[0] if text else repr(exc)


def store_failure(action: str, where: str, detail: str, kind: str) -> StoreError:
    """A StoreError for a failed ``action`` on store ``where`` that says what to check.

    ``kind`` is ``value``, ``integrity``, ``data``, ``operational`` (``locked`` when the detail
    says the database was locked) or anything else."""
    if kind == "operational" and "locked" in detail:
        kind = "locked"
    hint = _HINTS.get(kind, _HINTS["other"])
    return StoreError(f"{action} failed in store {where}: {detail} ({hint})")
