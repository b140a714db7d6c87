"""Production units and their measurements, and the lot statistics computed from them in SQL.

``save_unit`` writes a unit and all its measurements in one transaction, keyed by its attempt
id: a second write of the same attempt (a retry after a lost connection, a replay after a
restart) stores nothing and returns False. A measurement's uncertainty and tolerance limits and a
unit's references override and temperature (schema revision 0003) go with it; an unknown
uncertainty (None or NaN) is stored as NULL and reads back as None. The unit's row also carries
a packed copy of its readings for lot statistics (:mod:`acquire.store.packed_readings`, revision
0012), made from the same prepared rows. ``save_units`` does the
same for many units at once, a batch per transaction (for imports). Both use SQLAlchemy Core's
own bulk path: a list of rows given to one ``execute`` becomes multi-row INSERTs
("insertmanyvalues") on PostgreSQL and the driver's ``executemany`` on SQLite.
"""

from __future__ import annotations

from collections.abc import Iterable
from functools import cache, partial
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection, and_, case, func, select

from acquire.errors import StoreError
from acquire.store.catalog import get_or_create, lot_row
from acquire.store.engine import (
    Database,
    insert_ignoring,
)
from acquire.store.records import PASS, LotYield, MeasurementRecord, UnitRecord
from acquire.store.schema import TABLES, identity_key, utc_now
from acquire.store.unit_insert import (
    LAYOUT_AT,
    READINGS_AT,
    UNIT_COLUMNS,
    insert_postgres,
    insert_sqlite,
    process_head,
    unit_head,
)
from acquire.store.unit_rows import DC, measurement_rows

if TYPE_CHECKING:
    import pandas as pd

_UNIT_FIELDS = (
    "serial",
    "attempt",
    "station",
    "operator",
    "plan_id",
    "reference_set_id",
    "meter_id",
    "fixture_id",
    "started_at",
    "finished_at",
    "outcome",
    "bin",
    "notes",
    "attempt_id",
    "reference_override",
    "temperature",
    "check_acknowledgement_id",
)


def _unit_row(unit: UnitRecord, lot_id: int | None) -> dict[str, Any]:
    row = {name: getattr(unit, name) for name in _UNIT_FIELDS}
    row.update(serial_key=identity_key(unit.serial), lot_id=lot_id, saved_at=utc_now())
    return row


def tested_at(row: dict[str, Any]) -> Any:
    """A unit's test time, as each of its measurements carries it: its ``finished_at``, else
    its ``started_at``, else its ``saved_at`` (from the unit's row, as given or bind-processed)."""
    for name in ("finished_at", "started_at"):
        if row[name] is not None:
            return row[name]
    return row["saved_at"]


def _lot_ids(conn: Connection, names: Iterable[str], cache: dict[str, int]) -> dict[str, int]:
    found = {}
    for name in set(names) - {""}:
        found[name] = cache.get(name) or get_or_create(conn, TABLES["lots"], "key", lot_row(name))
    return found


#: Where a unit's :func:`tested_at` candidates lie in :data:`UNIT_COLUMNS`, in its order.
_TESTED_AT = tuple(UNIT_COLUMNS.index(n) for n in ("finished_at", "started_at", "saved_at"))

#: The columns of a measurement row, in the table's order.
MEASUREMENT_COLUMNS = tuple(c.name for c in TABLES["measurements"].columns)


@cache
def _new_unit(dialect: str, *returning: str) -> Any:
    """INSERT of a unit that skips an attempt id already stored, returning ``returning``."""
    units = TABLES["units"]
    ignoring = insert_ignoring(dialect, units, ("attempt_id",))
    return ignoring.returning(*(units.c[name] for name in returning))


def unit_parameters(dialect: Any, unit: UnitRecord, lot_id: int | None) -> tuple[list, list]:
    """(unit head, measurement rows) of ``unit`` as :mod:`acquire.store.unit_insert` takes them
    (values bind-processed for ``dialect``)."""
    head = process_head(dialect, unit_head(unit, lot_id, utc_now()))
    tested = next(head[k] for k in _TESTED_AT if head[k] is not None)
    rows, head[LAYOUT_AT], head[READINGS_AT] = measurement_rows(unit.measurements, lot_id, tested)
    return head, rows


