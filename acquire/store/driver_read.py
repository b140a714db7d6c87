"""A column of floats read straight from the database driver into a numpy array.

For large reads SQLAlchemy's result rows cost more than the query: the statement is built with
SQLAlchemy Core as usual, compiled once, and handed to the driver's own cursor on the same
connection (so inside the same transaction). SQLite rows are taken with one ``fetchall``;
PostgreSQL sends the column with ``COPY ... TO STDOUT (FORMAT BINARY)``, whose rows numpy reads
in place (PostgreSQL documentation, "COPY", section "Binary Format": a 19-byte header, then per
row a 16-bit field count, a 32-bit length and the value, a 64-bit IEEE float in network order
for ``double precision``; a 16-bit -1 ends the data).
"""

from __future__ import annotations

from itertools import chain
from typing import Any

import numpy as np
from sqlalchemy import Connection, Select

from acquire.errors import StoreError

_COPY_HEADER = 19
_COPY_ROW = np.dtype([("fields", ">i2"), ("length", ">i4"), ("value", ">f8")])


def compiled_sql(conn: Connection, query: Select) -> tuple[str, Any]:
    """``query`` as the driver's SQL text and parameters (bind-processed as SQLAlchemy would)."""
    dialect = conn.dialect
    compiled = query.compile(dialect=dialect, compile_kwargs={"render_postcompile": True})
    params = compiled.construct_params()
    for name, bind in compiled.binds.items():
        if name in params and params[name] is not None:
            process = bind.type.dialect_impl(dialect).bind_processor(dialect)
            if process is not None:
                params[name] = process(params[name])
    if compiled.positional:
        return compiled.string, tuple(params[name] for name in compiled.positiontup or ())
    return compiled.string, params


def read_floats(conn: Connection, query: Select, expected: int) -> np.ndarray:
    """The one column ``query`` selects (never NULL), as a float array of ``expected`` values
    in the query's order."""
    sql, params = compiled_sql(conn, query)
    raw: Any = conn.connection.driver_connection
    if conn.dialect.name == "postgresql":
        copying = f"COPY ({sql}) TO STDOUT (FORMAT BINARY)"
        with raw.cursor() as cursor, cursor.copy(copying, params) as copy:
            data = b"".join(bytes(block) for block in copy)
        rows = np.frombuffer(data, _COPY_ROW, count=expected, offset=_COPY_HEADER)
        if data[_COPY_HEADER + rows.nbytes :] != b"\xff\xff" or (rows["length"] != 8).any():
            raise StoreError("the database sent other values than counted; read the lot again")
        values = rows["value"].astype(float)
    else:
        cursor = raw.cursor()
        try:
            cursor.execute(sql, params)
            values = np.fromiter(chain.from_iterable(cursor.fetchall()), float)
        finally:
            cursor.close()
    if values.size != expected:
        raise StoreError("the database sent other values than counted; read the lot again")
    return values
