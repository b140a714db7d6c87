"""The store as the MQTT publisher's outbox: each station's units, read from where it left off.

Units are published per station in the order the store holds them (their id). The table
``publish_positions`` keeps, per station, the id of the newest unit of that station the broker
has acknowledged; :func:`units_to_publish` reads the station's units after it, oldest first, and
:func:`mark_published` moves it forward once the broker acknowledged a unit (it never moves
back, so two publishers of one station cannot undo each other's progress). A station without a
row has published nothing yet: its first publisher sends every unit the store holds for it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

from sqlalchemy import Connection, select, update

from acquire.store.engine import Database, insert_ignoring
from acquire.store.production import _records
from acquire.store.records import UnitRecord
from acquire.store.schema import TABLES, utc_now


@dataclass(frozen=True)
class MeterIdentity:
    """A meter as its ``*IDN?`` reply named it."""

    manufacturer: str
    model: str
    serial: str
    firmware: str


@dataclass(frozen=True)
class UnitContext:
    """What a unit's ids point at, by name: the plan (name and SHA-256 hash of its text), the
    meter, the fixture's name and the reference set (id and name); '' or None when the unit has
    none."""

    plan_name: str
    plan_hash: str
    meter: MeterIdentity | None
    fixture: str
    reference_set_id: int | None
    reference_set_name: str


class Outgoing(NamedTuple):
    """A unit waiting to be published: its row id in the store, the record, what it points at."""

    unit_id: int
    unit: UnitRecord
    context: UnitContext


def _position(conn: Connection, station: str) -> int:
    positions = TABLES["publish_positions"]
    found = conn.execute(
        select(positions.c.last_unit_id).where(positions.c.station == station)
    ).scalar()
    return 0 if found is None else int(found)


def publish_position(db: Database, station: str) -> int:
    """The id of the newest unit of ``station`` already published (0: none yet)."""
    return db.read("reading a publish position", lambda c: _position(c, station))


def _contexts(conn: Connection, ids: list[int]) -> dict[int, UnitContext]:
    u, p, m = TABLES["units"], TABLES["plans"], TABLES["meters"]
    f, r = TABLES["fixtures"], TABLES["reference_sets"]
    query = (
        select(
            u.c.id,
            u.c.reference_set_id,
            p.c.name.label("plan_name"),
            p.c.hash,
            m.c.id.label("meter_id"),
            m.c.manufacturer,
            m.c.model,
            m.c.serial,
            m.c.firmware,
            f.c.name.label("fixture"),
            r.c.name.label("reference_set"),
        )  # fmt: skip
        .outerjoin(p, p.c.id == u.c.plan_id)
        .outerjoin(m, m.c.id == u.c.meter_id)
        .outerjoin(f, f.c.id == u.c.fixture_id)
        .outerjoin(r, r.c.id == u.c.reference_set_id)
        .where(u.c.id.in_(ids))
    )
    found = {}
    for row in conn.execute(query):
        meter = None
        if row.meter_id is not None:
            meter = MeterIdentity(row.manufacturer, row.model, row.serial, row.firmware)
        found[row.id] = UnitContext(
            plan_name=row.plan_name or "",
            plan_hash=row.hash or "",
            meter=meter,
            fixture=row.fixture or "",
            reference_set_id=row.reference_set_id,
            reference_set_name=row.reference_set or "",
        )
    return found


def units_to_publish(db: Database, station: str, limit: int = 100) -> list[Outgoing]:
    """Up to ``limit`` units of ``station`` not yet published, oldest (lowest id) first."""
    units = TABLES["units"]

    def work(conn: Connection) -> list[Outgoing]:
        after = _position(conn, station)
        heads = conn.execute(
            select(units.c.id, units.c.attempt_id)
            .where(units.c.station == station, units.c.id > after)
            .order_by(units.c.id)
            .limit(limit)
        ).all()
        if not heads:
            return []
        ids = [h.id for h in heads]
        records = {r.attempt_id: r for r in _records(conn, units.c.id.in_(ids))}
        contexts = _contexts(conn, ids)
        return [Outgoing(h.id, records[h.attempt_id], contexts[h.id]) for h in heads]

    return db.read("reading units to publish", work)


def mark_published(db: Database, station: str, unit_id: int) -> None:
    """Move ``station``'s publish position to ``unit_id`` (never back)."""
    positions = TABLES["publish_positions"]

    def work(conn: Connection) -> None:
        now = utc_now()
        first = insert_ignoring(conn.dialect.name, positions, ("station",))
        conn.execute(first, {"station": station, "last_unit_id": 0, "updated_at": now})
        conn.execute(
            update(positions)
            .where(positions.c.station == station, positions.c.last_unit_id < unit_id)
            .values(last_unit_id=unit_id, updated_at=now)
        )

    db.write("recording a publish position", work, idempotent=True)


def stations_with_units(db: Database) -> list[str]:
    """Every station name that has units in the store, sorted."""
    units = TABLES["units"]

    def work(conn: Connection) -> list[str]:
        query = select(units.c.station).distinct().order_by(units.c.station)
        return [row.station for row in conn.execute(query)]

    return db.read("listing stations", work)


def waiting_count(db: Database, station: str) -> int:
    """How many units of ``station`` are not yet published."""
    from sqlalchemy import func

    units = TABLES["units"]

    def work(conn: Connection) -> int:
        after = _position(conn, station)
        query = select(func.count()).where(units.c.station == station, units.c.id > after)
        return int(conn.execute(query).scalar() or 0)

    return db.read("counting units to publish", work)


class PublishOutbox:
    """The publisher's side of :class:`acquire.store.Store` (one database, ``_db``)."""

    _db: Database

    def units_to_publish(self, station: str, limit: int = 100) -> list[Outgoing]:
        return units_to_publish(self._db, station, limit)

    def mark_published(self, station: str, unit_id: int) -> None:
        mark_published(self._db, station, unit_id)

    def publish_position(self, station: str) -> int:
        return publish_position(self._db, station)

    def unpublished_count(self, station: str) -> int:
        return waiting_count(self._db, station)

    def stations_with_units(self) -> list[str]:
        return stations_with_units(self._db)
