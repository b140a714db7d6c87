"""An SQLite store file reached with the standard library's :mod:`sqlite3` alone.

:func:`apply_settings` is what every connection to an SQLite store runs first, on the usual path
(:func:`acquire.store.engine.make_engine`) and here alike: a busy timeout of
:data:`~acquire.store.failure.BUSY_TIMEOUT_S`, WAL, ``synchronous=FULL`` and foreign keys.

:class:`PlainDatabase` runs transactions as :class:`acquire.store.engine.Database` does on
SQLite: one connection per thread (a thread that has ended has its connection closed when
another opens one), ``BEGIN IMMEDIATE`` for a write and ``BEGIN`` for a read, all of the work or
none of it, and a failure reported as the same one-line :class:`~acquire.errors.StoreError`
(:func:`acquire.store.failure.store_failure`); text the driver cannot encode (a name holding
bytes that are not UTF-8) raises its ``UnicodeEncodeError`` unchanged, as there. It never
creates a file.
"""

from __future__ import annotations

import sqlite3
import threading
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any, TypeVar

from acquire.errors import StoreError
from acquire.store.failure import BUSY_TIMEOUT_S, first_line, store_failure

#: Oldest SQLite library the store works with.
MIN_SQLITE = (3, 35, 0)

T = TypeVar("T")


def apply_settings(conn: Any) -> None:
    """The settings every connection to an SQLite store starts with (module doc)."""
    cursor = conn.cursor()
    cursor.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
    _write_ahead(cursor)
    cursor.execute("PRAGMA synchronous = FULL")
    cursor.execute("PRAGMA foreign_keys = ON")
    cursor.close()


def _write_ahead(cursor: Any) -> None:
    """Put the file in WAL mode (a no-op when it is already).

    Changing the journal mode needs the file to itself, and SQLite answers "database is locked"
    at once rather than through the busy timeout while another connection holds it (two
    programs opening a new store at the same moment): that is tried again until the busy
    timeout has passed, as any other wait for the file is.
    """
    deadline = time.monotonic() + BUSY_TIMEOUT_S
    while True:
        try:
            (mode,) = cursor.execute("PRAGMA journal_mode").fetchone()
            if str(mode).lower() != "wal":
                cursor.execute("PRAGMA journal_mode = WAL")
            return
        except sqlite3.OperationalError as exc:
            if "locked" not in str(exc) or time.monotonic() > deadline:
                raise
            time.sleep(0.02)


def failure_kind(exc: BaseException) -> str:
    """The kind of a failure, as :func:`~acquire.store.failure.store_failure` names it."""
    if isinstance(exc, sqlite3.IntegrityError):
        return "integrity"
    if isinstance(exc, sqlite3.DataError):
        return "data"
    if isinstance(exc, sqlite3.OperationalError):
        return "operational"
    if isinstance(exc, (ValueError, TypeError)):
        return "value"
    return "other"


def connect(path: Path) -> sqlite3.Connection:
    """A connection to the existing SQLite file ``path`` (never created), with the store's
    settings, in autocommit mode: transactions are begun and ended explicitly."""
    conn = sqlite3.connect(
        f"{path.resolve().as_uri()}?mode=rw",
        uri=True,
        timeout=BUSY_TIMEOUT_S,
        isolation_level=None,
        check_same_thread=False,
    )
    try:
        apply_settings(conn)
    except BaseException:
        conn.close()
        raise
    return conn


class PlainDatabase:
    """Transactions on an existing SQLite store file (module doc); ``shown`` names it in
    messages."""

    def __init__(self, path: Path, shown: str, first: sqlite3.Connection | None = None) -> None:
        self.path = path
        self.shown = shown
        self._local = threading.local()
        self._lock = threading.Lock()
        self._connections: list[tuple[threading.Thread, sqlite3.Connection]] = []
        self._closed = False
        if first is not None:
            self._keep(first)

    def read(self, action: str, work: Callable[[sqlite3.Connection], T]) -> T:
        """Run ``work(conn)`` in a read transaction."""
        return self._run(action, work, "BEGIN")

    def write(self, action: str, work: Callable[[sqlite3.Connection], T]) -> T:
        """Run ``work(conn)`` in one write transaction: all of it is stored, or none of it."""
        return self._run(action, work, "BEGIN IMMEDIATE")

    def _run(self, action: str, work: Callable[[sqlite3.Connection], T], begin: str) -> T:
        conn = self._connection(action)
        try:
            conn.execute(begin)
            try:
                result = work(conn)
                conn.execute("COMMIT")
            except BaseException:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                raise
        except UnicodeEncodeError:
            raise  # as on the usual path: the command line names the option holding the bytes
        except (sqlite3.Error, ValueError, TypeError) as exc:
            raise self.error(action, exc) from exc
        return result

    def error(self, action: str, exc: BaseException) -> StoreError:
        """A StoreError for a failed ``action`` that says what to check."""
        return store_failure(action, self.shown, first_line(exc), failure_kind(exc))

    def _connection(self, action: str) -> sqlite3.Connection:
        if self._closed:
            raise StoreError(f"the store {self.shown} is closed: open it again")
        conn = getattr(self._local, "conn", None)
        if conn is not None:
            return conn
        with self._lock:
            kept = []
            for thread, old in self._connections:
                if thread.is_alive():
                    kept.append((thread, old))
                else:
                    old.close()
            self._connections = kept
        try:
            conn = connect(self.path)
        except sqlite3.Error as exc:
            raise self.error(action, exc) from exc
        self._keep(conn)
        return conn

    def _keep(self, conn: sqlite3.Connection) -> None:
        with self._lock:
            self._connections.append((threading.current_thread(), conn))
        self._local.conn = conn

    def close(self) -> None:
        """Close every connection of every thread."""
        self._closed = True
        with self._lock:
            for _, conn in self._connections:
                conn.close()
            self._connections = []
