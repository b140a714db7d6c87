"""The things results refer to: meters, fixtures, test plans and lots.

Each ``record_*`` call is idempotent and safe when several stations make the same record at
once: the record is identified by a key (a meter's full identity, a fixture's or lot's name, the
SHA-256 of a plan's text) and inserted only if that key is new; either way its id comes back.
A record's other fields (a fixture's notes, say) keep the values it was first recorded with.
"""

from __future__ import annotations

import hashlib
from typing import Any

from sqlalchemy import Connection, Table, func, select

from acquire.errors import StoreError
from acquire.store.engine import Database, insert_ignoring_duplicates
from acquire.store.records import FixtureInfo, LotInfo, MeterInfo, PlanInfo
from acquire.store.schema import TABLES, identity_key, utc_now


def plan_hash(text: str) -> str:
    """The SHA-256 (hex) of a plan's text, UTF-8 encoded: the plan's identity in the store."""
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def get_or_create(conn: Connection, table: Table, key_column: str, row: dict[str, Any]) -> int:
    """The id of the row of ``table`` whose ``key_column`` equals ``row``'s, inserting it if new."""
    insert = insert_ignoring_duplicates(conn, table, [key_column]).returning(table.c.id)
    found = conn.execute(insert, row).scalar()
    if found is None:
        key = table.c[key_column] == row[key_column]
        found = conn.execute(select(table.c.id).where(key)).scalar_one()
    return found


def _record(db: Database, what: str, table: str, key_column: str, row: dict[str, Any]) -> int:
    return db.write(
        f"recording a {what}",
        lambda c: get_or_create(c, TABLES[table], key_column, row),
        idempotent=True,
    )


def record_meter(
    db: Database, manufacturer: str, model: str, serial: str, firmware: str, dialect: str = ""
) -> int:
    """Record a meter by its identity (``*IDN?`` fields and dialect); return its id."""
    fields = [str(v) for v in (manufacturer, model, serial, firmware, dialect)]
    names = ("manufacturer", "model", "serial", "firmware", "dialect")
    row = {"key": identity_key(*fields), **dict(zip(names, fields, strict=True))}
    return _record(db, "meter", "meters", "key", {**row, "first_seen": utc_now()})


def record_fixture(db: Database, name: str, notes: str = "") -> int:
    """Record a fixture by name; return its id."""
    row = {"key": identity_key(name), "name": name, "notes": notes, "created_at": utc_now()}
    return _record(db, "fixture", "fixtures", "key", row)


def record_plan(db: Database, text: str, name: str = "") -> int:
    """Record a test plan by its text (identified by :func:`plan_hash`); return its id."""
    row = {"hash": plan_hash(text), "name": name, "text": text, "created_at": utc_now()}
    return _record(db, "test plan", "plans", "hash", row)


def lot_row(name: str, notes: str = "") -> dict[str, Any]:
    """The row that records lot ``name``."""
    return {"key": identity_key(name), "name": name, "notes": notes, "created_at": utc_now()}


def record_lot(db: Database, name: str, notes: str = "") -> int:
    """Record a production lot by name; return its id."""
    if not name:
        raise StoreError("a lot needs a name")
    return _record(db, "lot", "lots", "key", lot_row(name, notes))


def _one(db: Database, what: str, table: str, where: Any) -> Any:
    t = TABLES[table]
    row = db.read(f"reading a {what}", lambda c: c.execute(select(t).where(where)).first())
    if row is None:
        raise StoreError(f"there is no such {what} in the store")
    return row


def meter(db: Database, meter_id: int) -> MeterInfo:
    """Meter ``meter_id``."""
    r = _one(db, "meter", "meters", TABLES["meters"].c.id == meter_id)
    return MeterInfo(r.id, r.manufacturer, r.model, r.serial, r.firmware, r.dialect, r.first_seen)


def fixture(db: Database, fixture_id: int) -> FixtureInfo:
    """Fixture ``fixture_id``."""
    r = _one(db, "fixture", "fixtures", TABLES["fixtures"].c.id == fixture_id)
    return FixtureInfo(r.id, r.name, r.notes, r.created_at)


def plan(db: Database, plan_id: int | None = None, hash: str | None = None) -> PlanInfo:
    """A test plan by id or by hash."""
    plans = TABLES["plans"]
    if (plan_id is None) == (hash is None):
        raise StoreError("look a plan up by its id or by its hash (one of them)")
    where = plans.c.id == plan_id if plan_id is not None else plans.c.hash == hash
    r = _one(db, "test plan", "plans", where)
    return PlanInfo(r.id, r.hash, r.name, r.text, r.created_at)


def list_lots(db: Database, name: str | None = None) -> list[LotInfo]:
    """Every lot (or only lot ``name``) with its number of stored attempts, oldest first."""
    lots, units = TABLES["lots"], TABLES["units"]
    counts = select(units.c.lot_id, func.count().label("n")).group_by(units.c.lot_id).subquery("n")
    query = (
        select(lots, func.coalesce(counts.c.n, 0).label("attempts"))
        .outerjoin(counts, counts.c.lot_id == lots.c.id)
        .order_by(lots.c.id)
    )
    if name is not None:
        query = query.where(lots.c.key == identity_key(name))
    rows = db.read("listing lots", lambda c: c.execute(query).all())
    return [LotInfo(r.id, r.name, r.notes, r.created_at, r.attempts) for r in rows]


def lot(db: Database, name: str) -> LotInfo:
    """Lot ``name``."""
    found = list_lots(db, name)
    if not found:
        raise StoreError(f"there is no lot {name!r} in the store")
    return found[0]
