"""Listing an SQLite store's reference sets with the standard library alone, read only.

`acquire reference list` only reads a few header rows, yet opening the store the usual way loads
SQLAlchemy, which takes longer to import than numpy. For a plain ``sqlite:///`` file that is at
exactly the revision this program writes (:data:`acquire.store.migrations.HEAD_REVISION`), this
module opens the file read only (``mode=ro``: nothing is created, migrated or written) and reads
the same rows :func:`acquire.store.references.list_reference_sets` reads, into the same
:class:`~acquire.store.records.ReferenceSetInfo`.

Anything else gives None, and the caller opens the store the usual way, which then says what is
wrong in its own words: a PostgreSQL or in-memory store, a URL whose spelling is not plain, a
missing or damaged file, another revision (older: the usual path upgrades it; newer: it refuses
it), a value this reader would not turn into exactly what SQLAlchemy would. It never writes.
"""

from __future__ import annotations

import re
import sqlite3
from contextlib import closing
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING

from acquire.store.migrations import HEAD_REVISION

if TYPE_CHECKING:
    from acquire.store.records import ReferenceSetInfo

#: The table of reference-set headers and the columns a listing reads (tests check them against
#: :mod:`acquire.store.schema`).
SETS_TABLE = "reference_sets"
LISTED_COLUMNS = (
    "id",
    "name",
    "fixture",
    "meter",
    "captured_at",
    "standards",
    "points",
    "fixture_id",
    "meter_id",
    "method",
    "saved_at",
)
#: Alembic's table of the revision a store is at.
VERSION_TABLE = "alembic_version"
#: The standards in the order a listing reports them (as :mod:`acquire.store.references`).
STANDARDS = ("open", "short", "load")
#: A path spelled so that SQLAlchemy reads it, and shows it, exactly as typed; others go the
#: usual way (percent signs, '?', '#', '@', ':' and non-ASCII letters are rewritten there).
_PLAIN_PATH = re.compile(r"[A-Za-z0-9/._+~ -]+")
_SCHEME = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*:")


def plain_sqlite_path(url: str) -> tuple[Path, str] | None:
    """The file and the shown URL of a plain ``sqlite:///`` store URL (or bare path), else None.

    Returns exactly what :func:`acquire.store.url.parse_store_url` gives as ``path`` and ``shown``
    for such a URL (a test holds them equal).
    """
    text = url.strip()
    if text.startswith("sqlite:///"):
        rest = text[len("sqlite:///") :]
    elif _SCHEME.match(text):
        return None
    else:
        rest = text
    if not _PLAIN_PATH.fullmatch(rest):
        return None
    return Path(rest), f"sqlite:///{rest}"


def list_reference_sets(url: str) -> tuple[str, list[ReferenceSetInfo]] | None:
    """The shown URL and every reference set (oldest first) of the plain SQLite store at ``url``,
    read without SQLAlchemy; None when the store must be opened the usual way (module doc)."""
    plain = plain_sqlite_path(url)
    if plain is None:
        return None
    path, shown = plain
    if not path.is_file():
        return None
    try:
        with closing(sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True)) as conn:
            revisions = conn.execute(f"SELECT version_num FROM {VERSION_TABLE}").fetchall()
            if revisions != [(HEAD_REVISION,)]:
                return None
            columns = ", ".join(LISTED_COLUMNS)
            rows = conn.execute(f"SELECT {columns} FROM {SETS_TABLE} ORDER BY id").fetchall()
    except sqlite3.Error:
        return None
    try:
        return shown, [_info(dict(zip(LISTED_COLUMNS, row, strict=True))) for row in rows]
    except (AttributeError, TypeError, ValueError):
        return None


def _info(row: dict) -> ReferenceSetInfo:
    from acquire.store.records import ReferenceSetInfo  # only when sets are read (a sweep
    # that uses none does not load the store's records)

    held = tuple(s for s in row["standards"].split(",") if s)
    return ReferenceSetInfo(
        id=row["id"],
        name=row["name"],
        fixture=row["fixture"],
        meter=row["meter"],
        captured_at=_utc(row["captured_at"]),
        standards=tuple(s for s in STANDARDS if s in held),
        points=row["points"],
        fixture_id=row["fixture_id"],
        meter_id=row["meter_id"],
        method=row["method"],
        saved_at=_utc(row["saved_at"]),
    )


def _utc(value: str | None) -> datetime | None:
    """A stored time (naive UTC text, as SQLAlchemy's SQLite DATETIME writes it) as an aware
    datetime, the way :class:`acquire.store.schema.UtcDateTime` reads it back."""
    if value is None:
        return None
    if not isinstance(value, str):
        raise TypeError(f"a stored time is {type(value).__name__}, not text")
    when = datetime.fromisoformat(value)
    if when.tzinfo is not None:
        raise ValueError("a stored time carries a zone; let the usual path read it")
    return when.replace(tzinfo=UTC)
