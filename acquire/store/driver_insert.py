"""INSERT statements built with SQLAlchemy Core, compiled once per database, run on the driver.

Saving a unit is two small INSERTs and a commit. Measured against a bare ``sqlite3`` doing the
same (``benchmarks/bench_store.py``), SQLAlchemy's per-execution work (cache look-up, parameter
processing row by row, result set-up) cost more than the rows themselves. :class:`DriverInsert`
(one row, optionally returning a value) and :class:`DriverRowsInsert` (many rows in one
multi-row VALUES statement) keep one code path for both engines: the SQL is what SQLAlchemy
compiles for the connection's dialect, values pass through the columns' own type processors,
and the SQL and parameters go straight to the driver's cursor inside the store's transaction.
On PostgreSQL the SQL is compiled with ``$n`` parameters and run on psycopg's ``RawCursor``,
which passes them to the server without parsing the SQL in Python (that parsing was half of a
station's CPU time per unit). Driver errors come back as SQLAlchemy's exception types, and a
lost connection is invalidated as SQLAlchemy would do it, so retries and messages are unchanged.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from itertools import chain
from typing import Any

from sqlalchemy import Connection, Table, bindparam, insert
from sqlalchemy.engine import Dialect
from sqlalchemy.exc import DBAPIError
from sqlalchemy.sql.dml import Insert

Processor = Callable[[Any], Any] | None


class _Compiled:
    def __init__(self, statement: Insert, table: Table, columns: Sequence[str], dialect: Dialect):
        compiled = statement.compile(dialect=_positional(dialect), column_keys=list(columns))
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


class DriverRowsInsert:
    """A plain INSERT of many rows into ``table``, up to ``per_statement`` rows in one statement
    (one multi-row ``VALUES`` list: one call into the driver, one statement for the server).
    Rows are tuples of the values of ``columns``, in that order; with ``plain`` the caller
    promises every value is already a plain ``str``, ``int``, ``float`` or None, and the types'
    processors (which would only convert to those) are skipped. ``statement(dialect_name)``, if
    given, makes the INSERT to start from (one that skips duplicates and returns values, say).
    Keep ``per_statement`` times the number of columns under 999 parameters, the limit of older
    SQLite builds."""

    def __init__(
        self,
        table: Table,
        columns: Sequence[str],
        per_statement: int = 80,
        plain: bool = False,
        statement: Callable[[str], Insert] | None = None,
    ) -> None:
        self._table = table
        self._statement = statement
        self._columns = tuple(columns)
        self._per_statement = per_statement
        self._plain = plain
        self._compiled: dict[tuple[str, int], tuple[str, list[int] | None, list[Processor]]] = {}

    def _for(self, dialect: Dialect, rows: int) -> tuple[str, list[int] | None, list[Processor]]:
        key = (dialect.name, rows)
        found = self._compiled.get(key)
        if found is None:
            width = len(self._columns)
            cell = {
                f"{c}__{i}": i * width + k for i in range(rows) for k, c in enumerate(self._columns)
            }
            values = [
                {c: bindparam(f"{c}__{i}", type_=self._table.c[c].type) for c in self._columns}
                for i in range(rows)
            ]
            base = insert(self._table) if self._statement is None else self._statement(dialect.name)
            compiled = base.values(values).compile(dialect=_positional(dialect))
            order = [cell[name] for name in compiled.positiontup]
            types = [self._table.c[c].type for c in self._columns]
            procs = [
                None if self._plain else types[n % width].bind_processor(dialect) for n in order
            ]
            direct = order == list(range(len(order))) and not any(procs)
            found = (compiled.string, None if direct else order, procs)
            self._compiled[key] = found
        return found

    def many(self, conn: Connection, rows: Sequence[tuple]) -> list[tuple]:
        """Insert every row of ``rows``; return the rows the statement returned (if any)."""
        step = self._per_statement
        returned: list[tuple] = []
        for start in range(0, len(rows), step):
            part = rows[start : start + step]
            sql, order, procs = self._for(conn.dialect, len(part))
            cells = tuple(chain.from_iterable(part))
            if order is not None:
                cells = tuple(
                    cells[n] if p is None else p(cells[n])
                    for n, p in zip(order, procs, strict=True)
                )

            def run(cursor: Any, q: str = sql, v: tuple = cells) -> list[tuple]:
                cursor.execute(q, v)
                return [tuple(r) for r in cursor.fetchall()] if cursor.description else []

            returned += _on_driver(conn, sql, cells, run)
        return returned


def _positional(dialect: Dialect) -> Dialect:
    """``dialect``, or for psycopg the same dialect with ``$n`` parameters (for its RawCursor,
    which sends them to the server as they are instead of parsing the SQL text in Python)."""
    if dialect.name != "postgresql":
        return dialect
    return type(dialect)(paramstyle="numeric_dollar")


def _cursor(fairy: Any, dialect: Dialect) -> Any:
    if dialect.name == "postgresql":
        import psycopg

        return psycopg.RawCursor(fairy.dbapi_connection)
    return fairy.cursor()


def _on_driver(conn: Connection, sql: str, params: Any, run: Callable[[Any], Any]) -> Any:
    dialect = conn.dialect
    fairy = conn.connection
    cursor = _cursor(fairy, dialect)
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
