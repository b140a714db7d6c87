"""Per quantity numbers of a selection of units, read from the test-order index.

Each quantity's finite values are read in test order (the unit's test time, then the unit's
row id, then the measurement's sequence number), which is the order of
``ix_measurements_lot_order``, and mean, the sum of squared deviations from that mean (a second
pass over the values, so a large mean does not eat the digits of a small spread), extremes and
moving ranges are worked out with numpy on them: the same numbers whichever database. An
invalid reading is skipped, so the moving ranges join the finite values on either side of it.
Units tested at the same time keep the order they were stored in (row id). How the values and
the counts (measurements, finite values, passes; the smallest and largest of each stated limit)
come out of the database differs, each the fastest found for it over a 100,000-unit lot:

- PostgreSQL: one grouped query gives the counts and, per quantity, its finite values as one
  byte string (``string_agg`` of ``float8send``: each value's 8 bytes, IEEE 754 in network
  order, in test order), which numpy reads in place; a result of a row per quantity instead of
  a row per value.
- SQLite, a lot chosen: first the lot's quantities, one index seek each (with one row's limits
  as a reference), then per quantity one pass over its part of the index counts it and counts
  the rows whose limits differ from the reference (the smallest and largest limits are only
  worked out, in a second pass over that quantity, when some do), then the values are read.
- SQLite, other selections: one grouped query for the counts and limits, then the values.

The SQLite values are read by the driver straight into numpy (:mod:`acquire.store.driver_read`)
and the counts split them by quantity; all queries of a summary run in one read transaction
(on PostgreSQL the statements of a summary share one snapshot, REPEATABLE READ).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlalchemy import Connection, LargeBinary, and_, case, func, literal, or_, select, true, tuple_

from acquire.store.driver_read import read_floats
from acquire.store.engine import Database
from acquire.store.lot_query import LotFilter, _conditions
from acquire.store.records import PASS
from acquire.store.schema import TABLES

#: The limit columns, as :attr:`QuantityRow.limits` names them.
LIMIT_COLUMNS = ("low_limit", "high_limit", "tolerance_low", "tolerance_high")
_m = TABLES["measurements"]
#: Test order within a quantity (the tail of ``ix_measurements_lot_order``).
TEST_ORDER = (_m.c.tested_at, _m.c.unit_id, _m.c.seq)
_KEYS = (_m.c.parameter, _m.c.frequency, _m.c.si_unit)
_FINITE = and_(_m.c.value_special == "", _m.c.value.is_not(None))
# On SQLite the same condition in a form its planner does not treat as "value_special is
# constant": SQLite then reads the whole ordered query from the index, with no sort. Not on
# PostgreSQL, whose planner, not seeing an index condition in length(), sorts the lot's
# measurements instead (EXPLAIN ANALYZE on a 100,000-unit lot: 1.6 s against 0.3 s).
_SQLITE_FINITE = and_(func.length(_m.c.value_special) == 0, _m.c.value.is_not(None))
_COUNTS = (func.count(), func.count(case((_m.c.verdict == PASS, 1))))
_SPANS = tuple(f(_m.c[n]) for n in LIMIT_COLUMNS for f in (func.min, func.max))


@dataclass(frozen=True)
class QuantityRow:
    """One quantity (``parameter``, ``frequency`` (0 for DC), ``si_unit``) of a selection:
    ``count`` measurements, ``valid`` finite, ``passed`` with verdict "pass"; over the finite
    values ``mean``, ``ss`` (sum of squared deviations from the mean), ``min``, ``max`` (None
    with none), ``mr_sum`` and ``mr_count`` (moving ranges in test order); ``limits``: per limit
    column the smallest and largest value stated (both None when none is); ``medians``: per
    limit column the median of the values stated (None when none is), when the reader had them
    at hand (None: ask :func:`acquire.store.lot_query.limit_counts`)."""

    parameter: str
    frequency: float
    si_unit: str
    count: int
    valid: int
    passed: int
    mean: float | None
    ss: float | None
    min: float | None
    max: float | None
    mr_sum: float
    mr_count: int
    limits: dict[str, tuple[float | None, float | None]]
    medians: dict[str, float | None] | None = None


def _numbers(key: Any, count: int, passed: int, x: Any, spans: Any) -> QuantityRow:
    """The QuantityRow of quantity ``key`` from its counts, its finite values ``x`` in test
    order and ``spans`` (smallest, largest, per limit column)."""
    import numpy as np

    mean = float(x.mean()) if x.size else None
    ss = float(np.sum((x - mean) ** 2)) if mean is not None else None
    ranges = np.abs(np.diff(x))
    limits = {name: (spans[2 * k], spans[2 * k + 1]) for k, name in enumerate(LIMIT_COLUMNS)}
    return QuantityRow(
        key[0], key[1], key[2], int(count), int(x.size), int(passed), mean, ss,
        float(x.min()) if x.size else None, float(x.max()) if x.size else None,
        float(ranges.sum()), int(ranges.size), limits,
    )  # fmt: skip


def _source(conn: Connection, chosen: LotFilter) -> tuple[Any, list[Any]]:
    """(FROM clause, WHERE terms): the measurements alone when only a lot is chosen."""
    u, m = TABLES["units"], TABLES["measurements"]
    terms = _conditions(conn, chosen, measurements=True)
    only_lot = all(getattr(chosen, n) is None for n in ("since", "until", "station", "plan_hash"))
    return (m if only_lot else m.join(u, u.c.id == m.c.unit_id)), terms


def quantity_rows(db: Database, chosen: LotFilter) -> list[QuantityRow]:
    """Per (parameter, frequency, unit) of the chosen units' measurements (every attempt), as
    :class:`QuantityRow`, ordered by parameter, frequency, unit."""

    def work(conn: Connection) -> list[QuantityRow]:
        if conn.dialect.name == "postgresql":
            return _postgres(conn, chosen)
        source, terms = _source(conn, chosen)
        if source is _m:
            return _sqlite_lot(conn, and_(true(), *terms))
        return _grouped(conn, source, and_(true(), *terms))

    return db.read("summarising units", work)


def _postgres(conn: Connection, chosen: LotFilter) -> list[QuantityRow]:
    """One grouped query: counts, limits and each quantity's values as bytes in test order."""
    import numpy as np
    from sqlalchemy.dialects.postgresql import aggregate_order_by

    # One snapshot for every statement (READ COMMITTED takes one a statement); compiling the
    # plan to machine code costs more than it saves on one pass; each quantity's values are
    # sorted in memory (presorted by the index, so one look at each), not on disk.
    conn.exec_driver_sql("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ READ ONLY")
    conn.exec_driver_sql("SET LOCAL jit = off")
    conn.exec_driver_sql("SET LOCAL work_mem = '64MB'")
    source, terms = _source(conn, chosen)
    packed = func.string_agg(
        func.float8send(_m.c.value),
        aggregate_order_by(literal(b"", LargeBinary), *TEST_ORDER),
        type_=LargeBinary,
    ).filter(_FINITE)
    rows = conn.execute(
        select(*_KEYS, *_COUNTS, *_SPANS, packed)
        .select_from(source)
        .where(and_(true(), *terms))
        .group_by(*_KEYS)
        .order_by(*_KEYS)
    ).all()
    out = []
    for row in rows:
        x = np.frombuffer(row[-1] or b"", ">f8").astype(float)
        out.append(_numbers(row[:3], row[3], row[4], x, row[5:-1]))
    return out


