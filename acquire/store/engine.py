"""The connection to the database behind a store: engine set-up, transactions and errors.

SQLite is opened in WAL mode (readers never block the writer, a crash never leaves a torn
record) with ``PRAGMA synchronous=FULL``: every commit syncs the write-ahead log to disk, so a
unit or sweep batch the store has reported as saved survives a power cut as well as a crashed
process. (``NORMAL`` would also survive a crashed process but can lose the last commits on power
loss; on this project's machines FULL costs about 0.1 ms per commit.) Write transactions start
with ``BEGIN IMMEDIATE`` so that several processes sharing one file queue for the write lock
(for up to :data:`BUSY_TIMEOUT_S`) instead of failing half-way through a transaction; foreign
keys are enforced.

PostgreSQL is reached through psycopg 3 at the server's default isolation (READ COMMITTED);
every record is written in one transaction. An optional schema is put on the ``search_path``
of every connection.

Only idempotent work (a unit with its attempt id, get-or-create of meters, fixtures, plans and
lots, and every read) is retried after a lost connection; other writes first check the
connection inside their transaction, so a connection that went stale in the pool is replaced
before anything is sent, and a failure after that is reported, never retried blindly.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable
from functools import cache
from typing import Any, TypeVar

import numpy as np
from sqlalchemy import Connection, Engine, Table, create_engine, event
from sqlalchemy.exc import (
    DataError,
    DBAPIError,
    IntegrityError,
    OperationalError,
    SQLAlchemyError,
    StatementError,
)
from sqlalchemy.pool import StaticPool

from acquire.errors import StoreError
from acquire.store.failure import BUSY_TIMEOUT_S as BUSY_TIMEOUT_S
from acquire.store.failure import store_failure
from acquire.store.plain_values import to_json as to_json
from acquire.store.sqlite_connection import MIN_SQLITE as MIN_SQLITE
from acquire.store.sqlite_connection import apply_settings
from acquire.store.url import StoreLocation

#: Seconds to wait for a PostgreSQL server to answer a new connection.
CONNECT_TIMEOUT_S = 10

T = TypeVar("T")


def make_engine(location: StoreLocation) -> Engine:
    """Create the SQLAlchemy engine for ``location`` with this module's connection settings."""
    if location.engine == "sqlite":
        import sqlite3

        if sqlite3.sqlite_version_info < MIN_SQLITE:
            raise StoreError(
                f"this Python's SQLite is {sqlite3.sqlite_version}; the store needs "
                f"{'.'.join(map(str, MIN_SQLITE))} or later (RETURNING, DROP COLUMN): use a newer "
                "Python build, or a PostgreSQL store"
            )
        args: dict[str, Any] = {"check_same_thread": False, "timeout": BUSY_TIMEOUT_S}
        extra: dict[str, Any] = {"poolclass": StaticPool} if location.path is None else {}
        engine = create_engine(location.url, connect_args=args, json_serializer=to_json, **extra)
        event.listen(engine, "connect", _sqlite_connect)
        return engine
    args = {}
    if "connect_timeout" not in location.url.query:
        args["connect_timeout"] = CONNECT_TIMEOUT_S
    if location.schema is not None:
        args["options"] = f"-csearch_path={location.schema}"
    return create_engine(location.url, connect_args=args, json_serializer=to_json)


def _sqlite_connect(dbapi_connection: Any, _record: Any) -> None:
    dbapi_connection.isolation_level = None
    apply_settings(dbapi_connection)


def insert_ignoring_duplicates(conn: Connection, table: Table, index_elements: list[str]):
    """An INSERT into ``table`` that silently skips rows clashing on ``index_elements``."""
    return insert_ignoring(conn.dialect.name, table, tuple(index_elements))


@cache
def insert_ignoring(dialect: str, table: Table, index_elements: tuple[str, ...]):
    if dialect == "postgresql":
        from sqlalchemy.dialects.postgresql import insert as postgresql_insert

        return postgresql_insert(table).on_conflict_do_nothing(index_elements=list(index_elements))
    from sqlalchemy.dialects.sqlite import insert as sqlite_insert

    return sqlite_insert(table).on_conflict_do_nothing(index_elements=list(index_elements))


def finite_or_none(value: float | None) -> float | None:
    """A float for the database: NaN (an invalid reading) is stored as NULL on both engines."""
    if value is None:
        return None
    value = float(value)
    return None if math.isnan(value) else value


def float_column(values: np.ndarray) -> list[float | None]:
    """A 1-D float array as a list for the database, NaN entries as None (stored as NULL)."""
    values = np.asarray(values, dtype=float)
    out: list[float | None] = values.tolist()
    if np.isnan(values).any():
        out = [None if v is None or math.isnan(v) else v for v in out]
    return out


class _StaleConnection(Exception):
    """The pooled connection was dead before anything was sent: safe to try again."""


