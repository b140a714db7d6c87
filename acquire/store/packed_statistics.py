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
from operator import itemgetter
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
    groups = _groups(_read_units(conn, terms))
    if groups is None:
        return None
    per_bin, repeats = attempt_counts(conn, terms)
    sources: dict[Key, list[tuple[_Group, int]]] = {}
    failing: list[tuple] = []
    for group in groups:
        for position, key in enumerate(group.keys):
            sources.setdefault(key, []).append((group, position))
        failing += group.failing
    rows = {key: _quantity(key, parts) for key, parts in sources.items()}
    ordered = [rows[key] for key in _sorted_keys(conn, list(rows))]
    return counted(per_bin, repeats, failing), ordered


def _read_units(conn: Connection, terms: list[Any]) -> list[Any]:
    """(id, readings_layout, readings) of the chosen units in test order, by the driver (on
    ``ix_units_lot_order`` when a lot is chosen: no sort)."""
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


class _Group:
    """The chosen units of one layout: their quantities ``keys`` (in ``seq`` order), test
    ``ranks``; per position its values (one contiguous array a position, in test order), the
    packed records (for other columns), its passes and the smallest and largest of each limit
    (NaN: none stated); and the failing measurements (parameter, frequency, unit id)."""

    def __init__(self, layout: str, ranks: Any, ids: Any, blobs: Any) -> None:
        self.keys = unpack_layout(layout)
        n = len(self.keys)
        dtype = record_dtype(n)
        joined = b"".join(blobs)
        if len(joined) != len(ids) * dtype.itemsize:
            raise StoreError("a unit's packed readings do not match their layout")
        self.ranks = ranks
        self.records = np.frombuffer(joined, dtype)
        self.values = np.ascontiguousarray(self.records["value"].T)
        # The four limit arrays side by side (they follow each other in a record): one pass.
        limits = np.ndarray(
            (len(ids), 4 * n), "<f8", joined, offset=8 * n, strides=(dtype.itemsize, 8)
        )
        low, high = np.fmin.reduce(limits, axis=0), np.fmax.reduce(limits, axis=0)
        self.low = {c: low[k * n : (k + 1) * n] for k, c in enumerate(LIMIT_COLUMNS)}
        self.high = {c: high[k * n : (k + 1) * n] for k, c in enumerate(LIMIT_COLUMNS)}
        verdicts = np.array(self.records["verdict"])
        self.passed = np.count_nonzero(verdicts == PASS_CODE, axis=0)
        bad = np.nonzero(np.isin(verdicts, NOT_FAILING_CODES, invert=True))
        self.failing = [(*self.keys[p][:2], ids[k]) for k, p in zip(*bad, strict=True)]

    def column(self, name: str, position: int) -> Any:
        return self.records[name][:, position]


def _groups(units: list[Any]) -> list[_Group] | None:
    """The chosen units (id, layout, readings; in test order) by layout; None when a unit has
    no packed copy."""
    ids = list(map(itemgetter(0), units))
    layouts = list(map(itemgetter(1), units))
    blobs = list(map(itemgetter(2), units))
    codes: dict[str | None, int] = {}
    of_unit = [codes.setdefault(layout, len(codes)) for layout in layouts]
    if None in codes:
        return None
    if len(codes) == 1:
        return [_Group(layouts[0], np.arange(len(ids)), ids, blobs)] if layouts[0] != "[]" else []
    which = np.array(of_unit)
    groups = []
    for layout, code in codes.items():
        if layout == "[]":
            continue
        members = np.flatnonzero(which == code)
        picked = [blobs[k] for k in members]
        groups.append(_Group(str(layout), members, [ids[k] for k in members], picked))
    return groups


def _quantity(key: Key, parts: list[tuple[_Group, int]]) -> QuantityRow:
    """The QuantityRow of ``key`` from its sources (a group and a position in its layout)."""
    if len(parts) == 1:
        group, position = parts[0]
        values = group.values[position]
    else:
        ranks = np.concatenate([g.ranks for g, _ in parts])
        seqs = np.concatenate([np.full(g.ranks.size, p) for g, p in parts])
        order = np.lexsort((seqs, ranks))
        values = np.concatenate([g.values[p] for g, p in parts])[order]
    x = values[~np.isnan(values)]
    passed = sum(int(g.passed[p]) for g, p in parts)
    spans: list[float | None] = []
    medians: dict[str, float | None] = {}
    for name in LIMIT_COLUMNS:
        low = np.fmin.reduce([g.low[name][p] for g, p in parts])
        high = np.fmax.reduce([g.high[name][p] for g, p in parts])
        if np.isnan(low):
            spans += [None, None]
            medians[name] = None
            continue
        spans += [float(low), float(high)]
        if low == high:
            medians[name] = float(low)
            continue
        stated = np.concatenate([g.column(name, p) for g, p in parts])
        medians[name] = float(np.median(stated[~np.isnan(stated)]))
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
