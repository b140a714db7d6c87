"""Selections of production units (a lot, a time window, a station, a test plan) and the SQL
that summarises them: per quantity counts, mean, two-pass standard deviation, extremes and the
mean moving range in test order; per serial the latest attempt's outcome, bin and failing checks;
and the measurements themselves in test order.

*Test order* is the order the units were tested (``finished_at``, or ``started_at`` for a unit
without an end time, or ``saved_at`` without either: the measurements' ``tested_at``), then the
unit's row id (so units tested at the same time keep the order they were stored in); a unit's
measurements by their sequence number. The per quantity numbers are in
:mod:`acquire.store.quantity_summary`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING, Any

from sqlalchemy import Connection, and_, case, func, or_, select, true
from sqlalchemy import text as sql_text

from acquire.errors import StoreError
from acquire.store.engine import Database
from acquire.store.records import PASS
from acquire.store.schema import FAILING_VERDICT, TABLES, identity_key

if TYPE_CHECKING:
    import pandas as pd

#: The frequency stored for a DC value.
DC = 0.0
#: Verdicts that do not count a check as failing: a pass, a conditional pass (inside the
#: tolerance, in the guard band; acquire.production.judgement) and "" (not judged).
NOT_FAILING = (PASS, "conditional pass", "")


@dataclass(frozen=True)
class LotFilter:
    """Which unit attempts a report covers; every field given narrows it (None: no condition).

    ``lot`` is a lot's name; ``since`` (inclusive) and ``until`` (exclusive) bound the time the
    unit was finished (timezone-aware); ``station`` is a station's name as recorded;
    ``plan_hash`` selects test plans whose SHA-256 hash starts with it or whose name equals it
    (so a name selects every stored version of that plan).
    """

    lot: str | None = None
    since: datetime | None = None
    until: datetime | None = None
    station: str | None = None
    plan_hash: str | None = None

    def __post_init__(self) -> None:
        for name in ("since", "until"):
            value = getattr(self, name)
            if value is not None and value.tzinfo is None:
                raise StoreError(f"{name} must be a timezone-aware time (give its UTC offset)")

    @property
    def empty(self) -> bool:
        """True when no condition is given (every unit of the store)."""
        return all(getattr(self, f) in (None, "") for f in self.__dataclass_fields__)

    def describe(self) -> dict[str, str]:
        """The conditions given, as text (for a file's head lines)."""
        out = {}
        for name in self.__dataclass_fields__:
            value = getattr(self, name)
            if value not in (None, ""):
                out[name] = value.isoformat() if isinstance(value, datetime) else str(value)
        return out


def _finished(u: Any = None):
    u = TABLES["units"] if u is None else u
    return func.coalesce(u.c.finished_at, u.c.started_at)


def _conditions(
    conn: Connection, chosen: LotFilter, measurements: bool, units: Any = None
) -> list[Any]:
    """WHERE terms on ``units`` (or its alias ``units``; and on ``measurements``' own lot
    column when ``measurements``)."""
    u = TABLES["units"] if units is None else units
    m = TABLES["measurements"]
    terms: list[Any] = []
    if chosen.lot is not None:
        lots = TABLES["lots"]
        key = identity_key(chosen.lot)
        lot_id = conn.execute(select(lots.c.id).where(lots.c.key == key)).scalar()
        if lot_id is None:
            raise StoreError(f"there is no lot {chosen.lot!r} in the store (check its name)")
        terms.append((m.c.lot_id if measurements else u.c.lot_id) == lot_id)
    if chosen.since is not None:
        terms.append(_finished(u) >= chosen.since)
    if chosen.until is not None:
        terms.append(_finished(u) < chosen.until)
    if chosen.station is not None:
        terms.append(u.c.station == chosen.station)
    if chosen.plan_hash is not None:
        plans = TABLES["plans"]
        text = chosen.plan_hash.strip()
        prefix = text.lower()
        query = select(plans.c.id).where(
            or_(plans.c.name == text, func.substr(plans.c.hash, 1, len(prefix)) == prefix)
        )
        ids = list(conn.execute(query).scalars()) if text else []
        if not ids:
            raise StoreError(
                f"no stored test plan has the name or hash {text!r} (give a name as stored, or "
                "the first characters of the plan's hash)"
            )
        terms.append(u.c.plan_id.in_(ids))
    return terms


def _measured(conn: Connection, chosen: LotFilter, *columns: Any) -> Any:
    """SELECT ``columns`` from the chosen units' measurements (joined to their units)."""
    u, m = TABLES["units"], TABLES["measurements"]
    query = select(*columns).select_from(m.join(u, u.c.id == m.c.unit_id))
    return query.where(and_(true(), *_conditions(conn, chosen, measurements=True)))


def limit_counts(db: Database, chosen: LotFilter, column: str) -> list[Any]:
    """(parameter, frequency, si_unit, limit, n): how many of the chosen measurements applied
    each stated value of limit ``column`` (low_limit, high_limit, tolerance_low or
    tolerance_high); open sides (NULL) left out."""
    m = TABLES["measurements"]
    keys = (m.c.parameter, m.c.frequency, m.c.si_unit, m.c[column])

    def work(conn: Connection) -> list[Any]:
        query = _measured(conn, chosen, *keys, func.count().label("n"))
        query = query.where(m.c[column].is_not(None)).group_by(*keys)
        return list(conn.execute(query).all())

    return db.read("reading limits", work)


@dataclass(frozen=True)
class OutcomeCounts:
    """Counts over the chosen attempts: ``attempts``; ``serials``; ``passed`` (serials whose
    latest attempt passed); ``first_pass`` (serials whose first attempt passed); ``bins`` (bin
    of each serial's latest attempt -> serials); ``failing`` ((parameter, frequency or None) ->
    serials whose latest attempt failed that check)."""

    attempts: int
    serials: int
    passed: int
    first_pass: int
    bins: dict[str, int]
    failing: dict[tuple[str, float | None], int]


#: Failing measurements, as ``ix_measurements_failing`` holds them (the index's own condition,
#: literal values, so that SQLite sees that the query asks for the index's rows).
FAILING_SQL = f"measurements.{FAILING_VERDICT}"


def outcome_counts(db: Database, chosen: LotFilter) -> OutcomeCounts:
    """Yields, bins and failing checks of the chosen attempts, counted per serial (first and
    latest attempt by attempt number, then row id, among those chosen).

    Most serials are tested once, and then their one attempt is both first and latest: the
    database counts every chosen attempt per bin and outcome, and lists the attempts of the
    few serials tested more than once (found on ``ix_units_lot_serial`` when a lot is chosen);
    those are ranked here and their attempts other than the first (or latest) taken off the
    counts. No window over every unit. The failing checks start from the failing measurements
    (``ix_measurements_failing``, few; named to SQLite, which without table statistics would
    rather read the covering test-order index, every row of it: 0.5 s against 0.14 s over
    100,000 units) and keep those of attempts that no later chosen attempt of the same serial
    follows (the ranked retests say which)."""
    u, m = TABLES["units"], TABLES["measurements"]

    def work(conn: Connection) -> OutcomeCounts:
        per_bin, repeats = attempt_counts(conn, _conditions(conn, chosen, measurements=False))
        failing = conn.execute(
            select(m.c.parameter, m.c.frequency, m.c.unit_id)
            .select_from(m.join(u, u.c.id == m.c.unit_id))
            .where(sql_text(FAILING_SQL), *_conditions(conn, chosen, measurements=True))
            .with_hint(m, "INDEXED BY ix_measurements_failing", dialect_name="sqlite")
        ).all()
        return counted(per_bin, repeats, failing)

    return db.read("counting outcomes", work)


def attempt_counts(conn: Connection, terms: list[Any]) -> tuple[Sequence[Any], Sequence[Any]]:
    """(bin, attempts, passing attempts) of the attempts chosen by ``terms`` (on ``units``),
    and the attempts of serials tested more than once among them (serial key, attempt, id,
    outcome, bin; in order), as :func:`outcome_counts` counts them."""
    u = TABLES["units"]
    chosen_units = and_(true(), *terms)
    per_bin = conn.execute(
        select(u.c.bin, func.count(), func.count(case((u.c.outcome == PASS, 1))))
        .where(chosen_units)
        .group_by(u.c.bin)
        .order_by(u.c.bin)
    ).all()
    retested = (
        select(u.c.serial_key).where(chosen_units).group_by(u.c.serial_key).having(func.count() > 1)
    )
    repeats = conn.execute(
        select(u.c.serial_key, u.c.attempt, u.c.id, u.c.outcome, u.c.bin)
        .where(chosen_units, u.c.serial_key.in_(retested))
        .order_by(u.c.serial_key, u.c.attempt, u.c.id)
    ).all()
    return per_bin, repeats


def counted(
    per_bin: Sequence[Any], repeats: Sequence[Any], failing: Sequence[Any]
) -> OutcomeCounts:
    """OutcomeCounts from (bin, attempts, passing attempts) of every chosen attempt, the
    attempts of serials tested more than once (serial key, attempt, id, outcome, bin; in
    order) and the failing measurements of every chosen attempt (parameter, frequency, unit
    id), of which those of a serial's latest attempt count, once a unit and check."""
    latest = {str(b): int(n) for b, n, _ in per_bin}
    attempts = sum(latest.values())
    passing = sum(int(p) for *_, p in per_bin)
    serials, passed, first_pass = attempts, passing, passing
    earlier: set[int] = set()
    for k, row in enumerate(repeats):
        is_first = k == 0 or repeats[k - 1][0] != row[0]
        is_latest = k == len(repeats) - 1 or repeats[k + 1][0] != row[0]
        passes = row[3] == PASS
        if not is_first:
            serials -= 1
            first_pass -= passes
        if not is_latest:
            latest[str(row[4])] -= 1
            passed -= passes
            earlier.add(int(row[2]))
    checks: dict[tuple[str, float | None], int] = {}
    for p, f, unit_id in sorted({tuple(row) for row in failing}):
        if unit_id not in earlier:
            key = (p, None if f == DC else f)
            checks[key] = checks.get(key, 0) + 1
    return OutcomeCounts(
        attempts,
        serials,
        passed,
        first_pass,
        {name: n for name, n in latest.items() if n},
        checks,
    )


#: Columns of :func:`measurement_rows`, unit columns first.
UNIT_COLUMNS: tuple[str, ...] = (
    "lot",
    "serial",
    "attempt",
    "attempt_id",
    "station",
    "operator",
    "plan",
)
UNIT_COLUMNS += ("plan_hash", "outcome", "bin", "started_at", "finished_at")
UNIT_COLUMNS += ("reference_override", "temperature")
MEASUREMENT_COLUMNS: tuple[str, ...] = (
    "seq",
    "parameter",
    "frequency",
    "unit",
    "value",
    "uncertainty",
)
MEASUREMENT_COLUMNS += ("low_limit", "high_limit", "tolerance_low", "tolerance_high", "verdict")


def measurement_rows(
    db: Database,
    chosen: LotFilter,
    parameter: str | None = None,
    frequency: float | None = None,
) -> pd.DataFrame:
    """The chosen units' measurements, a row each (:data:`UNIT_COLUMNS` then
    :data:`MEASUREMENT_COLUMNS`), in test order; only quantity ``parameter`` at ``frequency``
    (None: DC) when ``parameter`` is given. ``frequency`` is NaN for DC values, ``value`` NaN
    for an invalid reading and infinite for an overrange one, a limit NaN for an open side.
    Without ``parameter``, an attempt with no measurements (an error before the first) is one
    row whose measurement columns are empty (``seq`` <NA>, texts None)."""
    import numpy as np
    import pandas as pd

    u, m, lots, plans = TABLES["units"], TABLES["measurements"], TABLES["lots"], TABLES["plans"]
    columns = [
        func.coalesce(lots.c.name, "").label("lot"),
        *(u.c[n] for n in ("serial", "attempt", "attempt_id", "station", "operator")),
        func.coalesce(plans.c.name, "").label("plan"),
        func.coalesce(plans.c.hash, "").label("plan_hash"),
        *(u.c[n] for n in ("outcome", "bin", "started_at", "finished_at")),
        *(u.c[n] for n in ("reference_override", "temperature")),
        m.c.seq,
        m.c.parameter,
        m.c.frequency,
        m.c.si_unit.label("unit"),
        m.c.value,
        m.c.value_special,
        *(m.c[n] for n in ("uncertainty", "low_limit", "high_limit")),
        *(m.c[n] for n in ("tolerance_low", "tolerance_high", "verdict")),
    ]

    def work(conn: Connection) -> list[Any]:
        joined = (
            u.outerjoin(m, u.c.id == m.c.unit_id)
            .outerjoin(lots, lots.c.id == u.c.lot_id)
            .outerjoin(plans, plans.c.id == u.c.plan_id)
        )
        query = select(*columns).select_from(joined)
        query = query.where(and_(true(), *_conditions(conn, chosen, measurements=False)))
        if parameter is not None:
            f = DC if frequency is None else float(frequency)
            query = query.where(m.c.parameter == parameter, m.c.frequency == f)
        tested = func.coalesce(u.c.finished_at, u.c.started_at, u.c.saved_at)
        return list(conn.execute(query.order_by(tested, u.c.id, m.c.seq)).all())

    rows = db.read("reading measurements", work)
    frame = pd.DataFrame([tuple(r) for r in rows], columns=[c.name for c in columns])
    special = frame.pop("value_special").fillna("")
    frame["seq"] = frame["seq"].astype("Int64")
    floats = ["frequency", "value", "uncertainty", "low_limit", "high_limit"]
    floats += ["tolerance_low", "tolerance_high", "temperature"]
    for name in floats:
        frame[name] = pd.to_numeric(frame[name], errors="coerce").astype(float)
    given = special.astype(str) != ""
    if given.any():
        frame.loc[given, "value"] = [float(s) for s in special[given]]
    frame["frequency"] = frame["frequency"].where(frame["frequency"] != DC, np.nan)
    return frame[list(UNIT_COLUMNS + MEASUREMENT_COLUMNS)]
