"""The SQL that stores one production unit, prepared once per database kind.

A unit is one transaction: its row (with the packed copy of its readings,
:mod:`acquire.store.packed_readings`) and all its measurements, or nothing; a unit whose attempt id
is already stored is skipped (``ON CONFLICT (attempt_id) DO NOTHING``), so a repeated write stores
it once.

- PostgreSQL: one statement, sent once. A data-modifying common table expression inserts the
  unit and returns its id, and a second one inserts the measurements from ``unnest`` of arrays
  given as parameters (one array per column). The statement runs in autocommit, so the
  statement's own implicit transaction is the unit's transaction and its commit: one round trip
  to the server a unit.
- SQLite: the unit's INSERT (its id the cursor's ``lastrowid``; no RETURNING, which costs a
  result row a unit) and one ``executemany`` of its measurements, inside the store's ``BEGIN
  IMMEDIATE`` transaction; the SQL text is written once and handed straight to the driver
  (nothing compiled per unit).

Both are plain SQL given to the driver's own cursor on the connection of the store's transaction
(``Database.write``): SQLAlchemy adds nothing per unit but that transaction. The parameters are
prepared here with the columns' own SQLAlchemy bind processing, applied only to the columns that
have one (the times: timezone-aware to UTC, and on SQLite to SQLAlchemy's text format, a plain
UTC ``datetime`` through a shortcut that writes the same text), so the rows stored are the same
as an INSERT built with SQLAlchemy Core would store. On PostgreSQL the
statement is prepared on the server once per connection. A driver error is handed to
SQLAlchemy's own handling (so it is wrapped, and a lost connection invalidated, as for any
statement of the store).
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import UTC, datetime
from functools import cache
from hashlib import sha256
from json.encoder import encode_basestring
from operator import attrgetter
from typing import Any

from sqlalchemy import Connection

from acquire.store.columns import UtcDateTime
from acquire.store.schema import TABLES

#: The unit columns written (``id`` is given by the database).
UNIT_COLUMNS = tuple(c.name for c in TABLES["units"].columns if c.name != "id")
#: The measurement columns written, in the table's order (``unit_id`` first).
MEASUREMENT_COLUMNS = tuple(c.name for c in TABLES["measurements"].columns)

#: The unit columns that are not fields of the unit record (set by :func:`unit_head`, the
#: packed copy of the readings by :func:`acquire.store.unit_rows.measurement_rows`).
_NOT_FIELDS = ("serial_key", "lot_id", "saved_at", "readings_layout", "readings")
#: The unit record's fields in :data:`UNIT_COLUMNS` order, read in one call; the columns of
#: :data:`_NOT_FIELDS` read ``serial`` there and are overwritten.
_HEAD_FIELDS = attrgetter(*(n if n not in _NOT_FIELDS else "serial" for n in UNIT_COLUMNS))
#: Where each of :data:`_NOT_FIELDS` lies in :data:`UNIT_COLUMNS` (the last two: the packed copy).
_SERIAL_KEY, _LOT_ID, _SAVED_AT, LAYOUT_AT, READINGS_AT = (
    UNIT_COLUMNS.index(n) for n in _NOT_FIELDS
)


def serial_key(serial: str) -> str:
    """``identity_key(serial)`` written out for one string (the JSON of ``[serial]`` hashed),
    without ``json.dumps``'s per-call set-up: this runs for every unit stored."""
    return sha256(f"[{encode_basestring(serial)}]".encode()).hexdigest()


def unit_head(unit: Any, lot_id: int | None, saved_at: datetime) -> list[Any]:
    """A unit record's row as values in :data:`UNIT_COLUMNS` order (before bind processing):
    its fields, its serial's key, ``lot_id`` and ``saved_at``."""
    head = list(_HEAD_FIELDS(unit))
    head[_SERIAL_KEY] = serial_key(unit.serial)
    head[_LOT_ID] = lot_id
    head[_SAVED_AT] = saved_at
    head[LAYOUT_AT] = head[READINGS_AT] = None
    return head


_PG_ARRAY_TYPES = {
    "seq": "integer[]",
    "lot_id": "integer[]",
    "parameter": "text[]",
    "si_unit": "text[]",
    "verdict": "text[]",
    "value_special": "text[]",
    "tested_at": "timestamptz[]",
}


@cache
def _unit_processors(dialect: Any) -> tuple[Any, ...]:
    units = TABLES["units"]
    # The type adapted to the dialect: its processor chains our UtcDateTime's conversion with
    # the dialect's own (SQLite stores times as text in SQLAlchemy's format, microseconds
    # always written, so that times compare as text the same way whichever path stored them).
    processors = (
        units.c[name].type.dialect_impl(dialect).bind_processor(dialect) for name in UNIT_COLUMNS
    )
    if dialect.name != "sqlite":
        return tuple(processors)
    return tuple(
        None if p is None else sqlite_time(p) if isinstance(units.c[n].type, UtcDateTime) else p
        for n, p in zip(UNIT_COLUMNS, processors, strict=True)
    )


def sqlite_time(generic: Callable[[Any], Any]) -> Callable[[Any], Any]:
    """``generic`` (SQLAlchemy's processor of a UTC time column on SQLite) with a shortcut for
    the usual value, a plain ``datetime`` in UTC: the same text ("YYYY-MM-DD HH:MM:SS.ffffff",
    microseconds always written) from one C call instead of a conversion and a ``%`` format
    per time. Anything else (another zone, no zone, a subclass of datetime, None) goes to
    ``generic``, which converts it or refuses it as before."""

    def process(value: Any) -> Any:
        if type(value) is datetime and value.tzinfo is UTC:
            return value.isoformat(" ", "microseconds")[:-6]  # without its "+00:00"
        return generic(value)

    return process