def save_unit(db: Database, unit: UnitRecord, lot_cache: dict[str, int]) -> bool:
    """Store ``unit`` with its measurements in one transaction; False if already stored.

    The lot's id is looked up (or the lot made) once per store and kept in ``lot_cache``; the
    unit itself is one statement on PostgreSQL and one round trip to the server, commit included
    (:mod:`acquire.store.unit_insert`)."""
    insert = insert_postgres if db.is_postgres else insert_sqlite
    lot_id = None
    if unit.lot:
        if unit.lot not in lot_cache:
            lots = db.write("recording a lot", lambda c: _lot_ids(c, [unit.lot], lot_cache), True)
            lot_cache.update(lots)
        lot_id = lot_cache[unit.lot]
    head, rows = unit_parameters(db.engine.dialect, unit, lot_id)
    return db.write_on_driver("saving a unit", lambda c: insert(c, head, rows) is not None)


def save_units(
    db: Database, records: Iterable[UnitRecord], lot_cache: dict[str, int], batch: int = 1000
) -> int:
    """Store many units, ``batch`` per transaction; return how many were new."""

    def work(chunk: list[UnitRecord], conn: Connection) -> tuple[int, dict[str, int]]:
        lots = _lot_ids(conn, (u.lot for u in chunk), lot_cache)
        heads = [_unit_row(u, lots.get(u.lot)) for u in chunk]
        prepared: list[list[tuple]] = []
        for u, head in zip(chunk, heads, strict=True):
            tuples, head["readings_layout"], head["readings"] = measurement_rows(
                u.measurements, lots.get(u.lot), tested_at(head)
            )
            prepared.append(tuples)
        insert = _new_unit(conn.dialect.name, "id", "attempt_id")
        new = {a: i for i, a in conn.execute(insert, heads)}
        rows = [
            dict(zip(MEASUREMENT_COLUMNS, (new[u.attempt_id], *r), strict=True))
            for u, tuples in zip(chunk, prepared, strict=True)
            if u.attempt_id in new
            for r in tuples
        ]
        if rows:
            conn.execute(TABLES["measurements"].insert(), rows)
        return len(new), lots

    stored = 0
    chunk: dict[str, UnitRecord] = {}
    pending = iter(records)
    while True:
        for unit in pending:
            chunk.setdefault(unit.attempt_id, unit)
            if len(chunk) >= batch:
                break
        if not chunk:
            return stored
        part = list(chunk.values())
        n, lots = db.write("saving units", partial(work, part), idempotent=True)
        stored += n
        lot_cache.update(lots)
        chunk = {}


def _records(conn: Connection, where: Any) -> list[UnitRecord]:
    units, lots, ms = TABLES["units"], TABLES["lots"], TABLES["measurements"]
    query = (
        select(units, func.coalesce(lots.c.name, "").label("lot_name"))
        .outerjoin(lots, lots.c.id == units.c.lot_id)
        .where(where)
        .order_by(units.c.attempt, units.c.id)
    )
    heads = conn.execute(query).all()
    ids = [h.id for h in heads]
    found: dict[int, list[MeasurementRecord]] = {i: [] for i in ids}
    for start in range(0, len(ids), 500):
        part = ids[start : start + 500]
        rows = conn.execute(
            select(ms).where(ms.c.unit_id.in_(part)).order_by(ms.c.unit_id, ms.c.seq)
        )
        for m in rows:
            value = float(m.value_special) if m.value_special else m.value
            value = float("nan") if value is None else value
            f = None if m.frequency == DC else m.frequency
            record = MeasurementRecord(
                m.parameter,
                value,
                m.si_unit,
                f,
                m.low_limit,
                m.high_limit,
                m.verdict,
                uncertainty=m.uncertainty,
                tolerance_low=m.tolerance_low,
                tolerance_high=m.tolerance_high,
                bias_current=m.bias_current,
            )
            found[m.unit_id].append(record)
    return [
        UnitRecord(
            **{name: getattr(h, name) for name in _UNIT_FIELDS},
            lot=h.lot_name,
            measurements=tuple(found[h.id]),
        )
        for h in heads
    ]


def load_unit(db: Database, attempt_id: str) -> UnitRecord:
    """The unit attempt ``attempt_id`` with its measurements."""
    units = TABLES["units"]
    found = db.read("reading a unit", lambda c: _records(c, units.c.attempt_id == str(attempt_id)))
    if not found:
        raise StoreError(f"there is no unit attempt {attempt_id} in the store")
    return found[0]


def unit_attempts(db: Database, serial: str) -> list[UnitRecord]:
    """Every stored attempt on the unit ``serial``, in attempt order."""
    units = TABLES["units"]
    where = units.c.serial_key == identity_key(serial)
    return db.read("reading a unit's attempts", lambda c: _records(c, where))


def _lot_id(conn: Connection, lot: str) -> int:
    lots = TABLES["lots"]
    found = conn.execute(select(lots.c.id).where(lots.c.key == identity_key(lot))).scalar()
    if found is None:
        raise StoreError(f"there is no lot {lot!r} in the store")
    return found


