"""Sweeps in the store: a header row and one row per point, streamed in batches as they arrive.

A :class:`SweepWriter` is made by ``Store.begin_sweep``; each ``add_points`` call is one
transaction, so a crash loses at most the batch being written and never leaves half a batch.
``finish`` marks the sweep ``complete`` or ``interrupted``.

A sweep whose writing process died keeps ``running`` in its row (nothing could mark it). The
store *reports* it as ``interrupted`` (``SweepInfo.abandoned`` is True, ``recorded_status``
stays ``running``) as soon as it can tell the writer is gone: the process that began it (host
name and process id are recorded) no longer exists on this host, or no batch has arrived for
``stale_after`` seconds (default one hour; this is the only test across hosts, and on Windows).
``Store.close_abandoned_sweeps`` writes that conclusion into the rows; opening a store writes
it for the sweeps whose process is known to be dead on this host (:func:`close_dead_writers`).

A batch is safe to send again: when the store committed a batch but its answer was lost (a
network cut at the wrong moment), the next ``add_points`` starting at the same point stores only
the points the store does not hold yet, so a writer that keeps points in memory and retries
(:mod:`acquire.sweep_saving`) never stores a point twice.

A batch is two statements in its transaction in the usual case: one update of the sweep's row
(its point count and the writer's heartbeat, only while it runs and holds exactly the points
the writer counts) and the points' ``executemany``; any other case is looked at with a locked
read of the row first.
"""

from __future__ import annotations

import os
import socket
from datetime import datetime
from functools import cache, partial
from typing import TYPE_CHECKING, Any

import numpy as np
from sqlalchemy import Connection, Select, bindparam, func, select, update

from acquire.errors import StoreError
from acquire.store.abandoned import close_dead_writers as close_dead_writers
from acquire.store.abandoned import rows_changed, writer_gone
from acquire.store.engine import Database, to_json
from acquire.store.records import SweepInfo
from acquire.store.schema import TABLES, utc_now
from acquire.store.sweep_batch import POINT_COLUMNS as POINT_COLUMNS
from acquire.store.sweep_batch import SweepNotRunning as SweepNotRunning
from acquire.store.sweep_batch import (
    SweepWriterBase,
    advance_text,
    insert_text,
    not_running,
    other_writer,
)

if TYPE_CHECKING:
    import pandas as pd

#: Seconds without a write after which a running sweep is taken as abandoned.
STALE_AFTER_S = 3600.0


def begin_sweep(
    db: Database,
    dut: str = "",
    meter_id: int | None = None,
    fixture_id: int | None = None,
    reference_set_id: int | None = None,
    settings: dict[str, Any] | None = None,
) -> SweepWriter:
    """Record a new running sweep and return the writer for its points."""
    try:
        to_json(settings)
    except (TypeError, ValueError) as exc:
        raise StoreError(f"the sweep settings cannot be stored as JSON: {exc}") from None
    sweeps = TABLES["sweeps"]
    now = utc_now()
    row = {
        "dut": dut,
        "meter_id": meter_id,
        "fixture_id": fixture_id,
        "reference_set_id": reference_set_id,
        "settings": settings,
        "status": "running",
        "note": "",
        "points": 0,
        "started_at": now,
        "last_write_at": now,
        "writer_host": socket.gethostname(),
        "writer_pid": os.getpid(),
    }
    sweep_id = db.write(
        "starting a sweep",
        lambda c: c.execute(sweeps.insert().returning(sweeps.c.id), row).scalar_one(),
    )
    return SweepWriter(db, sweep_id)


@cache
def held_points() -> Select:
    """The careful way's locked read of the points a running sweep holds (``sweep``: its id)."""
    sweeps = TABLES["sweeps"]
    return (
        select(sweeps.c.points)
        .where(sweeps.c.id == bindparam("sweep"), sweeps.c.status == "running")
        .with_for_update()
    )


@cache
def _time_processor(dialect: Any) -> Any:
    column = TABLES["sweeps"].c.last_write_at
    return column.type.dialect_impl(dialect).bind_processor(dialect)


def time_value(dialect: Any, when: datetime) -> Any:
    """``when`` as the driver's parameter for ``sweeps.last_write_at``: the column's own bind
    processing (UTC; SQLAlchemy's text format on SQLite), as a Core statement would send it."""
    process = _time_processor(dialect)
    return when if process is None else process(when)


