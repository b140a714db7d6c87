"""Lot statistics from the units' packed readings: one read of the chosen units, then numpy.

What ``acquire lot`` computes (:func:`acquire.report.statistics.lot_statistics`) needs every
chosen measurement's value, verdict and limits, per quantity in test order. One row per
measurement is a million rows for 100,000 units, and reading them costs more than the rest put
together; so each unit's row carries its readings packed (:mod:`acquire.store.packed_readings`,
written with the unit), and here the chosen units' rows are read in test order (the unit's test
time, ``finished_at``, else ``started_at``, else ``saved_at``, then its id: the order
``measurements.tested_at, unit_id`` holds, as the unit's rows are written from the same
values), grouped by layout, and each group's packed copies taken by numpy as one array. Per
quantity: counts, passes, the finite values in test order (a unit's measurements by ``seq``;
an invalid reading left out, so the moving ranges join the finite values on either side),
then mean, two-pass sum of squares, extremes and moving ranges exactly as
:mod:`acquire.store.quantity_summary` works them out, and the smallest, largest and median of
each stated limit. The failing checks come from the packed verdicts; the attempts per bin and
the retested serials from the units' indexes (:func:`acquire.store.lot_query.attempt_counts`).
All in one read transaction (REPEATABLE READ on PostgreSQL, so one snapshot).

When a chosen unit has no packed copy (NULL: a row the migration could not pack exactly), the
numbers come from the measurement rows instead (:func:`acquire.store.lot_query.outcome_counts`,
:func:`acquire.store.quantity_summary.quantity_rows`), never from a partial copy.
"""

from __future__ import annotations

from dataclasses import replace
from functools import partial
from typing import Any

import numpy as np
from sqlalchemy import Connection, and_, func, select, true

from acquire.errors import StoreError
from acquire.store.driver_read import compiled_sql
from acquire.store.engine import Database
from acquire.store.lot_query import (
    LotFilter,
    OutcomeCounts,
    _conditions,
    attempt_counts,
    counted,
    outcome_counts,
)
from acquire.store.packed_readings import (
    FLOAT_COLUMNS,
    NOT_FAILING_CODES,
    PASS_CODE,
    record_dtype,
    unpack_layout,
)
from acquire.store.quantity_summary import LIMIT_COLUMNS, QuantityRow, _numbers, quantity_rows
from acquire.store.schema import TABLES

#: A quantity: (parameter, frequency, si_unit).
Key = tuple[str, float | None, str]


def lot_numbers(db: Database, chosen: LotFilter) -> tuple[OutcomeCounts, list[QuantityRow]]:
    """The outcome counts and per quantity rows of the chosen units, as
    :func:`~acquire.store.lot_query.outcome_counts` and
    :func:`~acquire.store.quantity_summary.quantity_rows` give them."""
    found = db.read("summarising units", partial(_from_packed, chosen=chosen))
    if found is not None:
        return found
    return outcome_counts(db, chosen), quantity_rows(db, chosen)


def _from_packed(conn: Connection, chosen: LotFilter) -> Any:
    """(OutcomeCounts, quantity rows) from the packed copies; None when one is missing."""
    if conn.dialect.name == "postgresql":
        conn.exec_driver_sql("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ READ ONLY")
    terms = _conditions(conn, chosen, measurements=False)
    units = _read_units(conn, terms)
    if any(layout is None for _, layout, _ in units):
        return None
    per_bin, repeats = attempt_counts(conn, terms)
    sources, failing = _grouped(units)
    rows = {key: _quantity(key, parts) for key, parts in sources.items()}
    ordered = [rows[key] for key in _sorted_keys(conn, list(rows))]
    return counted(per_bin, repeats, failing), ordered


def _read_units(conn: Connection, terms: list[Any]) -> list[Any]:
    """(id, readings_layout, readings) of the chosen units in test order, by the driver."""
    u = TABLES["units"]
    query = (
        select(u.c.id, u.c.readings_layout, u.c.readings)
        .where(and_(true(), *terms))
        .order_by(func.coalesce(u.c.finished_at, u.c.started_at, u.c.saved_at), u.c.id)
    )
    sql, params = compiled_sql(conn, query)
    raw: Any = conn.connection.driver_connection
    cursor = raw.cursor(binary=True) if conn.dialect.name == "postgresql" else raw.cursor()
    try:
        cursor.execute(sql, params)
        return cursor.fetchall()
    finally:
        cursor.close()


