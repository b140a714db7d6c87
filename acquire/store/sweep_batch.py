"""A sweep batch as the database driver takes it: the SQL written once per parameter style,
and the rows built column by column with numpy (:func:`batch_table`).

The statements are plain SQL, given to ``Connection.exec_driver_sql`` by
:class:`acquire.store.sweeps.SweepWriter` (nothing compiled per batch, no dict per row;
SQLAlchemy still wraps the driver's errors, so a store that is out of reach is reported as one)
and the sweep row's update in the usual case to :mod:`sqlite3` by
:class:`acquire.store.sqlite_sweeps.PlainSweepWriter` too; the points go to the driver's
``executemany`` on the usual path and, on the plain path, many rows to an INSERT (the batch's
:func:`point_table` read row after row). NaN is sent as None, so the rows stored are those an
INSERT built with SQLAlchemy Core stores (``tests/test_store_sweep_rows.py``).
This module imports no SQLAlchemy.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import cache
from itertools import repeat
from typing import Any

import numpy as np

from acquire.errors import StoreError
from acquire.store.run_writer import RunWriter


class SweepNotRunning(StoreError):
    """The sweep was finished or closed as abandoned: writing to it again cannot succeed."""


#: The numeric columns of a sweep point, as ``sweep_points`` returns them (then ``flags``).
POINT_COLUMNS = ("frequency", "raw_r", "raw_x", "corrected_r", "corrected_x", "u_r", "u_x")


def _marks(paramstyle: str, count: int) -> list[str]:
    mark = {"qmark": "?", "format": "%s", "pyformat": "%s", "numeric": ":{}"}.get(paramstyle)
    if mark is None:
        raise StoreError(f"the database driver's parameter style {paramstyle!r} is not supported")
    return [mark.format(i + 1) for i in range(count)]


@cache
def advance_text(paramstyle: str) -> str:
    """The sweep row's update of a batch in the usual case: the store holds exactly the points
    this writer counts and the sweep still runs. It moves the count and the writer's heartbeat
    in one statement, written once in the driver's own parameter style (parameters: the new
    count, the time as :func:`time_value` gives it, the sweep's id, the count before); when it
    changes no row, the batch takes the careful way (a batch sent again, or a sweep no longer
    running)."""
    end, now, sweep, start = _marks(paramstyle, 4)
    return (
        f"UPDATE sweeps SET points = {end}, last_write_at = {now} "
        f"WHERE sweeps.id = {sweep} AND sweeps.status = 'running' AND sweeps.points = {start}"
    )


#: The columns of a sweep point row, in the order ``SweepWriter.add_points`` sends them.
ROW_COLUMNS = ("sweep_id", "idx", *POINT_COLUMNS, "flags")


@cache
def insert_text(paramstyle: str) -> str:
    """The INSERT of one point row in the driver's own parameter style, given all rows at once
    to the driver's ``executemany`` (no statement compiled per batch, no dict per row)."""
    marks = ", ".join(_marks(paramstyle, len(ROW_COLUMNS)))
    return f"INSERT INTO sweep_points ({', '.join(ROW_COLUMNS)}) VALUES ({marks})"


def point_table(
    sweep_id: int,
    start: int,
    f: np.ndarray,
    raw: np.ndarray,
    cor: np.ndarray,
    u: np.ndarray,
    marks: list[str],
) -> np.ndarray:
    """The rows of a batch as an ``(n, len(ROW_COLUMNS))`` array of Python objects in
    :data:`ROW_COLUMNS` order, built column by column with numpy: Python ints, floats and
    strings, NaN as None (stored as NULL) and infinity kept, in every column but the frequency.
    C-ordered, so ``table.ravel()`` holds the rows' values one row after another."""
    n = f.size
    numbers = np.empty((n, len(POINT_COLUMNS) - 1))
    numbers[:, 0], numbers[:, 1] = raw.real, raw.imag
    numbers[:, 2], numbers[:, 3] = cor.real, cor.imag
    numbers[:, 4:] = u
    table = np.empty((n, len(ROW_COLUMNS)), dtype=object)
    table[:, 0] = sweep_id
    table[:, 1] = range(start, start + n)
    table[:, 2] = f
    values = table[:, 3:-1]
    values[...] = numbers
    missing = np.isnan(numbers)
    if missing.any():
        values[missing] = None
    table[:, -1] = marks
    return table


def point_rows(table: np.ndarray) -> list[tuple[Any, ...]]:
    """The rows of :func:`point_table` as tuples, as a driver's ``executemany`` takes them."""
    return list(map(tuple, table.tolist()))


def check_uncertainty(uncertainty: np.ndarray | None, n: int) -> np.ndarray:
    if uncertainty is None:
        return np.full((n, 2), np.nan)
    u = np.asarray(uncertainty, dtype=float)
    if u.shape != (n, 2):
        raise StoreError(
            f"the uncertainty of {n} sweep points must be an array of shape ({n}, 2) "
            f"(U of R and of X per point), not {u.shape}"
        )
    return u


