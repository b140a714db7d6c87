"""Whether the process writing a running sweep (or run) is gone, with the standard library
alone: both the store's usual path (:mod:`acquire.store.abandoned`) and its plain-SQLite sweep
path (:mod:`acquire.store.sqlite_sweeps`) decide it here."""

from __future__ import annotations

import os
import socket
from datetime import datetime, timedelta

#: The note of a sweep closed because its writer is gone, when it has none.
GONE_NOTE = "the writing process ended without finishing the sweep"


def process_exists(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def writer_gone(
    host: str | None,
    pid: int | None,
    last_write: datetime | None,
    now: datetime,
    stale_after: float,
) -> bool:
    """True if the process writing a running sweep is known to have ended (see module doc)."""
    if last_write is None or now - last_write > timedelta(seconds=stale_after):
        return True
    if os.name == "posix" and host == socket.gethostname() and pid is not None:
        return not process_exists(pid)
    return False
