"""Opening a store only to read it (the line overview page): nothing created, migrated or written.

An SQLite file is opened with SQLite's read-only URI (``mode=ro``), so the library itself
refuses any write; a PostgreSQL connection starts with ``SET default_transaction_read_only =
on``, so the server refuses any write in its transactions. The store must already be at this
program's schema revision: an older one is refused (any writing command, such as a station,
upgrades it), since upgrading would be a write.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

from sqlalchemy import event

from acquire.errors import StoreError
from acquire.store.core import Store
from acquire.store.engine import Database
from acquire.store.migrate import stored_revision
from acquire.store.schema import SCHEMA_REVISION
from acquire.store.store_file import check_store_file
from acquire.store.sweeps import STALE_AFTER_S
from acquire.store.url import StoreLocation, parse_store_url


def _read_only_location(location: StoreLocation) -> StoreLocation:
    if location.engine != "sqlite" or location.path is None:
        return location
    uri = location.path.resolve().as_uri()
    url = location.url.set(database=uri).update_query_dict({"mode": "ro", "uri": "true"})
    return replace(location, url=url)


def _server_read_only(dbapi_connection: Any, _record: Any) -> None:
    autocommit = dbapi_connection.autocommit
    dbapi_connection.autocommit = True
    try:
        dbapi_connection.execute("SET default_transaction_read_only = on")
    finally:
        dbapi_connection.autocommit = autocommit


def open_read_only(url: str) -> Store:
    """The store at ``url``, opened so that it cannot be written (see the module docstring).

    Raises :class:`~acquire.errors.StoreError` when there is no store there, it cannot be
    reached, or it is not at this program's schema revision.
    """
    location = parse_store_url(url)
    if location.engine == "sqlite" and location.path is None:
        raise StoreError("an in-memory store (sqlite://) is empty when opened: give a file")
    check_store_file(location)
    db = Database(_read_only_location(location))
    if db.is_postgres:
        event.listen(db.engine, "connect", _server_read_only)
    try:
        found = db.read("reading the schema revision", stored_revision)
        if found is None:
            raise StoreError(
                f"there is no results store in {location.shown}: check the URL and schema"
            )
        if found != SCHEMA_REVISION:
            raise StoreError(
                f"the store {location.shown} is at schema revision {found}, this program reads "
                f"{SCHEMA_REVISION}: start a station (or any command that writes) on it once "
                "to upgrade it, then open the page again"
            )
    except BaseException:
        db.dispose()
        raise
    return Store(db, created=False, found=found, stale_after=STALE_AFTER_S)
