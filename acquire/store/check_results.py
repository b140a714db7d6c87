"""Check standards in the store: each check's values, and the acknowledgements of a stopped station.

A check standard is recorded by name (keyed by the SHA-256 of the name, so any name is stored as
given). :func:`save_check` stores one check, one row per quantity (value, U, the run rules it
broke), in one transaction; :func:`check_history` reads them back in test order;
:func:`acknowledge` records an engineer's acknowledgement; :func:`check_summary` gives what a
station needs to decide whether the standard stops it (the newest check and acknowledgement).
"""

from __future__ import annotations

import math
import uuid
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import Connection, func, select

from acquire.errors import StoreError
from acquire.store.catalog import get_or_create
from acquire.store.engine import Database, finite_or_none
from acquire.store.schema import TABLES, identity_key, utc_now

#: How the run rules a value broke are joined in ``check_results.rules``.
RULE_SEPARATOR = "; "


@dataclass(frozen=True)
class CheckValue:
    """One quantity of one check: the plan's check key (``"Ls@10000"``), SI unit, value, U (k = 2,
    NaN when unknown) and the run rules it broke when stored."""

    quantity: str
    unit: str
    value: float
    uncertainty: float
    rules: tuple[str, ...] = ()


@dataclass(frozen=True)
class CheckRow:
    """A stored check value with its check's id, time, station and plan hash."""

    id: int
    check_id: str
    checked_at: datetime
    station: str
    plan_hash: str
    quantity: str
    unit: str
    value: float
    uncertainty: float
    rules: tuple[str, ...]


@dataclass(frozen=True)
class Acknowledgement:
    """An engineer's acknowledgement of a stopped check standard."""

    id: int
    standard: str
    made_at: datetime
    made_by: str
    reason: str
    acknowledged: str
    check_id: str | None


@dataclass(frozen=True)
class CheckSummary:
    """What decides whether a standard stops a station: how many checks are stored, the newest
    check (its id, time and the (quantity, rule) pairs it broke) and the newest acknowledgement."""

    standard: str
    checks: int
    last_check_id: str | None
    last_checked: datetime | None
    broken: tuple[tuple[str, str], ...]
    acknowledgement: Acknowledgement | None


def _standard_id(conn: Connection, name: str, create: bool) -> int | None:
    table = TABLES["check_standards"]
    key = identity_key(name)
    if create:
        row = {"key": key, "name": name, "created_at": utc_now()}
        return get_or_create(conn, table, "key", row)
    return conn.execute(select(table.c.id).where(table.c.key == key)).scalar()


def _rules(text: str) -> tuple[str, ...]:
    return tuple(r for r in text.split(RULE_SEPARATOR) if r) if text else ()


def _number(value: float | None) -> float:
    return math.nan if value is None else float(value)


def save_check(
    db: Database,
    standard: str,
    values: list[CheckValue],
    station: str = "",
    plan_hash: str = "",
    checked_at: datetime | None = None,
) -> str:
    """Store one check of ``standard`` (recorded if new); its check id (a UUID)."""
    if not standard:
        raise StoreError("a check standard needs a name")
    if not values:
        raise StoreError(f"a check of {standard!r} needs at least one value")
    check_id = str(uuid.uuid4())
    when = checked_at or utc_now()

    def work(conn: Connection) -> str:
        standard_id = _standard_id(conn, standard, create=True)
        rows = [
            {
                "standard_id": standard_id,
                "check_id": check_id,
                "checked_at": when,
                "station": station,
                "plan_hash": plan_hash,
                "quantity": v.quantity,
                "si_unit": v.unit,
                "value": finite_or_none(v.value),
                "uncertainty": finite_or_none(v.uncertainty),
                "rules": RULE_SEPARATOR.join(v.rules),
            }
            for v in values
        ]
        conn.execute(TABLES["check_results"].insert(), rows)
        return check_id

    return db.write("saving a check of a check standard", work)