def lot_units(db: Database, lot: str) -> pd.DataFrame:
    """One row per stored attempt of lot ``lot`` (no measurements), in attempt order."""
    import pandas as pd

    units = TABLES["units"]
    names = ["attempt_id", "serial", "attempt", "station", "operator", "outcome", "bin"]
    names += ["started_at", "finished_at"]

    def work(conn: Connection) -> list:
        query = select(*(units.c[n] for n in names)).where(units.c.lot_id == _lot_id(conn, lot))
        return list(conn.execute(query.order_by(units.c.id)).all())

    rows = db.read("reading a lot", work)
    return pd.DataFrame([tuple(r) for r in rows], columns=names)


SUMMARY_COLUMNS: tuple[str, ...] = ("parameter", "frequency", "unit", "count", "valid")
SUMMARY_COLUMNS += ("passed", "yield", "mean", "std", "min", "max")


def lot_summary(db: Database, lot: str) -> pd.DataFrame:
    """Statistics of every measured parameter of lot ``lot``, computed by the database.

    One row per (parameter, frequency, unit), frequency NaN for DC values: ``count``
    measurements, ``valid`` of them finite, ``passed`` with verdict "pass", ``yield`` = passed /
    count, and ``mean``, ``std`` (sample standard deviation, from the deviations from the mean:
    a second pass, so a large mean does not eat the digits of a small spread), ``min``, ``max``
    over the finite values. Every stored attempt counts (retests included); see ``lot_yield``
    for yields per serial. Both passes read the ``ix_measurements_lot_summary`` index.
    """
    import numpy as np
    import pandas as pd

    m = TABLES["measurements"]

    def work(conn: Connection) -> list:
        lot_id = _lot_id(conn, lot)
        g = (
            select(
                m.c.parameter,
                m.c.frequency,
                m.c.si_unit,
                func.count().label("count"),
                func.count(m.c.value).label("valid"),
                func.count(case((m.c.verdict == PASS, 1))).label("passed"),
                func.avg(m.c.value).label("mean"),
                func.min(m.c.value).label("min"),
                func.max(m.c.value).label("max"),
            )
            .where(m.c.lot_id == lot_id)
            .group_by(m.c.parameter, m.c.frequency, m.c.si_unit)
            .cte("g")
        )
        deviation = m.c.value - g.c.mean
        spread = (
            select(func.sum(deviation * deviation))
            .where(
                m.c.lot_id == lot_id,
                m.c.parameter == g.c.parameter,
                m.c.frequency == g.c.frequency,
                m.c.si_unit == g.c.si_unit,
            )
            .scalar_subquery()
        )
        query = select(g, spread.label("ss")).order_by(g.c.parameter, g.c.frequency, g.c.si_unit)
        return list(conn.execute(query).all())

    rows = db.read("summarising a lot", work)
    out = []
    for r in rows:
        std = np.sqrt(r.ss / (r.valid - 1)) if r.valid > 1 and r.ss is not None else np.nan
        passed = int(r.passed)
        out.append(
            (r.parameter, np.nan if r.frequency == DC else r.frequency, r.si_unit, r.count)
            + (r.valid, passed, passed / r.count)
            + tuple(np.nan if v is None else float(v) for v in (r.mean, std, r.min, r.max))
        )
    return pd.DataFrame(out, columns=list(SUMMARY_COLUMNS))


def lot_yield(db: Database, lot: str) -> LotYield:
    """First-pass and final yield of lot ``lot``, counted per serial number by the database."""
    u = TABLES["units"]

    def work(conn: Connection) -> Any:
        order = func.row_number().over(partition_by=u.c.serial_key, order_by=(u.c.attempt, u.c.id))
        latest = func.row_number().over(
            partition_by=u.c.serial_key, order_by=(u.c.attempt.desc(), u.c.id.desc())
        )
        ranked = (
            select(u.c.outcome, order.label("first"), latest.label("last"))
            .where(u.c.lot_id == _lot_id(conn, lot))
            .subquery()
        )
        passing = ranked.c.outcome == PASS
        one = func.sum
        query = select(
            func.count().label("attempts"),
            one(case((ranked.c.first == 1, 1), else_=0)).label("serials"),
            one(case((and_(ranked.c.first == 1, passing), 1), else_=0)).label("first_pass"),
            one(case((and_(ranked.c.last == 1, passing), 1), else_=0)).label("final_pass"),
        )
        return conn.execute(query).one()

    r = db.read("working out a lot's yield", work)
    return LotYield(
        lot, int(r.attempts), int(r.serials or 0), int(r.first_pass or 0), int(r.final_pass or 0)
    )
