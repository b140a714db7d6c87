"""Whether an SQLite file holds a results store to be read, found without creating or writing it."""

from __future__ import annotations

from pathlib import Path

from acquire.errors import StoreError
from acquire.store.url import StoreLocation

#: The first 16 bytes of every SQLite database file (sqlite.org/fileformat.html, 1.3).
_SQLITE_HEADER = b"SQLite format 3\x00"


def check_store_file(location: StoreLocation) -> None:
    """Refuse an SQLite store that is not there to be read, without creating or writing it."""
    if location.engine != "sqlite":
        return
    path = location.path
    why = ""
    if path is None:
        why = "sqlite:// is an in-memory store, empty each time it is opened"
    elif not path.exists():
        why = "the file does not exist"
    elif not path.is_file():
        why = "it is not a file"
    else:
        with path.open("rb") as file:
            head = file.read(len(_SQLITE_HEADER))
        if not head:
            why = "the file is empty"
        elif head != _SQLITE_HEADER:
            why = "the file is not an SQLite database"
        elif not _has_store_tables(path):
            why = "the SQLite file holds none of the store's tables"
    if why:
        raise StoreError(
            f"there is no results store at {location.shown} ({why}): check the path; reading "
            "does not create a store"
        )


def _has_store_tables(path: Path) -> bool:
    """True if the SQLite file at ``path`` holds a store's revision record (read only)."""
    import sqlite3
    from contextlib import closing

    try:
        with closing(sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)) as conn:
            names = conn.execute(
                "SELECT name FROM sqlite_master WHERE type = 'table' "
                "AND name IN ('alembic_version', 'schema_version')"
            ).fetchall()
    except sqlite3.Error as exc:
        raise StoreError(f"cannot read the store file {path}: {exc}") from None
    return bool(names)