def check_history(db: Database, standard: str, quantity: str | None = None) -> list[CheckRow]:
    """Every stored value of ``standard`` (of one ``quantity`` when given), oldest first."""
    t = TABLES["check_results"]

    def work(conn: Connection) -> list[CheckRow]:
        standard_id = _standard_id(conn, standard, create=False)
        if standard_id is None:
            return []
        query = select(t).where(t.c.standard_id == standard_id)
        if quantity is not None:
            query = query.where(t.c.quantity == quantity)
        rows = conn.execute(query.order_by(t.c.checked_at, t.c.id)).all()
        return [
            CheckRow(
                r.id,
                r.check_id,
                r.checked_at,
                r.station,
                r.plan_hash,
                r.quantity,
                r.si_unit,
                _number(r.value),
                _number(r.uncertainty),
                _rules(r.rules),
            )  # fmt: skip
            for r in rows
        ]

    return db.read("reading a check standard's history", work)


def list_standards(db: Database) -> list[tuple[str, int, datetime | None]]:
    """Every check standard as (name, checks stored, newest check time), by name."""
    s, r = TABLES["check_standards"], TABLES["check_results"]
    query = (
        select(s.c.name, func.count(func.distinct(r.c.check_id)), func.max(r.c.checked_at))
        .outerjoin(r, r.c.standard_id == s.c.id)
        .group_by(s.c.id, s.c.name)
        .order_by(s.c.name)
    )
    rows = db.read("listing check standards", lambda c: c.execute(query).all())
    return [(name, int(n), last) for name, n, last in rows]


def _acknowledgement(r: Any, standard: str) -> Acknowledgement:
    return Acknowledgement(
        r.id, standard, r.made_at, r.made_by, r.reason, r.acknowledged, r.check_id
    )


def acknowledge(
    db: Database,
    standard: str,
    made_by: str,
    reason: str,
    acknowledged: str,
    check_id: str | None,
    made_at: datetime | None = None,
) -> Acknowledgement:
    """Record an acknowledgement of ``standard`` (which must be known to the store)."""
    a = TABLES["check_acknowledgements"]
    when = made_at or utc_now()

    def work(conn: Connection) -> Acknowledgement:
        standard_id = _standard_id(conn, standard, create=True)
        row = {
            "standard_id": standard_id,
            "made_at": when,
            "made_by": made_by,
            "reason": reason,
            "acknowledged": acknowledged,
            "check_id": check_id,
        }
        new_id = conn.execute(a.insert().returning(a.c.id), row).scalar_one()
        return Acknowledgement(new_id, standard, when, made_by, reason, acknowledged, check_id)

    return db.write("recording an acknowledgement", work)


def acknowledgements(db: Database, standard: str) -> list[Acknowledgement]:
    """Every acknowledgement of ``standard``, oldest first."""
    a = TABLES["check_acknowledgements"]

    def work(conn: Connection) -> list[Acknowledgement]:
        standard_id = _standard_id(conn, standard, create=False)
        if standard_id is None:
            return []
        query = select(a).where(a.c.standard_id == standard_id).order_by(a.c.made_at, a.c.id)
        return [_acknowledgement(r, standard) for r in conn.execute(query).all()]

    return db.read("reading acknowledgements", work)


def check_summary(db: Database, standard: str) -> CheckSummary:
    """The newest check and acknowledgement of ``standard`` (see :class:`CheckSummary`)."""
    r, a = TABLES["check_results"], TABLES["check_acknowledgements"]

    def work(conn: Connection) -> CheckSummary:
        standard_id = _standard_id(conn, standard, create=False)
        if standard_id is None:
            return CheckSummary(standard, 0, None, None, (), None)
        mine = r.c.standard_id == standard_id
        checks = conn.execute(select(func.count(func.distinct(r.c.check_id))).where(mine))
        count = int(checks.scalar() or 0)
        newest = conn.execute(
            select(r.c.check_id, r.c.checked_at)
            .where(mine)
            .order_by(r.c.checked_at.desc(), r.c.id.desc())
            .limit(1)
        ).first()
        broken: list[tuple[str, str]] = []
        if newest is not None:
            rows = conn.execute(
                select(r.c.quantity, r.c.rules)
                .where(mine, r.c.check_id == newest.check_id)
                .order_by(r.c.id)
            )
            broken = [(q, rule) for q, rules in rows for rule in _rules(rules)]
        ack = conn.execute(
            select(a)
            .where(a.c.standard_id == standard_id)
            .order_by(a.c.made_at.desc(), a.c.id.desc())
            .limit(1)
        ).first()
        return CheckSummary(
            standard,
            count,
            None if newest is None else newest.check_id,
            None if newest is None else newest.checked_at,
            tuple(broken),
            None if ack is None else _acknowledgement(ack, standard),
        )

    return db.read("reading a check standard's state", work)
