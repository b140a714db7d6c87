"""Writing ``head_schema.sql``: the newest layout of an SQLite store as a frozen script.

:mod:`acquire.store.new_sqlite` makes a new SQLite store by running that script, without
SQLAlchemy or Alembic. The script is never written by hand: this module makes a store the usual
way (:func:`acquire.store.open_store`, every Alembic migration) in a temporary folder and writes
what that file holds:

- every schema object's ``sql`` from ``sqlite_master`` in the order the migrations left them
  (the indexes SQLite makes for a ``UNIQUE`` or ``PRIMARY KEY`` by itself are made again by
  their ``CREATE TABLE``);
- an ``INSERT`` for every row of every table that holds rows (``alembic_version`` and the rows
  the migrations insert), a time in a ``DATETIME`` column written as ``:now``, the time of
  making;
- the revision, on a line of its own (``-- revision: ...``).

Run it after every new migration (DEVELOPERS.md, "Changing the store's schema");
``tests/test_store_head_schema.py`` fails while the script is stale and names the command::

    python -m acquire.commands.head_schema --write   # write acquire/store/head_schema.sql again
    python -m acquire.commands.head_schema --check   # exit 1 when it is not what --write writes
"""

from __future__ import annotations

import sqlite3
import tempfile
from contextlib import closing
from pathlib import Path

from acquire.store.new_sqlite import NOW, REVISION_LINE, SCRIPT

#: The command that writes the script again, as messages name it.
COMMAND = "python -m acquire.commands.head_schema --write"
#: Declared types whose values are times of making (SQLAlchemy's SQLite ``DATETIME``).
TIME_TYPES = ("DATETIME", "TIMESTAMP")

_HEAD = f"""\
-- The newest layout of a results store on SQLite, as Alembic's migrations leave a new file.
-- Written by `{COMMAND}`; never edit it by hand.
-- Write it again after every new migration (DEVELOPERS.md, "Changing the store's schema").
-- `acquire sweep` runs it into a new SQLite file (acquire/store/new_sqlite.py); :{NOW} is the
-- time of making.
"""


def made_the_usual_way(folder: Path) -> Path:
    """A new store at the newest revision in ``folder``, made by Alembic's migrations."""
    from acquire.store.core import open_store

    path = folder / "head.db"
    open_store(f"sqlite:///{path.resolve()}", by_migrations=True).close()
    return path


def dump(path: Path) -> str:
    """The script that makes again the SQLite store at ``path`` (module doc)."""
    with closing(sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)) as conn:
        (revision,) = conn.execute("SELECT version_num FROM alembic_version").fetchone()
        objects = conn.execute(
            "SELECT type, name, sql FROM sqlite_master WHERE sql IS NOT NULL ORDER BY rowid"
        ).fetchall()
        lines = [_HEAD, f"{REVISION_LINE}{revision}\n"]
        for _, name, sql in objects:
            if not name.startswith("sqlite_"):
                lines.append(f"\n{sql};\n")
        for kind, name, _ in objects:
            if kind == "table" and not name.startswith("sqlite_"):
                lines.extend(_inserts(conn, name))
    return "".join(lines)


def _inserts(conn: sqlite3.Connection, table: str) -> list[str]:
    columns = conn.execute(f'PRAGMA table_info("{table}")').fetchall()
    names = ", ".join(_quoted(c[1]) for c in columns)
    timed = [str(c[2]).upper() in TIME_TYPES for c in columns]
    out = []
    for row in conn.execute(f'SELECT * FROM "{table}"'):
        values = ", ".join(
            f":{NOW}" if is_time and v is not None else _literal(v)
            for v, is_time in zip(row, timed, strict=True)
        )
        out.append(f"\nINSERT INTO {_quoted(table)} ({names}) VALUES ({values});\n")
    return out


def _quoted(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _literal(value: object) -> str:
    """A value as an SQL literal SQLite reads back as the same value and type."""
    if value is None:
        return "NULL"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, bytes):
        return f"X'{value.hex()}'"
    return "'" + str(value).replace("'", "''") + "'"


def script_text() -> str:
    """The script as it must be now: a store made the usual way, dumped."""
    with tempfile.TemporaryDirectory() as folder:
        return dump(made_the_usual_way(Path(folder)))


def script_is_current() -> bool:
    """Whether the script in the package is what :func:`script_text` makes now."""
    return SCRIPT.is_file() and SCRIPT.read_text(encoding="utf-8") == script_text()


def write_script() -> Path:
    """Write the script again from a store made the usual way; its path."""
    SCRIPT.write_text(script_text(), encoding="utf-8")
    return SCRIPT
