"""A column of floats read straight from the database driver into a numpy array.

For large reads SQLAlchemy's result rows cost more than the query: the statement is built with
SQLAlchemy Core as usual, compiled once, and handed to the driver's own cursor on the same
connection (so inside the same transaction), whose rows numpy takes in one go. On PostgreSQL
the rows come in binary (a float as its 8 bytes, no text to parse). A binary COPY would send
the same bytes, but one message a row, and psycopg hands each message to Python on its own: for
a million values about 1.6 s against 0.7 s for the rows of one result (measured on a busy
machine with benchmarks/bench_store.py's lot).
"""

from __future__ import annotations

from itertools import chain
from typing import Any

import numpy as np
from sqlalchemy import Connection, Select

from acquire.errors import StoreError


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
    postgres = conn.dialect.name == "postgresql"
    cursor = raw.cursor(binary=True) if postgres else raw.cursor()
    try:
        cursor.execute(sql, params)
        values = np.fromiter(chain.from_iterable(cursor.fetchall()), float)
    finally:
        cursor.close()
    if values.size != expected:
        raise StoreError("the database sent other values than counted; read the lot again")
    return values