@cache
def _processed(dialect: Any) -> tuple[tuple[int, Any], ...]:
    """(position, processor) of the unit columns that have a bind processor."""
    return tuple((k, p) for k, p in enumerate(_unit_processors(dialect)) if p is not None)


def unit_values(dialect: Any, row: dict[str, Any]) -> list[Any]:
    """``row`` (a unit's columns) as the driver's parameters, in :data:`UNIT_COLUMNS` order."""
    return process_head(dialect, [row[name] for name in UNIT_COLUMNS])


def process_head(dialect: Any, head: list[Any]) -> list[Any]:
    """``head`` (a unit's values in :data:`UNIT_COLUMNS` order) bind-processed in place."""
    for k, process in _processed(dialect):
        if head[k] is not None:
            head[k] = process(head[k])
    return head


@cache
def sqlite_sql() -> tuple[str, str]:
    """(unit INSERT, measurement INSERT) for SQLite, qmark style. The unit's id is the
    cursor's ``lastrowid`` when it changed a row (``rowcount`` 1); a skipped unit changes none."""
    unit = (
        f"INSERT INTO units ({', '.join(UNIT_COLUMNS)}) "
        f"VALUES ({', '.join('?' * len(UNIT_COLUMNS))}) "
        "ON CONFLICT (attempt_id) DO NOTHING"
    )
    measurement = (
        f"INSERT INTO measurements ({', '.join(MEASUREMENT_COLUMNS)}) "
        f"VALUES ({', '.join('?' * len(MEASUREMENT_COLUMNS))})"
    )
    return unit, measurement


@cache
def postgres_sql() -> str:
    """The one statement storing a unit and its measurements on PostgreSQL (pyformat style):
    unit columns as ``%(u_<column>)s``, measurement columns as arrays ``%(m_<column>)s``."""
    rest = MEASUREMENT_COLUMNS[1:]
    arrays = ", ".join(
        f"%(m_{name})s::{_PG_ARRAY_TYPES.get(name, 'double precision[]')}" for name in rest
    )
    return (
        "WITH new_unit AS ("
        f"INSERT INTO units ({', '.join(UNIT_COLUMNS)}) "
        f"VALUES ({', '.join(f'%(u_{name})s' for name in UNIT_COLUMNS)}) "
        "ON CONFLICT (attempt_id) DO NOTHING RETURNING id), "
        "new_measurements AS ("
        f"INSERT INTO measurements ({', '.join(MEASUREMENT_COLUMNS)}) "
        f"SELECT new_unit.id, {', '.join(f'm.{name}' for name in rest)} "
        f"FROM new_unit, unnest({arrays}) AS m({', '.join(rest)})) "
        "SELECT id FROM new_unit"
    )


def _driver_error(conn: Connection, exc: Exception, sql: str, params: Any, cursor: Any) -> None:
    """Raise ``exc`` (from the driver) as SQLAlchemy would for a statement it ran itself."""
    conn._handle_dbapi_exception(exc, sql, params, cursor, None)  # raises


def insert_sqlite(conn: Connection, head: list[Any], rows: list[tuple]) -> int | None:
    """Store a unit (``head`` from :func:`unit_values`) and its measurement ``rows`` (tuples of
    the measurement columns after ``unit_id``) in the open transaction; its id, or None when its
    attempt id was already stored."""
    unit_sql, measurement_sql = sqlite_sql()
    raw: Any = conn.connection.driver_connection
    cursor = raw.cursor()
    sql, params = unit_sql, head
    try:
        cursor.execute(unit_sql, head)
        if cursor.rowcount != 1:
            return None
        unit_id = cursor.lastrowid
        if rows:
            sql, params = measurement_sql, [(unit_id, *r) for r in rows]
            cursor.executemany(measurement_sql, params)
    except conn.dialect.loaded_dbapi.Error as exc:
        _driver_error(conn, exc, sql, params, cursor)
    finally:
        cursor.close()
    return unit_id


def postgres_parameters(head: list[Any], rows: list[tuple]) -> dict[str, Any]:
    """The parameters of :func:`postgres_sql` for a unit ``head`` and its measurement ``rows``
    (as :func:`insert_sqlite` takes them): a value per unit column, a list per measurement
    column."""
    params: dict[str, Any] = dict(zip(_UNIT_KEYS, head, strict=True))
    columns = list(zip(*rows, strict=True)) if rows else [()] * len(_MEASUREMENT_KEYS)
    for key, values in zip(_MEASUREMENT_KEYS, columns, strict=True):
        params[key] = list(values)
    return params


_UNIT_KEYS = tuple(f"u_{name}" for name in UNIT_COLUMNS)
_MEASUREMENT_KEYS = tuple(f"m_{name}" for name in MEASUREMENT_COLUMNS[1:])


def insert_postgres(conn: Connection, head: list[Any], rows: list[tuple]) -> int | None:
    """Store a unit and its measurements with one statement in autocommit (see the module
    docstring); its id, or None when its attempt id was already stored.

    ``conn`` must be inside :meth:`Database.write`, which has begun no server transaction yet
    (psycopg sends BEGIN with a connection's first statement): the driver connection is put in
    autocommit for this one statement and given back as it was.
    """
    params = postgres_parameters(head, rows)
    raw: Any = conn.connection.driver_connection
    was = raw.autocommit
    raw.autocommit = True
    sql = postgres_sql()
    try:
        with raw.cursor() as cursor:
            try:
                found = cursor.execute(sql, params, prepare=True).fetchone()
            except conn.dialect.loaded_dbapi.Error as exc:
                _driver_error(conn, exc, sql, params, cursor)
        return None if found is None else found[0]
    finally:
        if not raw.closed and raw.info.transaction_status == raw.info.transaction_status.IDLE:
            raw.autocommit = was