def check_flags(flags: Sequence[str] | None, n: int) -> list[str]:
    if flags is None:
        return [""] * n
    if isinstance(flags, str):
        raise StoreError("give the flags of sweep points as one string per point, not one string")
    marks = list(flags)
    if len(marks) != n or not all(map(isinstance, marks, repeat(str))):
        raise StoreError(f"give the flags of {n} sweep points as {n} strings ('' for none)")
    return marks


def batch_table(
    sweep_id: int,
    start: int,
    frequency: np.ndarray,
    raw_z: np.ndarray,
    corrected_z: np.ndarray | None,
    uncertainty: np.ndarray | None,
    flags: Sequence[str] | None,
) -> np.ndarray:
    """A batch given to a sweep writer's ``add_points``, checked, as the rows that store it
    (points ``start``, ``start + 1``, ...; :func:`point_table`); StoreError for arrays that do
    not fit together."""
    f = np.atleast_1d(np.asarray(frequency, dtype=float))
    raw = np.atleast_1d(np.asarray(raw_z, dtype=complex))
    if corrected_z is None:
        cor = np.full(raw.shape, complex(np.nan, np.nan))
    else:
        cor = np.atleast_1d(np.asarray(corrected_z, dtype=complex))
    if f.ndim != 1 or raw.shape != f.shape or cor.shape != f.shape:
        raise StoreError(
            f"sweep points need matching 1-D arrays, got frequency {f.shape}, "
            f"raw {raw.shape}, corrected {cor.shape}"
        )
    u = check_uncertainty(uncertainty, f.size)
    marks = check_flags(flags, f.size)
    return point_table(sweep_id, start, f, raw, cor, u, marks)


def not_running(sweep_id: int) -> SweepNotRunning:
    """The refusal of a batch for a sweep the store no longer holds running."""
    return SweepNotRunning(
        f"sweep {sweep_id} is no longer running in the store (it was finished or "
        "closed as abandoned): begin a new sweep"
    )


def other_writer(sweep_id: int, have: int, start: int) -> StoreError:
    """The refusal of a batch when the store holds a count this writer cannot have made."""
    return StoreError(
        f"sweep {sweep_id} holds {have} points in the store, but this writer "
        f"counts {start}: another program writes to it; begin a new sweep"
    )


#: How a sweep may end (``schema.SWEEP_STATES`` after ``running``).
END_STATES = ("complete", "interrupted")


def check_end(sweep_id: int, status: str, finished: str | None) -> None:
    """Refuse an end status a sweep cannot have, or a second end."""
    if status not in END_STATES:
        raise StoreError(f"a sweep finishes as 'complete' or 'interrupted', not {status!r}")
    if finished is not None:
        raise StoreError(f"sweep {sweep_id} is already {finished}")


class SweepWriterBase(RunWriter):
    """What both sweep writers do alike (:class:`acquire.store.sweeps.SweepWriter` through
    SQLAlchemy, :class:`acquire.store.sqlite_sweeps.PlainSweepWriter` through :mod:`sqlite3`):
    the checks, the batch's rows, the count and the end. A subclass says how a batch is stored
    (``_store_rows``, given the batch's :func:`point_table` as ``_rows`` makes it ready: the new
    count) and how the sweep row is ended (``_mark_end``: True when the sweep is, or already
    was, ended so)."""

    @property
    def points(self) -> int:
        """How many points this writer has stored."""
        return self._count

    @property
    def finished(self) -> str | None:
        """The status the sweep was finished with, or None while it runs."""
        return self._finished

    def add_points(
        self,
        frequency: np.ndarray,
        raw_z: np.ndarray,
        corrected_z: np.ndarray | None = None,
        uncertainty: np.ndarray | None = None,
        flags: Sequence[str] | None = None,
    ) -> None:
        """Store a batch of points (Hz, complex ohm) in one transaction.

        ``corrected_z`` may be None when no reference set is applied; NaN readings are stored as
        NULL, overrange (infinite) ones as infinity. ``uncertainty`` is an (n, 2) array of the
        expanded uncertainty (k = 2, ohm) of the corrected R and X, or None when unknown;
        ``flags`` is one string per point ('' for a measured value, else comma-separated words
        such as ``overrange``), or None for all ''.
        """
        if self._finished is not None:
            raise StoreError(f"sweep {self._id} is already {self._finished}: begin a new sweep")
        start = self._count
        table = batch_table(self._id, start, frequency, raw_z, corrected_z, uncertainty, flags)
        if len(table):
            self._count = self._store_rows(start, self._rows(table))

    def finish(self, status: str = "complete", note: str = "") -> None:
        """Mark the sweep ``complete`` or ``interrupted`` (with an optional note)."""
        check_end(self._id, status, self._finished)
        if not self._mark_end(status, note):
            raise SweepNotRunning(f"sweep {self._id} was no longer running in the store")
        self._finished = status

    def _end(self, status: str, note: str) -> None:
        self.finish(status, note=note)

    def _rows(self, table: np.ndarray) -> Any:
        """A batch's rows as ``_store_rows`` takes them: tuples, for ``executemany``."""
        return point_rows(table)

    def _store_rows(self, start: int, rows: Any) -> int:
        raise NotImplementedError

    def _mark_end(self, status: str, note: str) -> bool:
        raise NotImplementedError
