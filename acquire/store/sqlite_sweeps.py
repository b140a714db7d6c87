"""The sweep command's store on an SQLite file already at the newest revision, through the
standard library's :mod:`sqlite3` alone (SQLAlchemy takes longer to import than numpy).

:func:`open_sweep_store` gives a :class:`PlainSweepStore` for a plain ``sqlite:///`` file (as
:func:`acquire.store.quick_read.plain_sqlite_path` spells it) that exists and whose
``alembic_version`` holds exactly :data:`acquire.store.migrations.HEAD_REVISION`, or that is
new or empty (made first from the frozen script of the newest layout,
:func:`acquire.store.new_sqlite.make_if_new`); for anything else (an older or newer revision,
PostgreSQL, an in-memory store, an unusual spelling) it opens the store the usual way
(:func:`acquire.store.open_store`), which creates, upgrades or refuses it in its own words.

A :class:`PlainSweepStore` does what ``acquire sweep`` asks of a store, writing the same rows
with the same types as the usual path (the times in SQLAlchemy's text, settings as the same
JSON, NaN as NULL), with the same durability (:mod:`acquire.store.sqlite_connection`: WAL,
``synchronous=FULL``, one transaction per batch, as :mod:`acquire.store.sweeps` draws them) and
the same one-line errors: opening closes the sweeps of dead writers on this host
(:func:`acquire.store.abandoned.close_dead_writers`), then it reads reference sets, records the
meter and the fixture, and begins a sweep whose :class:`PlainSweepWriter` stores its points in
batches and finishes it. ``tests/test_store_sqlite_sweeps.py`` holds both paths to the same rows.
"""

from __future__ import annotations

import os
import socket
import sqlite3
from datetime import UTC, datetime
from functools import cache, partial
from pathlib import Path
from types import TracebackType
from typing import TYPE_CHECKING, Any

from acquire.errors import StoreError
from acquire.store import sqlite_connection
from acquire.store.migrations import HEAD_REVISION
from acquire.store.new_sqlite import make_if_new
from acquire.store.plain_values import identity_key, sqlite_time, to_json, utc_now
from acquire.store.quick_read import LISTED_COLUMNS, VERSION_TABLE, plain_sqlite_path
from acquire.store.quick_read import _info as listed_info
from acquire.store.reference_rows import HEAD_NAMES, POINT_NAMES, reference_set
from acquire.store.sqlite_connection import MIN_SQLITE, PlainDatabase
from acquire.store.sweep_batch import (
    ROW_COLUMNS,
    SweepWriterBase,
    advance_text,
    not_running,
    other_writer,
)
from acquire.store.writer_alive import GONE_NOTE, process_exists

if TYPE_CHECKING:
    import numpy as np

    from acquire.compensation import ReferenceSet
    from acquire.store.core import Store
    from acquire.store.records import ReferenceSetInfo

#: The columns of a new sweep's row, in the order they are sent (as ``sweeps.begin_sweep``).
SWEEP_COLUMNS = (
    "dut", "meter_id", "fixture_id", "reference_set_id", "settings", "status", "note", "points",
    "started_at", "last_write_at", "writer_host", "writer_pid",
)  # fmt: skip


def open_sweep_store(url: str) -> PlainSweepStore | Store:
    """The store at ``url`` for a sweep: plain SQLite when it can be (module doc), else the
    usual :class:`~acquire.store.core.Store`."""
    plain = PlainSweepStore.open_existing(url)
    if plain is None and make_if_new(url):
        plain = PlainSweepStore.open_existing(url)
    if plain is not None:
        return plain
    from acquire.store.core import open_store

    return open_store(url)