class SweepWriter(SweepWriterBase):
    """Streams the points of one sweep into the store; finish it, or use it as a context manager
    (a normal exit finishes it ``complete``, an exception ``interrupted``)."""

    def _store_rows(self, start: int, rows: list[tuple]) -> int:
        count = len(rows)
        sweep_id = self._id

        def work(conn: Connection) -> int:
            now = utc_now()
            dialect = conn.dialect
            advance = (start + count, time_value(dialect, now), sweep_id, start)
            insert = insert_text(dialect.paramstyle)
            if conn.exec_driver_sql(advance_text(dialect.paramstyle), advance).rowcount:
                conn.exec_driver_sql(insert, rows)
                return start + count
            have = conn.execute(held_points(), {"sweep": sweep_id}).scalar_one_or_none()
            if have is None:
                raise not_running(sweep_id)
            if not start <= have <= start + count:
                raise other_writer(sweep_id, have, start)
            new = rows[have - start :]
            sweeps = TABLES["sweeps"]
            bump = (
                update(sweeps)
                .where(sweeps.c.id == sweep_id)
                .values(points=have + len(new), last_write_at=now)
            )
            conn.execute(bump)
            if new:
                conn.exec_driver_sql(insert, new)
            return have + len(new)

        return self._db.write("storing sweep points", work, idempotent=True)

    def _mark_end(self, status: str, note: str) -> bool:
        sweeps = TABLES["sweeps"]
        done = (
            update(sweeps)
            .where(sweeps.c.id == self._id, sweeps.c.status == "running")
            .values(status=status, note=note, finished_at=utc_now(), last_write_at=utc_now())
        )
        ended = select(sweeps.c.status, sweeps.c.note).where(sweeps.c.id == self._id)

        def work(conn: Connection) -> bool:
            if conn.execute(done).rowcount == 1:
                return True
            # Sent again after a lost answer: the first attempt may have committed.
            return tuple(conn.execute(ended).one_or_none() or ()) == (status, note)

        return bool(self._db.write("finishing a sweep", work, idempotent=True))


def _sweep_info(row: Any, now: datetime, stale_after: float) -> SweepInfo:
    status, note = row.status, row.note
    if status == "running" and writer_gone(
        row.writer_host, row.writer_pid, row.last_write_at, now, stale_after
    ):
        status = "interrupted"
        note = note or "the writing process ended without finishing the sweep"
    writer = f"{row.writer_host}:{row.writer_pid}" if row.writer_host is not None else ""
    return SweepInfo(
        id=row.id,
        dut=row.dut,
        status=status,
        points=row.points,
        started_at=row.started_at,
        finished_at=row.finished_at,
        meter_id=row.meter_id,
        fixture_id=row.fixture_id,
        reference_set_id=row.reference_set_id,
        settings=row.settings,
        note=note,
        recorded_status=row.status,
        last_write_at=row.last_write_at,
        writer=writer,
    )


def list_sweeps(
    db: Database, stale_after: float = STALE_AFTER_S, sweep_id: int | None = None
) -> list[SweepInfo]:
    """Every stored sweep (or only ``sweep_id``), oldest first."""
    sweeps = TABLES["sweeps"]
    query = select(sweeps).order_by(sweeps.c.id)
    if sweep_id is not None:
        query = query.where(sweeps.c.id == sweep_id)
    rows = db.read("listing sweeps", lambda c: c.execute(query).all())
    now = utc_now()
    return [_sweep_info(r, now, stale_after) for r in rows]


def sweep_info(db: Database, sweep_id: int, stale_after: float = STALE_AFTER_S) -> SweepInfo:
    """The header of sweep ``sweep_id``."""
    found = list_sweeps(db, stale_after, sweep_id)
    if not found:
        raise StoreError(f"there is no sweep {sweep_id} in the store")
    return found[0]


def sweep_points(db: Database, sweep_id: int) -> pd.DataFrame:
    """The points of a sweep in order, float columns ``frequency, raw_r, raw_x, corrected_r,
    corrected_x, u_r, u_x`` (NaN where a reading was invalid, no correction was applied or the
    uncertainty is unknown) and the text column ``flags`` ('' for a measured value; read it as
    ``points["flags"]``, since ``DataFrame.flags`` is an attribute of pandas' own)."""
    import pandas as pd

    sweeps, points = TABLES["sweeps"], TABLES["sweep_points"]
    query = (
        select(*(points.c[n] for n in POINT_COLUMNS), points.c.flags)
        .where(points.c.sweep_id == sweep_id)
        .order_by(points.c.idx)
    )

    def work(conn: Connection) -> tuple[int, list]:
        known = conn.execute(select(func.count()).where(sweeps.c.id == sweep_id)).scalar_one()
        return known, list(conn.execute(query).all())

    known, rows = db.read("reading sweep points", work)
    if not known:
        raise StoreError(f"there is no sweep {sweep_id} in the store")
    width = len(POINT_COLUMNS)
    table = np.array([tuple(r[:width]) for r in rows], dtype=float).reshape(len(rows), width)
    frame = pd.DataFrame(table, columns=list(POINT_COLUMNS))
    frame["flags"] = pd.Series([r[width] for r in rows], dtype=object)
    return frame


def close_abandoned_sweeps(db: Database, stale_after: float = STALE_AFTER_S) -> list[int]:
    """Mark as interrupted every running sweep whose writer is gone; return their ids."""
    sweeps = TABLES["sweeps"]
    closed = []
    for info in list_sweeps(db, stale_after):
        if not info.abandoned:
            continue
        mark = (
            update(sweeps)
            .where(sweeps.c.id == info.id, sweeps.c.status == "running")
            .where(sweeps.c.last_write_at == info.last_write_at)
            .values(status="interrupted", note=info.note, finished_at=utc_now())
        )
        if db.write("closing an abandoned sweep", partial(rows_changed, mark)):
            closed.append(info.id)
    return closed
