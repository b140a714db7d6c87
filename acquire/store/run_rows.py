"""What bias sweeps and temperature-rise runs share in the store: a run's status, times and
writing process, its end, and how numbers go in and out (NaN as NULL, infinity kept).

A run row starts ``running`` with its writer's host and process id (:func:`writer_row`); one
whose writer is gone is *reported* interrupted (:func:`reported`, by
:func:`acquire.store.abandoned.writer_gone`, as frequency sweeps are); :func:`finish_run` ends it
once, even when sent again after a lost answer.
"""

from __future__ import annotations

import math
import os
import socket
from datetime import datetime
from typing import Any

from sqlalchemy import Connection, Table, select, update

from acquire.errors import StoreError
from acquire.store.abandoned import writer_gone
from acquire.store.engine import Database
from acquire.store.run_writer import RunWriter as RunWriter
from acquire.store.run_writer import stop_note as stop_note
from acquire.store.schema import RUN_STATES, utc_now

#: The note of a run reported interrupted because its writer is gone, when it has none.
GONE_NOTE = "the writing process ended without finishing the run"


def writer_row() -> dict[str, Any]:
    """The columns a new running run starts with (status, times, this process)."""
    now = utc_now()
    return {
        "status": "running",
        "note": "",
        "started_at": now,
        "last_write_at": now,
        "writer_host": socket.gethostname(),
        "writer_pid": os.getpid(),
    }


def reported(row: Any, now: datetime, stale_after: float) -> tuple[str, str]:
    """(status, note) of a run's row as the store reports it (a gone writer's: interrupted)."""
    if row.status == "running" and writer_gone(
        row.writer_host, row.writer_pid, row.last_write_at, now, stale_after
    ):
        return "interrupted", row.note or GONE_NOTE
    return row.status, row.note


def number(value: float | None) -> float | None:
    """A float for the database: NaN as None (NULL), infinity kept."""
    return None if value is None or math.isnan(float(value)) else float(value)


def read_float(value: float | None) -> float:
    """A stored number back as a float, NULL as NaN."""
    return math.nan if value is None else float(value)


def check_end(status: str, run: str, finished: str | None) -> None:
    """Refuse an end status that is not one, or a second end."""
    if status not in RUN_STATES[1:]:
        raise StoreError(
            f"a {run} finishes as {', '.join(repr(s) for s in RUN_STATES[1:])}, not {status!r}"
        )
    if finished is not None:
        raise StoreError(f"this {run} is already {finished}")


def holding(conn: Connection, table: Table, run_id: int, count: str, what: str) -> int:
    """The row count ``count`` of running run ``run_id``, the row locked; StoreError if the run
    is not running any more."""
    query = select(table.c[count]).where(table.c.id == run_id, table.c.status == "running")
    have = conn.execute(query.with_for_update()).scalar_one_or_none()
    if have is None:
        raise StoreError(
            f"{what} {run_id} is no longer running in the store (it was finished or closed as "
            "abandoned): begin a new one"
        )
    return int(have)


def finish_run(
    db: Database,
    runs: Table,
    run_id: int,
    values: dict[str, Any],
    table: Table,
    rows: list[dict],
    run: str,
) -> None:
    """Set ``values`` (status, note, ...) on running run ``run_id`` of ``runs`` and insert
    ``rows`` into ``table``, in one transaction; sent again after a lost answer, it does it
    once."""
    now = utc_now()
    end = update(runs).where(runs.c.id == run_id, runs.c.status == "running")
    end = end.values(**values, finished_at=now, last_write_at=now)
    ended = select(runs.c.status, runs.c.note).where(runs.c.id == run_id)

    def work(conn: Connection) -> bool:
        if conn.execute(end).rowcount == 1:
            if rows:
                conn.execute(table.insert(), rows)
            return True
        # Sent again after a lost answer: the first attempt may have committed.
        return tuple(conn.execute(ended).one_or_none() or ()) == (values["status"], values["note"])

    if not db.write(f"finishing a {run}", work, idempotent=True):
        raise StoreError(f"{run} {run_id} was no longer running in the store: nothing stored")


def iso(when: datetime | None) -> str:
    """A stored time as ISO 8601 text with its offset ('' for none)."""
    return "" if when is None else when.isoformat()
