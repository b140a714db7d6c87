"""Sweeps whose writing process is gone: how the store tells, and marking them interrupted.

A running sweep records the host name and process id of its writer. :func:`writer_gone` says
the writer has ended when that process no longer exists on this host (POSIX), or when no batch
arrived for ``stale_after`` seconds (the only test across hosts, and on Windows).
:func:`close_dead_writers`, run whenever a store is opened, marks interrupted the running
sweeps whose process is dead on this host (a SIGKILL, a crash, a power cut), so a later reader
finds them closed without ``acquire sweep close``.
"""

from __future__ import annotations

import os
import socket
from functools import partial
from typing import Any

from sqlalchemy import Connection, select, update

from acquire.errors import StoreError
from acquire.store.engine import Database
from acquire.store.schema import TABLES, utc_now
from acquire.store.writer_alive import GONE_NOTE, process_exists
from acquire.store.writer_alive import writer_gone as writer_gone


def close_dead_writers(db: Database) -> list[int]:
    """Mark as interrupted the running sweeps whose writing process is dead on this host.

    Run when a store is opened. Only the process check is used here (never the time since the
    last write, which a long but living sweep may pass). A store that cannot be written now
    (read-only file) is left as it is: it still *reports* those sweeps interrupted.
    """
    if os.name != "posix":
        return []
    sweeps = TABLES["sweeps"]
    here = socket.gethostname()
    running = (
        select(sweeps.c.id, sweeps.c.writer_pid, sweeps.c.last_write_at, sweeps.c.note)
        .where(sweeps.c.status == "running", sweeps.c.writer_host == here)
        .where(sweeps.c.writer_pid.is_not(None))
    )
    rows = db.read("looking for sweeps of ended processes", lambda c: c.execute(running).all())
    closed: list[int] = []
    for row in rows:
        if process_exists(row.writer_pid):
            continue
        mark = (
            update(sweeps)
            .where(sweeps.c.id == row.id, sweeps.c.status == "running")
            .where(sweeps.c.last_write_at == row.last_write_at)
            .values(
                status="interrupted",
                note=row.note or GONE_NOTE,
                finished_at=utc_now(),
            )
        )
        try:
            changed = db.write("closing a sweep of an ended process", partial(rows_changed, mark))
        except StoreError:
            return closed
        if changed:
            closed.append(row.id)
    return closed


def rows_changed(statement: Any, conn: Connection) -> int:
    """Run ``statement`` on ``conn`` and say how many rows it changed."""
    return int(conn.execute(statement).rowcount)