def _sqlite_lot(conn: Connection, where: Any) -> list[QuantityRow]:
    """A lot on SQLite: its quantities by index seeks, then a pass over each one's rows."""
    found: list[tuple[Any, ...]] = []
    counted = []
    while True:
        after = [tuple_(*_KEYS) > tuple_(*found[-1][:3])] if found else []
        first = conn.execute(
            select(*_KEYS, *(_m.c[n] for n in LIMIT_COLUMNS))
            .where(where, *after)
            .order_by(*_KEYS)
            .limit(1)
        ).first()
        if first is None:
            break
        found.append(tuple(first))
        key, reference = tuple(first[:3]), first[3:]
        same_key = and_(*(c == v for c, v in zip(_KEYS, key, strict=True)))
        differs = or_(
            *(_m.c[n].is_distinct_from(v) for n, v in zip(LIMIT_COLUMNS, reference, strict=True))
        )
        count, passed, finite, odd = conn.execute(
            select(
                *_COUNTS,
                func.count(case((_SQLITE_FINITE, 1))),
                func.count(case((differs, 1))),
            ).where(where, same_key)
        ).one()
        if odd:
            spans = tuple(conn.execute(select(*_SPANS).where(where, same_key)).one())
        else:
            spans = tuple(v for v in reference for _ in range(2))
        counted.append((key, count, passed, finite, spans))
    values = (
        select(_m.c.value)
        .where(where, _SQLITE_FINITE)
        .order_by(*_KEYS, _m.c.value_special, *TEST_ORDER)
    )
    return _split(conn, values, counted)


def _grouped(conn: Connection, source: Any, where: Any) -> list[QuantityRow]:
    """Any other selection on SQLite: one grouped query for the counts, then the values."""
    rows = conn.execute(
        select(*_KEYS, *_COUNTS, func.count(case((_SQLITE_FINITE, 1))), *_SPANS)
        .select_from(source)
        .where(where)
        .group_by(*_KEYS)
        .order_by(*_KEYS)
    ).all()
    counted = [(tuple(r[:3]), r[3], r[4], r[5], tuple(r[6:])) for r in rows]
    values = (
        select(_m.c.value)
        .select_from(source)
        .where(where, _SQLITE_FINITE)
        .order_by(*_KEYS, _m.c.value_special, *TEST_ORDER)
    )
    return _split(conn, values, counted)


def _split(conn: Connection, values: Any, counted: list[tuple[Any, ...]]) -> list[QuantityRow]:
    """Read ``values`` (every quantity's finite values, quantity after quantity) and split
    them by the finite counts of ``counted`` ((key, count, passed, finite, spans) each)."""
    import numpy as np

    every = read_floats(conn, values, sum(int(c[3]) for c in counted))
    ends = np.cumsum([int(c[3]) for c in counted], dtype=int)
    return [
        _numbers(key, count, passed, every[end - int(n) : end], spans)
        for (key, count, passed, n, spans), end in zip(counted, ends, strict=True)
    ]
