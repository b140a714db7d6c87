"""Store URLs: what a user types, and what the database layer is given.

A store is named by a URL everywhere (the ``--store`` option, ``ACQUIRE_STORE``):

- ``sqlite:///relative/file.db`` or ``sqlite:////absolute/file.db``: one file on this bench.
  A bare path without a scheme (``results.db``) means the same. ``sqlite://`` alone is an
  in-memory store that vanishes when closed (for experiments and tests).
- ``postgresql://user@host:port/dbname`` (also ``postgres://``): a database shared by a line of
  stations, reached through psycopg 3. An explicit driver (``postgresql+psycopg://``) is kept.
  An optional ``?schema=name`` keeps the store's tables in their own PostgreSQL schema, so one
  database can hold several stores (or other applications' tables) side by side.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from pathlib import Path

from sqlalchemy.engine import URL, make_url
from sqlalchemy.exc import ArgumentError

from acquire.errors import StoreError

_SCHEMA_NAME = re.compile(r"[a-z_][a-z0-9_]{0,62}")
_SCHEME = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*://")
#: A store scheme followed by a colon but not by "//" (``sqlite:/acquire.db``, ``sqlite:x.db``).
_SHORT_SCHEME = re.compile(r"^(sqlite|postgres|postgresql)(\+[A-Za-z0-9_]+)?:(?!//)", re.IGNORECASE)


@dataclass(frozen=True)
class StoreLocation:
    """A parsed store URL.

    ``url`` is what SQLAlchemy connects to, ``shown`` is the same with any password hidden (for
    messages), ``engine`` is ``"sqlite"`` or ``"postgresql"``, ``path`` the SQLite file (None for
    PostgreSQL and for an in-memory store) and ``schema`` the PostgreSQL schema or None.
    """

    url: URL
    shown: str
    engine: str
    path: Path | None
    schema: str | None


def check_schema_name(name: str) -> str:
    """Return ``name`` if it is a plain lower-case PostgreSQL identifier, else raise StoreError."""
    if not _SCHEMA_NAME.fullmatch(name):
        raise StoreError(
            f"schema name {name!r} is not usable: use lower-case letters, digits and '_' "
            "(at most 63 characters, not starting with a digit)"
        )
    return name


def parse_store_url(text: str, schema: str | None = None) -> StoreLocation:
    """Parse a store URL (or a bare SQLite file path) into a :class:`StoreLocation`.

    ``schema`` (PostgreSQL only) overrides a ``?schema=`` given in the URL.
    """
    text = text.strip()
    if not text:
        raise StoreError("the store URL is empty: give sqlite:///file.db or postgresql://...")
    short = _SHORT_SCHEME.match(text)
    if short:
        rest = text[short.end() :].lstrip("/")
        if short.group(1).lower() != "sqlite":
            meant = f"{short.group(0)}//{rest} (user@host/dbname)"
        else:
            meant = f"{short.group(0)}///{rest} (a file relative to this folder; four slashes "
            meant += "before an absolute path)"
        raise StoreError(f"store URL {text!r} lacks the slashes after the scheme: write {meant}")
    if not _SCHEME.match(text):
        text = "sqlite:///" + text
    try:
        url = make_url(text)
    except ArgumentError as exc:
        raise StoreError(
            f"cannot read store URL {text!r}: {exc}. "
            "Use sqlite:///path/file.db or postgresql://user@host/dbname"
        ) from None
    backend = url.get_backend_name()
    if backend == "sqlite" and (url.host or url.port or url.username or url.password):
        scheme, rest = text.split("://", 1)
        raise StoreError(
            f"store URL {text!r} has two slashes, so {url.host or rest!r} is read as a host: "
            f"write {scheme}:///{rest} (a file relative to this folder; four slashes before an "
            "absolute path)"
        )
    if backend == "sqlite":
        if schema is not None or "schema" in url.query:
            raise StoreError("a schema can only be given for a PostgreSQL store")
        path = Path(url.database) if url.database and url.database != ":memory:" else None
        return StoreLocation(url, _shown_sqlite(url), "sqlite", path, None)
    if backend in ("postgresql", "postgres"):
        query_schema = url.query.get("schema")
        if isinstance(query_schema, tuple):
            raise StoreError("give ?schema= only once in the store URL")
        chosen = schema if schema is not None else query_schema
        if chosen is not None:
            check_schema_name(chosen)
        url = url.difference_update_query(["schema"])
        if url.drivername in ("postgresql", "postgres"):
            url = url.set(drivername="postgresql+psycopg")
        shown = url.render_as_string(hide_password=True)
        if chosen is not None:
            shown += f" (schema {chosen})"
        return StoreLocation(url, shown, "postgresql", None, chosen)
    raise StoreError(
        f"store URL {url.render_as_string(hide_password=True)!r} names an unsupported database "
        f"{backend!r}: use sqlite:///path/file.db or postgresql://user@host/dbname"
    )


def _shown_sqlite(url: URL) -> str:
    """An SQLite URL as typed. A file name that is not UTF-8 (its bytes kept as lone surrogates,
    PEP 383) cannot be percent-encoded, so it is shown as it is and printed byte for byte."""
    try:
        return url.render_as_string(hide_password=True)
    except UnicodeEncodeError:
        return f"{url.drivername}:///{url.database}"
