"""A new SQLite store made with the standard library alone, from the frozen script of the newest
layout (``head_schema.sql`` beside this module).

Making a store the usual way runs every Alembic migration through SQLAlchemy, which costs the
sweep command more memory and start-up time than its whole plain-SQLite path
(:mod:`acquire.store.sqlite_sweeps`). :func:`make_if_new` makes the same file instead by running
the script that :mod:`acquire.store.head_schema` wrote from a store made the usual way: every
``CREATE`` statement exactly as the migrations leave it, the ``alembic_version`` row of the
newest revision and the rows the migrations insert (their times are the time of making).

The file is made only when it is a plain ``sqlite:///`` file (as
:func:`acquire.store.quick_read.plain_sqlite_path` reads it) that does not exist, or that holds
no schema object at all (an empty file); the connection has the settings of every store
connection (:func:`acquire.store.sqlite_connection.apply_settings`: WAL, ``synchronous=FULL``).
All of it is one ``BEGIN IMMEDIATE`` transaction that first looks again for a schema, so when
several programs make the same new file at once (by this module or the usual way, which also
looks again under the same lock) exactly one of them makes it and the others find it made.

Anything else is left alone: a file that holds something, a folder that does not exist, a
script of another revision than :data:`acquire.store.migrations.HEAD_REVISION` (a new migration
whose script was not written again), or no script at all; the caller then opens the store the
usual way, which creates, upgrades or refuses it in its own words.
"""

from __future__ import annotations

import sqlite3
from contextlib import closing
from pathlib import Path

from acquire.store.failure import BUSY_TIMEOUT_S, first_line, store_failure
from acquire.store.migrations import HEAD_REVISION
from acquire.store.plain_values import sqlite_time, utc_now
from acquire.store.quick_read import plain_sqlite_path
from acquire.store.sqlite_connection import MIN_SQLITE, apply_settings, failure_kind

#: The frozen script of the newest layout (written by ``python -m acquire.commands.head_schema``).
SCRIPT = Path(__file__).with_name("head_schema.sql")
#: The script's line naming the revision it makes.
REVISION_LINE = "-- revision: "
#: The parameter that stands for the time of making in the script's rows.
NOW = "now"
#: What the usual path calls the same work in its messages.
ACTION = "creating or upgrading the store"


def read_script(script: Path = SCRIPT) -> tuple[str | None, list[str]]:
    """The revision a script makes (None when it names none) and its statements, in order.

    Comment lines between statements are left out; a statement's own lines are kept exactly as
    written, so a ``CREATE`` is stored with the text the migrations gave it.
    """
    revision: str | None = None
    statements: list[str] = []
    pending = ""
    for line in script.read_text(encoding="utf-8").splitlines(keepends=True):
        if not pending and (not line.strip() or line.startswith("--")):
            if line.startswith(REVISION_LINE):
                revision = line[len(REVISION_LINE) :].strip()
            continue
        pending += line
        if sqlite3.complete_statement(pending):
            statements.append(pending.rstrip("\n"))
            pending = ""
    if pending.strip():
        raise ValueError(f"{script} ends inside a statement: write it again (DEVELOPERS.md)")
    return revision, statements


def make_if_new(url: str, script: Path = SCRIPT) -> bool:
    """Make the store at ``url`` from ``script`` if it names a new or empty plain SQLite file
    (module doc). True when the file was new or empty: it now holds the store, made by this
    call or by another program at the same moment; False when nothing was done."""
    plain = plain_sqlite_path(url)
    if plain is None or sqlite3.sqlite_version_info < MIN_SQLITE:
        return False
    path, shown = plain
    if not path.parent.is_dir() or (path.exists() and not _holds_nothing(path)):
        return False
    try:
        revision, statements = read_script(script)
    except (OSError, UnicodeError, ValueError):
        return False
    if revision != HEAD_REVISION:
        return False
    try:
        conn = sqlite3.connect(
            f"{path.resolve().as_uri()}?mode=rwc",
            uri=True,
            timeout=BUSY_TIMEOUT_S,
            isolation_level=None,
        )
    except sqlite3.Error:
        return False
    with closing(conn):
        try:
            apply_settings(conn)
            _run(conn, statements)
        except sqlite3.Error as exc:
            raise store_failure(ACTION, shown, first_line(exc), failure_kind(exc)) from exc
    return True


def _holds_nothing(path: Path) -> bool:
    """Whether an existing file is empty: no bytes, or an SQLite file without a schema object."""
    if not path.is_file():
        return False
    if path.stat().st_size == 0:
        return True
    try:
        with closing(sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)) as conn:
            return _objects(conn) == 0
    except sqlite3.Error:
        return False


def _objects(conn: sqlite3.Connection) -> int:
    return int(conn.execute("SELECT count(*) FROM sqlite_master").fetchone()[0])


def _run(conn: sqlite3.Connection, statements: list[str]) -> None:
    """Run the script in one write transaction unless the file holds something by then."""
    conn.execute("BEGIN IMMEDIATE")
    try:
        if _objects(conn) == 0:
            values = {NOW: sqlite_time(utc_now())}
            for statement in statements:
                if statement.lstrip().upper().startswith("INSERT"):
                    conn.execute(statement, values)
                else:
                    conn.execute(statement)
        conn.execute("COMMIT")
    except BaseException:
        if conn.in_transaction:
            conn.execute("ROLLBACK")
        raise
