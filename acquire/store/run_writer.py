"""What every writer of one run holds, and its one end (no SQLAlchemy here, so the
plain-SQLite sweep writer of :mod:`acquire.store.sqlite_sweeps` shares it)."""

from __future__ import annotations

from types import TracebackType
from typing import Any, Self


class RunWriter:
    """What a writer of one run holds: its store, the run's id, how many rows it has stored and
    its one end. As a context manager, a normal exit ends the run ``complete`` and an exception
    ``interrupted`` (with the exception in the note); a subclass says how it ends (``_end``)."""

    def __init__(self, db: Any, run_id: int) -> None:
        self._db = db
        self._id = run_id
        self._count = 0
        self._finished: str | None = None

    @property
    def id(self) -> int:
        """The run's id in the store."""
        return self._id

    def _end(self, status: str, note: str) -> None:
        raise NotImplementedError

    def __enter__(self) -> Self:
        return self

    def __exit__(
        self,
        kind: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        if self._finished is None:
            if exc is None:
                self._end("complete", "")
            else:
                self._end("interrupted", stop_note(exc))


def stop_note(exc: BaseException | None) -> str:
    """The note of a run a writer closes because of ``exc``."""
    name = type(exc).__name__
    return f"stopped by {name}: {exc}" if str(exc) else f"stopped by {name}"