class PlainSweepStore:
    """What ``acquire sweep`` needs of a store, on an SQLite file at the newest revision."""

    engine_name = "sqlite"

    def __init__(self, db: PlainDatabase) -> None:
        self._db = db

    @classmethod
    def open_existing(cls, url: str) -> PlainSweepStore | None:
        """The store at ``url`` when it is a plain SQLite file at the newest revision, else
        None (nothing written). Sweeps of dead writers on this host are closed, as on opening
        a store the usual way."""
        plain = plain_sqlite_path(url)
        if plain is None or sqlite3.sqlite_version_info < MIN_SQLITE:
            return None
        path, shown = plain
        if not path.is_file():
            return None
        try:
            conn = sqlite_connection.connect(path)
        except sqlite3.Error:
            return None
        try:
            revisions = conn.execute(f"SELECT version_num FROM {VERSION_TABLE}").fetchall()
        except sqlite3.Error:
            revisions = []
        if revisions != [(HEAD_REVISION,)]:
            conn.close()
            return None
        store = cls(PlainDatabase(path, shown, first=conn))
        try:
            close_dead_writers(store._db)
        except BaseException:
            store.close()
            raise
        return store

    @property
    def url(self) -> str:
        """The store's URL as the usual path shows it."""
        return self._db.shown

    @property
    def path(self) -> Path:
        """The SQLite file."""
        return self._db.path

    def list_reference_sets(self) -> list[ReferenceSetInfo]:
        """Every stored reference set, oldest first (as ``Store.list_reference_sets``)."""
        columns = ", ".join(LISTED_COLUMNS)
        query = f"SELECT {columns} FROM reference_sets ORDER BY id"
        rows = self._db.read("listing reference sets", lambda c: c.execute(query).fetchall())
        try:
            return [listed_info(dict(zip(LISTED_COLUMNS, row, strict=True))) for row in rows]
        except (AttributeError, TypeError, ValueError) as exc:
            raise self._db.error("listing reference sets", exc) from exc

    def load_reference_set(self, ref_id: int) -> ReferenceSet:
        """Reference set ``ref_id`` (as ``Store.load_reference_set``)."""
        head_query = f"SELECT {', '.join(HEAD_NAMES)} FROM reference_sets WHERE id = ?"
        point_query = (
            f"SELECT idx, {', '.join(POINT_NAMES)} FROM reference_points "
            "WHERE reference_set_id = ? ORDER BY idx"
        )

        def work(conn: sqlite3.Connection) -> tuple[Any, list]:
            head = conn.execute(head_query, (ref_id,)).fetchone()
            return head, conn.execute(point_query, (ref_id,)).fetchall()

        head, rows = self._db.read("loading a reference set", work)
        if head is None:
            raise StoreError(f"there is no reference set {ref_id} in the store")
        values = dict(zip(HEAD_NAMES, head, strict=True))
        try:
            values["captured_at"] = _aware(values["captured_at"])
        except (TypeError, ValueError) as exc:
            raise self._db.error("loading a reference set", exc) from exc
        return reference_set(ref_id, values, rows)

    def record_meter(
        self, manufacturer: str, model: str, serial: str, firmware: str, dialect: str = ""
    ) -> int:
        """Record a meter by its identity; its id (as ``Store.record_meter``)."""
        fields = [str(v) for v in (manufacturer, model, serial, firmware, dialect)]
        row = (identity_key(*fields), *fields, sqlite_time(utc_now()))
        names = "key, manufacturer, model, serial, firmware, dialect, first_seen"
        return self._record("meter", "meters", names, row)

    def record_fixture(self, name: str, notes: str = "") -> int:
        """Record a fixture by name; its id (as ``Store.record_fixture``)."""
        row = (identity_key(name), name, notes, sqlite_time(utc_now()))
        return self._record("fixture", "fixtures", "key, name, notes, created_at", row)

    def _record(self, what: str, table: str, names: str, row: tuple) -> int:
        marks = ", ".join("?" * len(row))
        insert = (
            f"INSERT INTO {table} ({names}) VALUES ({marks}) "
            f"ON CONFLICT (key) DO NOTHING RETURNING {table}.id"
        )

        def work(conn: sqlite3.Connection) -> int:
            found = conn.execute(insert, row).fetchone()
            if found is None:
                query = f"SELECT {table}.id FROM {table} WHERE {table}.key = ?"
                found = conn.execute(query, (row[0],)).fetchone()
            return int(found[0])

        return self._db.write(f"recording a {what}", work)

    def begin_sweep(
        self,
        dut: str = "",
        meter_id: int | None = None,
        fixture_id: int | None = None,
        reference_set_id: int | None = None,
        settings: dict[str, Any] | None = None,
    ) -> PlainSweepWriter:
        """Record a new running sweep; its writer (as ``Store.begin_sweep``)."""
        try:
            text = to_json(settings)
        except (TypeError, ValueError) as exc:
            raise StoreError(f"the sweep settings cannot be stored as JSON: {exc}") from None
        now = sqlite_time(utc_now())
        row = (dut, meter_id, fixture_id, reference_set_id, text, "running", "", 0, now, now,
               socket.gethostname(), os.getpid())  # fmt: skip
        insert = (
            f"INSERT INTO sweeps ({', '.join(SWEEP_COLUMNS)}) "
            f"VALUES ({', '.join('?' * len(row))}) RETURNING sweeps.id"
        )
        sweep_id = self._db.write(
            "starting a sweep", lambda c: int(c.execute(insert, row).fetchone()[0])
        )
        return PlainSweepWriter(self._db, sweep_id)

    def close(self) -> None:
        """Release the store's connections (the store cannot be used afterwards)."""
        self._db.close()

    def __enter__(self) -> PlainSweepStore:
        return self

    def __exit__(
        self,
        kind: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"PlainSweepStore({self.url!r})"


#: The most point rows one INSERT carries (ten parameters a row: 640, under the 999 parameters
#: a statement of the oldest SQLite may hold).
ROWS_PER_INSERT = 64


@cache
def rows_insert_text(rows: int) -> str:
    """The INSERT of ``rows`` point rows (:data:`~acquire.store.sweep_batch.ROW_COLUMNS`) in one
    statement, its parameters the rows' values one row after another. One text per count, so
    sqlite3's statement cache keeps each prepared (at most :data:`ROWS_PER_INSERT` of them)."""
    row = f"({', '.join('?' * len(ROW_COLUMNS))})"
    return f"INSERT INTO sweep_points ({', '.join(ROW_COLUMNS)}) VALUES {', '.join([row] * rows)}"


def insert_rows(conn: sqlite3.Connection, table: np.ndarray) -> None:
    """Insert the rows of a batch's table (:func:`~acquire.store.sweep_batch.point_table`) in
    order, :data:`ROWS_PER_INSERT` to a statement: the rows an ``executemany`` of the one-row
    INSERT stores, with one statement where that runs one per row."""
    for first in range(0, len(table), ROWS_PER_INSERT):
        part = table[first : first + ROWS_PER_INSERT]
        conn.execute(rows_insert_text(len(part)), part.ravel().tolist())


class PlainSweepWriter(SweepWriterBase):
    """The points of one sweep into the store, as :class:`acquire.store.sweeps.SweepWriter`
    writes them (the same rows, batches, transactions and ends; the rows of a batch go
    :data:`ROWS_PER_INSERT` to a statement, :func:`insert_rows`)."""

    _db: PlainDatabase

    def _rows(self, table: np.ndarray) -> np.ndarray:
        return table

    def _store_rows(self, start: int, rows: np.ndarray) -> int:
        count, sweep_id = len(rows), self._id

        def work(conn: sqlite3.Connection) -> int:
            now = sqlite_time(utc_now())
            advance = (start + count, now, sweep_id, start)
            if conn.execute(advance_text("qmark"), advance).rowcount:
                insert_rows(conn, rows)
                return start + count
            held = "SELECT sweeps.points FROM sweeps WHERE sweeps.id = ? AND sweeps.status = ?"
            found = conn.execute(held, (sweep_id, "running")).fetchone()
            if found is None:
                raise not_running(sweep_id)
            have = int(found[0])
            if not start <= have <= start + count:
                raise other_writer(sweep_id, have, start)
            new = rows[have - start :]
            bump = "UPDATE sweeps SET points = ?, last_write_at = ? WHERE sweeps.id = ?"
            conn.execute(bump, (have + len(new), now, sweep_id))
            insert_rows(conn, new)
            return have + len(new)

        return self._db.write("storing sweep points", work)

    def _mark_end(self, status: str, note: str) -> bool:
        done = (
            "UPDATE sweeps SET status = ?, note = ?, finished_at = ?, last_write_at = ? "
            "WHERE sweeps.id = ? AND sweeps.status = ?"
        )
        ended = "SELECT sweeps.status, sweeps.note FROM sweeps WHERE sweeps.id = ?"
        sweep_id = self._id

        def work(conn: sqlite3.Connection) -> bool:
            values = (status, note, sqlite_time(utc_now()), sqlite_time(utc_now()))
            if conn.execute(done, (*values, sweep_id, "running")).rowcount == 1:
                return True
            return tuple(conn.execute(ended, (sweep_id,)).fetchone() or ()) == (status, note)

        return bool(self._db.write("finishing a sweep", work))


def close_dead_writers(db: PlainDatabase) -> list[int]:
    """Mark interrupted the running sweeps whose writing process is dead on this host (as
    :func:`acquire.store.abandoned.close_dead_writers`); a store that cannot be written now is
    left as it is."""
    if os.name != "posix":
        return []
    running = (
        "SELECT sweeps.id, sweeps.writer_pid, sweeps.last_write_at, sweeps.note FROM sweeps "
        "WHERE sweeps.status = ? AND sweeps.writer_host = ? AND sweeps.writer_pid IS NOT NULL"
    )
    here = ("running", socket.gethostname())
    rows = db.read(
        "looking for sweeps of ended processes", lambda c: c.execute(running, here).fetchall()
    )
    closed: list[int] = []
    for sweep_id, pid, last_write, note in rows:
        if process_exists(pid):
            continue
        same_time = "sweeps.last_write_at IS NULL" if last_write is None else (
            "sweeps.last_write_at = ?"
        )  # fmt: skip
        mark = (
            "UPDATE sweeps SET status = ?, note = ?, finished_at = ? "
            f"WHERE sweeps.id = ? AND sweeps.status = ? AND {same_time}"
        )
        values: tuple = ("interrupted", note or GONE_NOTE, sqlite_time(utc_now()), sweep_id,
                         "running")  # fmt: skip
        if last_write is not None:
            values += (_rebound(last_write),)
        try:
            changed = db.write(
                "closing a sweep of an ended process", partial(_changed, mark, values)
            )
        except StoreError:
            return closed
        if changed:
            closed.append(sweep_id)
    return closed


def _changed(statement: str, values: tuple, conn: sqlite3.Connection) -> int:
    return int(conn.execute(statement, values).rowcount)


def _aware(value: str | None) -> datetime | None:
    """A stored time read back aware, as :class:`acquire.store.columns.UtcDateTime` does."""
    if value is None:
        return None
    when = datetime.fromisoformat(value)
    return when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)


def _rebound(value: Any) -> Any:
    """A stored time as the usual path sends it back in a comparison: read, then written."""
    try:
        return sqlite_time(_aware(value))  # type: ignore[arg-type]
    except (TypeError, ValueError):
        return value
