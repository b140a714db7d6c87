"""INSERT statements built with SQLAlchemy Core, compiled once per database, run on the driver.

Saving a unit is two small INSERTs and a commit. Measured against a bare ``sqlite3`` doing the
same (``benchmarks/bench_store.py``), SQLAlchemy's per-execution work (cache look-up, parameter
processing row by row, result set-up) cost more than the rows themselves. A
:class:`DriverInsert` keeps one code path for both engines (the SQL is what SQLAlchemy
compiles for the connection's dialect, and values pass through the columns' own type
processors) but hands SQL and parameters straight to the driver's cursor, inside the store's
transaction. Driver errors come back as SQLAlchemy's exception types, and a lost connection is
invalidated exactly as SQLAlchemy would do it, so retries and error messages are unchanged.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any

from sqlalchemy import Connection, Table
from sqlalchemy.engine import Dialect
from sqlalchemy.exc import DBAPIError
from sqlalchemy.sql.dml import Insert

Processor = Callable[[Any], Any] | None


class _Compiled:
    def __init__(self, statement: Insert, table: Table, columns: Sequence[str], dialect: Dialect):
        compiled = statement.compile(dialect=dialect, column_keys=list(columns))
        self.sql = compiled.string
        self.positional = bool(compiled.positional)
        self.names = list(compiled.positiontup) if self.positional else list(columns)
        self.processors: list[Processor] = [
            table.c[name].type.bind_processor(dialect) for name in self.names
        ]

    def parameters(self, row: dict[str, Any]) -> tuple | dict:
        values = [
            row[n] if p is None else p(row[n])
            for n, p in zip(self.names, self.processors, strict=True)
        ]
        return tuple(values) if self.positional else dict(zip(self.names, values, strict=True))


class DriverInsert:
    """``statement`` (an INSERT into ``table``) for rows holding exactly ``columns``."""

    def __init__(self, statement: Insert, table: Table, columns: Sequence[str]) -> None:
        self._statement = statement
        self._table = table
        self._columns = tuple(columns)
        self._by_dialect: dict[str, _Compiled] = {}

    def _compiled(self, conn: Connection) -> _Compiled:
        name = conn.dialect.name
        found = self._by_dialect.get(name)
        if found is None:
            found = _Compiled(self._statement, self._table, self._columns, conn.dialect)
            self._by_dialect[name] = found
        return found

    def returning_one(self, conn: Connection, row: dict[str, Any]) -> Any:
        """Insert one row; the first value of the first returned row, or None if none came."""
        c = self._compiled(conn)
        params = c.parameters(row)

        def run(cursor: Any) -> Any:
            cursor.execute(c.sql, params)
            got = cursor.fetchone()
            return None if got is None else got[0]

        return _on_driver(conn, c.sql, params, run)

    def many(self, conn: Connection, rows: Sequence[dict[str, Any]]) -> None:
        """Insert every row of ``rows``."""
        c = self._compiled(conn)
        params = [c.parameters(r) for r in rows]
        _on_driver(conn, c.sql, params, lambda cursor: cursor.executemany(c.sql, params))


def _on_driver(conn: Connection, sql: str, params: Any, run: Callable[[Any], Any]) -> Any:
    dialect = conn.dialect
    fairy = conn.connection
    cursor = fairy.cursor()
    try:
        return run(cursor)
    except dialect.loaded_dbapi.Error as exc:
        gone = dialect.is_disconnect(exc, fairy.dbapi_connection, cursor)
        if gone:
            conn.invalidate(exc)
        raise DBAPIError.instance(
            sql,
            params,
            exc,
            dialect.loaded_dbapi.Error,
            connection_invalidated=gone,
            dialect=dialect,
        ) from exc
    finally:
        cursor.close()