class Database:
    """An engine plus the rules for running one transaction against it.

    Each thread keeps one connection open for the life of the store (opening and returning a
    pooled connection for every unit would cost more than writing the unit); the connection of a
    thread that has ended is closed when another thread next opens one, so a process that runs
    many sweeps (each writing from a thread of its own) does not run out of pooled connections.
    """

    def __init__(self, location: StoreLocation) -> None:
        self.location = location
        self.engine = make_engine(location)
        self.is_postgres = location.engine == "postgresql"
        self._local = threading.local()
        self._lock = threading.Lock()
        self._connections: list[tuple[threading.Thread, Connection]] = []
        self._closed = False
        if not self.is_postgres:
            event.listen(self.engine, "begin", self._sqlite_begin)

    def read(self, action: str, work: Callable[[Connection], T]) -> T:
        """Run ``work(conn)`` in a read transaction (retried once after a lost connection)."""
        return self._run(action, work, write=False, idempotent=True)

    def write(self, action: str, work: Callable[[Connection], T], idempotent: bool = False) -> T:
        """Run ``work(conn)`` in one write transaction: all of it is stored, or none of it."""
        return self._run(action, work, write=True, idempotent=idempotent)

    def _run(
        self, action: str, work: Callable[[Connection], T], write: bool, idempotent: bool
    ) -> T:
        for attempt in range(2):
            try:
                return self._once(work, write, check=self.is_postgres and not idempotent)
            except _StaleConnection as exc:
                if attempt == 1:
                    raise self.error(action, exc.__cause__) from exc.__cause__
            except DBAPIError as exc:
                if not (idempotent and exc.connection_invalidated and attempt == 0):
                    raise self.error(action, exc) from exc
            except SQLAlchemyError as exc:
                raise self.error(action, exc) from exc
        raise AssertionError("unreachable")  # pragma: no cover

    def _connection(self) -> Connection:
        if self._closed:
            raise StoreError(f"the store {self.location.shown} is closed: open it again")
        conn = getattr(self._local, "conn", None)
        if conn is not None and not conn.closed and not conn.invalidated:
            return conn
        if conn is not None:
            conn.close()
        with self._lock:
            kept = []
            for thread, old in self._connections:
                if not thread.is_alive():
                    old.close()
                elif not old.closed:
                    kept.append((thread, old))
            self._connections = kept
        conn = self.engine.connect()
        with self._lock:
            self._connections.append((threading.current_thread(), conn))
        self._local.conn = conn
        return conn

    def _sqlite_begin(self, conn: Connection) -> None:
        immediate = getattr(self._local, "write", False)
        raw = conn.connection.driver_connection
        if raw is None:
            raise StoreError("the SQLite connection was closed under the store; open it again")
        try:
            raw.execute("BEGIN IMMEDIATE" if immediate else "BEGIN")
        except conn.dialect.loaded_dbapi.Error as exc:  # locked: SQLAlchemy's own wrapping
            conn._handle_dbapi_exception(exc, None, None, None, None)  # raises it wrapped
            raise

    def _once(self, work: Callable[[Connection], T], write: bool, check: bool) -> T:
        conn = self._connection()
        self._local.write = write
        with conn.begin():
            if check:
                try:
                    conn.exec_driver_sql("SELECT 1")
                except DBAPIError as exc:
                    if exc.connection_invalidated:
                        raise _StaleConnection() from exc
                    raise
            return work(conn)

    def write_on_driver(self, action: str, work: Callable[[Connection], T]) -> T:
        """:meth:`write` of idempotent ``work`` that itself runs only on the driver's connection
        (a production unit): on SQLite the same ``BEGIN IMMEDIATE`` ... ``COMMIT`` transaction,
        errors and retry, begun and committed on the driver's connection itself instead of
        through SQLAlchemy's transaction object (whose bookkeeping costs more than the unit's
        own statements). On PostgreSQL, or on a thread already inside a transaction: :meth:`write`.
        """
        if self.is_postgres:
            return self.write(action, work, idempotent=True)
        for attempt in range(2):
            try:
                return self._once_on_driver(work)
            except DBAPIError as exc:
                if not (exc.connection_invalidated and attempt == 0):
                    raise self.error(action, exc) from exc
            except SQLAlchemyError as exc:
                raise self.error(action, exc) from exc
        raise AssertionError("unreachable")  # pragma: no cover

    def _once_on_driver(self, work: Callable[[Connection], T]) -> T:
        conn = self._connection()
        if conn.in_transaction():
            return self._once(work, write=True, check=False)
        raw = conn.connection.driver_connection
        if raw is None:
            raise StoreError("the SQLite connection was closed under the store; open it again")
        try:
            raw.execute("BEGIN IMMEDIATE")
            result = work(conn)
            raw.commit()
        except BaseException as exc:
            if raw.in_transaction:
                raw.rollback()
            if isinstance(exc, conn.dialect.loaded_dbapi.Error):  # from BEGIN or COMMIT
                conn._handle_dbapi_exception(exc, None, None, None, None)  # raises it wrapped
            raise
        return result

    def error(self, action: str, exc: BaseException | None) -> StoreError:
        """A StoreError for a failed ``action`` that says what to check."""
        detail = getattr(exc, "orig", None) or exc
        detail = str(detail).strip().splitlines()[0] if str(detail).strip() else repr(exc)
        if isinstance(exc, StatementError) and not isinstance(exc, DBAPIError):
            kind = "value"
        elif isinstance(exc, IntegrityError):
            kind = "integrity"
        elif isinstance(exc, DataError):
            kind = "data"
        elif isinstance(exc, OperationalError):
            kind = "operational"
        else:
            kind = "other"
        return store_failure(action, self.location.shown, detail, kind)

    def dispose(self) -> None:
        """Close every connection of every thread, and the pool."""
        self._closed = True
        with self._lock:
            for _, conn in self._connections:
                conn.close()
            self._connections = []
        self.engine.dispose()
