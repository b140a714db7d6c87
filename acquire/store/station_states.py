"""Each station's newest state in the store (``station_states``), for the line overview page.

A station writes its state as it changes (:class:`acquire.production.state_keeper.StateKeeper`);
:func:`save` keeps one row per station name, replaced by each newer state (a state older than
the stored one, from a slow writer, leaves the row as it is). :func:`load` reads every row.
"""

from __future__ import annotations

import os
import socket
from dataclasses import dataclass, fields
from datetime import datetime
from typing import Any

from sqlalchemy import Connection, select

from acquire.store.engine import Database
from acquire.store.schema import TABLES, identity_key

#: The state fields a station tells, as ``acquire.production.station_watch.StationState``
#: has them (and the table's columns of the same names).
STATE_FIELDS = (
    "station",
    "state",
    "reason",
    "lot",
    "plan",
    "plan_hash",
    "operator",
    "meter",
    "fixture",
    "tested",
    "passed",
    "waiting",
    "references",
    "check_standard",
    "started_at",
    "updated_at",
)


@dataclass(frozen=True)
class StoredStationState:
    """A station's newest state as stored: every field of the state it told, plus the ``host``
    and process id (``pid``) that wrote it."""

    station: str
    state: str
    reason: str
    lot: str
    plan: str
    plan_hash: str
    operator: str
    meter: str
    fixture: str
    tested: int
    passed: int
    waiting: int
    references: str
    check_standard: str
    started_at: datetime
    updated_at: datetime
    host: str
    pid: int


def _upsert(dialect: str, row: dict[str, Any]) -> Any:
    from sqlalchemy.dialects import postgresql, sqlite

    table = TABLES["station_states"]
    insert: Any = postgresql.insert if dialect == "postgresql" else sqlite.insert
    statement = insert(table).values(**row)
    newer = statement.excluded.updated_at >= table.c.updated_at
    changes = {name: statement.excluded[name] for name in row if name != "station_key"}
    return statement.on_conflict_do_update(
        index_elements=["station_key"], set_=changes, where=newer
    )


def save(db: Database, state: Any, host: str | None = None, pid: int | None = None) -> None:
    """Store ``state`` (a StationState) as its station's newest, written by ``host`` and
    ``pid`` (default: this process)."""
    row = {name: getattr(state, name) for name in STATE_FIELDS}
    row["station_key"] = identity_key(state.station)
    row["host"] = socket.gethostname() if host is None else host
    row["pid"] = os.getpid() if pid is None else pid

    def work(conn: Connection) -> None:
        conn.execute(_upsert(conn.dialect.name, row))

    db.write("saving the station's state", work, idempotent=True)


def load(db: Database) -> list[StoredStationState]:
    """Every station's newest state, by station name."""
    table = TABLES["station_states"]
    names = [f.name for f in fields(StoredStationState)]

    def work(conn: Connection) -> list[Any]:
        query = select(*(table.c[name] for name in names)).order_by(table.c.station)
        return list(conn.execute(query).all())

    rows = db.read("reading the stations' states", work)
    return [StoredStationState(*row) for row in rows]


class LineStates:
    """The line overview's side of :class:`acquire.store.Store` (one database, ``_db``)."""

    _db: Database

    def save_station_state(self, state: Any) -> None:
        save(self._db, state)

    def station_states(self) -> list[StoredStationState]:
        return load(self._db)
