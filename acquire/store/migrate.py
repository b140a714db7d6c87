"""Creating a store and bringing it to the newest schema revision, with Alembic.

Every change of the store's layout is an Alembic revision in :mod:`acquire.store.migrations`
(``versions/0001_*.py``, ``0002_*.py``, ...); a store records the revision it is at in Alembic's
``alembic_version`` table. Opening a store (:func:`ensure_schema`):

- an empty database (or one holding none of the store's tables) runs every revision from the
  first, so a new store is made by exactly the code that upgrades an old one;
- a store at an older revision runs the revisions it lacks;
- a store made by the first release (a ``schema_version`` table holding version 2 and no
  ``alembic_version``) is stamped with revision 0001, whose layout it has, and then upgraded;
- a store at a revision this program does not know is refused with a
  :class:`~acquire.errors.StoreError` (it was written by a newer release) and left untouched.

All of it runs in one transaction under a lock (SQLite's write lock, taken by ``BEGIN
IMMEDIATE``; on PostgreSQL a transaction-level advisory lock), so several stations opening a
fresh or old database at the same moment do the work once, and a failed migration leaves the
store exactly as it was. A store already at the newest revision is opened without the lock.
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import Connection, inspect, text

from acquire.errors import StoreError
from acquire.store.engine import Database
from acquire.store.schema import SCHEMA_REVISION, TABLES

#: PostgreSQL advisory lock key taken while a store is created or migrated.
_LOCK_KEY = 0x61637175  # "acqu"
#: Where the migration scripts are (shipped inside the package).
MIGRATIONS = Path(__file__).with_name("migrations")
#: The ``schema_version`` the first release wrote, whose layout is revision 0001.
RELEASED_VERSION = 2
#: Marks a store found with the first release's layout (see :func:`stored_revision`).
RELEASED_LAYOUT = "released"


def alembic_config(connection: Connection | None = None) -> Config:
    """An Alembic configuration for the store's migrations (running on ``connection``)."""
    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS).replace("%", "%%"))
    config.attributes["connection"] = connection
    return config


@cache
def known_revisions() -> frozenset[str]:
    """Every revision id this program's migrations know."""
    script = ScriptDirectory.from_config(alembic_config())
    return frozenset(s.revision for s in script.walk_revisions())


def stored_revision(conn: Connection) -> str | None:
    """The revision of the store on ``conn``: an Alembic revision id, :data:`RELEASED_LAYOUT`
    for a store of the first release, or None when there is no store (or something else) there.
    Raises StoreError for a store this program cannot open."""
    heads = MigrationContext.configure(conn).get_current_heads()
    if len(heads) > 1:
        raise StoreError(
            f"the store is at several schema revisions at once ({', '.join(sorted(heads))}): "
            "it was changed by hand; restore it from a backup"
        )
    if heads:
        return heads[0]
    if not inspect(conn).has_table("schema_version"):
        return None
    version = conn.execute(text("SELECT MAX(version) FROM schema_version")).scalar_one()
    if version == RELEASED_VERSION:
        return RELEASED_LAYOUT
    raise StoreError(
        f"the store has schema version {version} but no revision record: it was not made by a "
        "release of this program; use another database or restore the store from a backup"
    )


def _refuse_unknown(revision: str, where: str) -> StoreError:
    return StoreError(
        f"store {where} is at schema revision {revision}, which this program does not know "
        f"(it knows up to {SCHEMA_REVISION}): it was written by a newer release; update "
        "coil-acquire to open it (the store is left untouched)"
    )


def _check_known(found: str | None, where: str) -> None:
    if found not in (None, RELEASED_LAYOUT) and found not in known_revisions():
        raise _refuse_unknown(found, where)


def upgrade(conn: Connection, target: str = "head") -> None:
    """Run the migrations on ``conn`` (inside its transaction) up to ``target``."""
    command.upgrade(alembic_config(conn), target)


def ensure_schema(db: Database) -> tuple[bool, str | None]:
    """Create or upgrade the store behind ``db``; return (created, revision found on opening),
    the revision being :data:`RELEASED_LAYOUT` for a store of the first release."""
    where = db.location.shown
    found = db.read("reading the schema revision", stored_revision)
    _check_known(found, where)
    if found == SCHEMA_REVISION:
        return False, found

    def work(conn: Connection) -> tuple[bool, str | None]:
        if db.is_postgres:
            conn.execute(text("SELECT pg_advisory_xact_lock(:k)"), {"k": _LOCK_KEY})
            if db.location.schema is not None:
                conn.execute(text(f'CREATE SCHEMA IF NOT EXISTS "{db.location.schema}"'))
        found = stored_revision(conn)
        _check_known(found, where)
        if found is None:
            clash = sorted(set(TABLES) & set(inspect(conn).get_table_names()))
            if clash:
                raise StoreError(
                    f"{where} holds tables named like a results store ({', '.join(clash)}) but "
                    "no schema revision: it is not a store of this program. Use an empty "
                    "database, another file, or (PostgreSQL) another schema."
                )
        if found == RELEASED_LAYOUT:
            command.stamp(alembic_config(conn), "0001")
        if found != SCHEMA_REVISION:
            upgrade(conn)
        return found is None, found

    return db.write("creating or upgrading the store", work)
