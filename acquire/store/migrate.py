"""Creating a store, reading its schema version, and bringing an older one up to date.

Every store holds a ``schema_version`` table with one row per version it has been brought to.
Opening a store:

- an empty database (or one holding none of the store's tables) gets the current schema;
- an older schema is migrated step by step, each step inside the same transaction as the
  version row it adds, so a failed migration leaves the store exactly as it was; no migration
  drops data (a column that moves is copied first);
- a newer schema is refused with a :class:`~acquire.errors.StoreError` (this program would not
  know what the newer columns mean).

Creation and migration hold a lock (SQLite's write lock; on PostgreSQL a transaction-level
advisory lock), so several stations opening a fresh or old database at the same moment do the
work once.
"""

from __future__ import annotations

import math
from collections.abc import Callable

from sqlalchemy import Connection, Index, inspect, text

from acquire.errors import StoreError
from acquire.store.engine import Database
from acquire.store.schema import SCHEMA_VERSION, build_metadata, identity_key, utc_now

#: PostgreSQL advisory lock key taken while a store is created or migrated.
_LOCK_KEY = 0x61637175  # "acqu"


def stored_version(conn: Connection) -> int | None:
    """The schema version of the store on ``conn``, or None if it has no version table."""
    if not inspect(conn).has_table("schema_version"):
        return None
    return conn.execute(text("SELECT MAX(version) FROM schema_version")).scalar_one()


def create_schema(conn: Connection, version: int = SCHEMA_VERSION, note: str = "") -> None:
    """Create the tables of ``version`` on ``conn`` and record that version."""
    md = build_metadata(version)
    md.create_all(conn)
    conn.execute(
        md.tables["schema_version"].insert(),
        {"version": version, "applied_at": utc_now(), "note": note or "created"},
    )


def _add_column(conn: Connection, table: str, column_ddl: str) -> None:
    conn.execute(text(f"ALTER TABLE {table} ADD COLUMN {column_ddl}"))


def _migrate_1_to_2(conn: Connection) -> None:
    """Version 2: lots become records of their own (units and measurements point to them);
    DC measurements get frequency 0 instead of NULL, and a non-finite value moves from the value
    column (NULL for NaN, or infinity) to ``value_special``; sweeps record their writer."""
    md = build_metadata(2)
    lots, units = md.tables["lots"], md.tables["units"]
    lots.create(conn)
    names = conn.execute(text("SELECT DISTINCT lot FROM units WHERE lot <> ''")).scalars()
    now = utc_now()
    rows = [{"key": identity_key(n), "name": n, "notes": "", "created_at": now} for n in names]
    if rows:
        conn.execute(lots.insert(), rows)
    _add_column(conn, "units", "lot_id INTEGER REFERENCES lots (id)")
    conn.execute(
        text(
            "UPDATE units SET lot_id = (SELECT lots.id FROM lots WHERE lots.name = units.lot) "
            "WHERE units.lot <> ''"
        )
    )
    conn.execute(text("DROP INDEX ix_units_lot"))
    conn.execute(text("ALTER TABLE units DROP COLUMN lot"))
    Index("ix_units_lot_id", units.c.lot_id).create(conn)

    _add_column(conn, "measurements", "lot_id INTEGER REFERENCES lots (id)")
    _add_column(conn, "measurements", "value_special VARCHAR(4) NOT NULL DEFAULT ''")
    conn.execute(
        text(
            "UPDATE measurements SET lot_id = "
            "(SELECT units.lot_id FROM units WHERE units.id = measurements.unit_id)"
        )
    )
    conn.execute(text("UPDATE measurements SET frequency = 0 WHERE frequency IS NULL"))
    conn.execute(text("UPDATE measurements SET value_special = 'nan' WHERE value IS NULL"))
    for special, value in (("inf", math.inf), ("-inf", -math.inf)):
        conn.execute(
            text("UPDATE measurements SET value_special = :s, value = NULL WHERE value = :v"),
            {"s": special, "v": value},
        )
    for index in md.tables["measurements"].indexes:
        index.create(conn)

    stamp = md.tables["sweeps"].c.last_write_at.type.compile(dialect=conn.dialect)
    _add_column(conn, "sweeps", f"last_write_at {stamp}")
    _add_column(conn, "sweeps", "writer_host TEXT")
    _add_column(conn, "sweeps", "writer_pid INTEGER")
    conn.execute(text("UPDATE sweeps SET last_write_at = COALESCE(finished_at, started_at)"))


#: version -> the step that brings a store of that version to the next one.
MIGRATIONS: dict[int, Callable[[Connection], None]] = {1: _migrate_1_to_2}


def _refuse_newer(version: int, where: str) -> StoreError:
    return StoreError(
        f"store {where} has schema version {version}, newer than the version {SCHEMA_VERSION} "
        "this program knows: it was written by a later release. Upgrade coil-acquire to open it "
        "(it is left untouched)."
    )


def migrate(conn: Connection, version: int, target: int = SCHEMA_VERSION) -> None:
    """Apply the migration steps from ``version`` to ``target`` on ``conn``."""
    versions = build_metadata(target).tables["schema_version"]
    while version < target:
        MIGRATIONS[version](conn)
        version += 1
        conn.execute(
            versions.insert(),
            {"version": version, "applied_at": utc_now(), "note": f"migrated from {version - 1}"},
        )


def ensure_schema(db: Database) -> tuple[bool, int]:
    """Create or migrate the store behind ``db``; return (created, version found on opening)."""
    where = db.location.shown
    found = db.read("reading the schema version", stored_version)
    if found == SCHEMA_VERSION:
        return False, found
    if found is not None and found > SCHEMA_VERSION:
        raise _refuse_newer(found, where)

    def work(conn: Connection) -> tuple[bool, int]:
        if db.is_postgres:
            conn.execute(text("SELECT pg_advisory_xact_lock(:k)"), {"k": _LOCK_KEY})
            if db.location.schema is not None:
                conn.execute(text(f'CREATE SCHEMA IF NOT EXISTS "{db.location.schema}"'))
        version = stored_version(conn)
        if version is None:
            ours = set(build_metadata().tables) | set(build_metadata(1).tables)
            clash = sorted(ours & set(inspect(conn).get_table_names()))
            if clash:
                raise StoreError(
                    f"{where} holds tables named like a results store ({', '.join(clash)}) but "
                    "no schema version: it is not a store of this program. Use an empty "
                    "database, another file, or (PostgreSQL) another schema."
                )
            create_schema(conn)
            return True, SCHEMA_VERSION
        if version > SCHEMA_VERSION:
            raise _refuse_newer(version, where)
        migrate(conn, version)
        return False, version

    return db.write("creating or migrating the store", work)