def _grouped(units: list[Any]) -> tuple[dict[Key, list[tuple]], list[tuple]]:
    """Per quantity its sources (test ranks of a layout's units, position in the layout, the
    layout's packed records), and the failing measurements (parameter, frequency, unit id)."""
    by_layout: dict[str, tuple[list[int], list[int], list[bytes]]] = {}
    for rank, (unit_id, layout, readings) in enumerate(units):
        group = by_layout.get(layout)
        if group is None:
            group = by_layout[layout] = ([], [], [])
        group[0].append(rank)
        group[1].append(unit_id)
        group[2].append(readings)
    sources: dict[Key, list[tuple]] = {}
    failing: list[tuple] = []
    for layout, (ranks, ids, blobs) in by_layout.items():
        keys = unpack_layout(layout)
        if not keys:
            continue
        joined = b"".join(blobs)
        dtype = record_dtype(len(keys))
        if len(joined) != len(ids) * dtype.itemsize:
            raise StoreError("a unit's packed readings do not match their layout")
        records = np.frombuffer(joined, dtype)
        order = np.array(ranks)
        for position, key in enumerate(keys):
            sources.setdefault(key, []).append((order, position, records))
        bad = np.isin(records["verdict"], NOT_FAILING_CODES, invert=True)
        for unit, position in zip(*np.nonzero(bad), strict=True):
            failing.append((keys[position][0], keys[position][1], ids[unit]))
    return sources, failing


def _column(parts: list[tuple], name: str, order: Any) -> Any:
    """One packed column of a quantity, in test order (``order``: None when already)."""
    if order is None:
        _, position, records = parts[0]
        return records[name][:, position]
    joined = np.concatenate([records[name][:, position] for _, position, records in parts])
    return joined[order]


def _quantity(key: Key, parts: list[tuple]) -> QuantityRow:
    """The QuantityRow of ``key`` from its sources (see :func:`_grouped`)."""
    order = None
    if len(parts) > 1:
        ranks = np.concatenate([ranks for ranks, _, _ in parts])
        seqs = np.concatenate([np.full(ranks.size, position) for ranks, position, _ in parts])
        order = np.lexsort((seqs, ranks))
    values = _column(parts, "value", order)
    x = np.ascontiguousarray(values[~np.isnan(values)], dtype=float)
    passed = int(np.count_nonzero(_column(parts, "verdict", order) == PASS_CODE))
    spans: list[float | None] = []
    medians: dict[str, float | None] = {}
    for name in LIMIT_COLUMNS:
        stated = _column(parts, name, order)
        low, high = np.fmin.reduce(stated), np.fmax.reduce(stated)
        if np.isnan(low):
            spans += [None, None]
            medians[name] = None
            continue
        spans += [float(low), float(high)]
        medians[name] = float(low) if low == high else float(np.median(stated[~np.isnan(stated)]))
    row = _numbers(key, values.size, passed, x, spans)
    return replace(row, medians=medians)


def _sorted_keys(conn: Connection, keys: list[Key]) -> list[Key]:
    """``keys`` in the order ``ORDER BY parameter, frequency, si_unit`` gives them: on
    PostgreSQL sorted by the server (its collation, NULLs last), on SQLite here (text by its
    bytes, NULLs first)."""
    if conn.dialect.name != "postgresql" or len(keys) < 2:
        return sorted(keys, key=lambda k: (k[0], k[1] is not None, k[1] or 0.0, k[2]))
    ranks = conn.exec_driver_sql(
        "SELECT k FROM unnest(%(p)s::text[], %(f)s::float8[], %(s)s::text[]) "
        "WITH ORDINALITY AS t(p, f, s, k) ORDER BY p, f, s",
        {"p": [k[0] for k in keys], "f": [k[1] for k in keys], "s": [k[2] for k in keys]},
    ).scalars()
    return [keys[int(k) - 1] for k in ranks]


assert FLOAT_COLUMNS[1:] == LIMIT_COLUMNS, "the packed limits are in the summary's order"
