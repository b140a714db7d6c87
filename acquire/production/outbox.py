"""The station's outbox: units kept in a local file until the results store has them.

A production station must not lose a measured unit because the store (a PostgreSQL server
across the factory network, a shared file) is away for a while. :class:`RecordKeeper` writes
every unit *through* an :class:`Outbox`, a small SQLite file on the station's own disk:

1. ``save(unit)`` first puts the unit in the outbox and commits that (WAL, ``synchronous =
   FULL``: the unit survives a crash of the station or a power cut from then on);
2. then it flushes: every waiting unit, oldest first, is written to the store, and removed from
   the outbox only after the store has committed it. The first :class:`~acquire.errors.StoreError`
   stops the flush; the units stay, in order, for the next ``save`` or ``flush``.

A unit the store committed whose removal did not happen (the station died in between) is written
again by the next flush; the store's attempt id makes that second write store nothing (see
:mod:`acquire.store.production`), so every unit is stored exactly once.

Units are kept as JSON text (every field of :class:`~acquire.store.UnitRecord` and its
measurements; times as ISO 8601 with their offset; NaN and infinities tagged, so the JSON stays
strict). A record written by a newer program with fields this one does not know is refused with
a StoreError rather than stored with those fields dropped.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import re
import sqlite3
import threading
from datetime import datetime
from pathlib import Path
from typing import Any, Protocol

from acquire.errors import StoreError
from acquire.store.records import MeasurementRecord, UnitRecord
from acquire.store.url import parse_store_url

#: Version of the JSON form of a unit in the outbox.
RECORD_FORMAT = 1
#: Seconds a writer waits for another connection to release the outbox file.
BUSY_TIMEOUT_S = 30.0

_SCHEMA = """
CREATE TABLE IF NOT EXISTS waiting (
    seq INTEGER PRIMARY KEY AUTOINCREMENT,
    attempt_id TEXT NOT NULL UNIQUE,
    record TEXT NOT NULL,
    tries INTEGER NOT NULL DEFAULT 0,
    last_error TEXT NOT NULL DEFAULT ''
)
"""
_SAFE_NAME = re.compile(r"[A-Za-z0-9._-]+")


class UnitSink(Protocol):
    """Where a :class:`RecordKeeper` writes units: a :class:`~acquire.store.Store` or a stand-in."""

    def save_unit(self, unit: UnitRecord) -> bool: ...


def default_outbox_path(store_url: str, station: str) -> Path:
    """Where station ``station`` keeps its outbox for the store at ``store_url``.

    Beside the SQLite store file, or in the current folder for a PostgreSQL (or in-memory)
    store: ``acquire-outbox-<station>.db`` (``acquire-outbox.db`` for an unnamed station). A
    station name with characters unsafe in a file name has them replaced by ``_`` and a short
    hash of the real name added, so two stations never share a file.
    """
    location = parse_store_url(store_url)
    folder = location.path.parent if location.path is not None else Path.cwd()
    if not station:
        return folder / "acquire-outbox.db"
    name = station
    if not _SAFE_NAME.fullmatch(station) or station.startswith("."):
        digest = hashlib.sha256(station.encode()).hexdigest()[:8]
        name = f"{re.sub(r'[^A-Za-z0-9._-]+', '_', station).strip('.')[:60]}-{digest}"
    return folder / f"acquire-outbox-{name}.db"


def _tagged(value: Any) -> Any:
    if isinstance(value, float) and not math.isfinite(value):
        return {"float": repr(value)}
    if isinstance(value, datetime):
        return {"time": value.isoformat()}
    return value


def _untagged(value: Any) -> Any:
    if isinstance(value, dict) and len(value) == 1:
        if "float" in value:
            return float(value["float"])
        if "time" in value:
            return datetime.fromisoformat(value["time"])
    return value


def unit_to_json(unit: UnitRecord) -> str:
    """The JSON text of ``unit`` as the outbox keeps it (strict JSON: no NaN tokens)."""
    head = {
        f.name: _tagged(getattr(unit, f.name))
        for f in dataclasses.fields(unit)
        if f.name != "measurements"
    }
    head["measurements"] = [
        {f.name: _tagged(getattr(m, f.name)) for f in dataclasses.fields(m)}
        for m in unit.measurements
    ]
    return json.dumps({"format": RECORD_FORMAT, "unit": head}, ensure_ascii=False, allow_nan=False)


def unit_from_json(text: str) -> UnitRecord:
    """The unit kept as ``text`` by :func:`unit_to_json`; StoreError if it cannot be read."""
    try:
        data = json.loads(text)
        if data.get("format") != RECORD_FORMAT:
            raise StoreError(
                f"an outbox record has format {data.get('format')!r}, this program reads "
                f"{RECORD_FORMAT}: flush the outbox with the program that wrote it"
            )
        head = {k: _untagged(v) for k, v in data["unit"].items() if k != "measurements"}
        measurements = tuple(
            MeasurementRecord(**{k: _untagged(v) for k, v in m.items()})
            for m in data["unit"]["measurements"]
        )
        return UnitRecord(**head, measurements=measurements)
    except (ValueError, KeyError, TypeError, AttributeError) as exc:
        raise StoreError(
            f"an outbox record cannot be read ({exc}): it was written by another release or "
            "damaged; keep the outbox file and flush it with the program that wrote it"
        ) from None


class Outbox:
    """Units waiting for the results store, in a local SQLite file, in arrival order.

    ``put`` commits before it returns (WAL journal, ``synchronous = FULL``). A unit put twice
    (same attempt id) is kept once, as first put: the store, too, keeps the first write of an
    attempt. The outbox may be used from several threads (calls take turns).
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        if not self.path.parent.is_dir():
            raise StoreError(
                f"cannot create outbox {self.path}: the folder {self.path.parent} does not exist "
                "(create it, or choose another outbox path)"
            )
        self._lock = threading.Lock()
        try:
            self._conn = sqlite3.connect(
                self.path, timeout=BUSY_TIMEOUT_S, isolation_level=None, check_same_thread=False
            )
            self._conn.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
            self._conn.execute("PRAGMA journal_mode = WAL")
            self._conn.execute("PRAGMA synchronous = FULL")
            self._conn.execute(_SCHEMA)
        except sqlite3.Error as exc:
            raise self._error("opening", exc) from exc

    def _error(self, action: str, exc: BaseException) -> StoreError:
        return StoreError(
            f"{action} the outbox {self.path} failed: {exc} (check that the file is an outbox "
            "of this program and that its folder is writable, with free space)"
        )

    def _write(self, action: str, sql: str, args: tuple = ()) -> int:
        with self._lock:
            conn = self._open()
            try:
                conn.execute("BEGIN IMMEDIATE")
                changed = conn.execute(sql, args).rowcount
                conn.execute("COMMIT")
            except sqlite3.Error as exc:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                raise self._error(action, exc) from exc
            return changed

    def _read(self, action: str, sql: str, args: tuple = ()) -> list[tuple]:
        with self._lock:
            try:
                return self._open().execute(sql, args).fetchall()
            except sqlite3.Error as exc:
                raise self._error(action, exc) from exc

    def _open(self) -> sqlite3.Connection:
        if self._conn is None:
            raise StoreError(f"the outbox {self.path} is closed: open it again")
        return self._conn

    def put(self, unit: UnitRecord) -> None:
        """Keep ``unit`` (committed to disk when this returns)."""
        record = unit_to_json(unit)
        self._write(
            "writing to",
            "INSERT INTO waiting (attempt_id, record) VALUES (?, ?) ON CONFLICT DO NOTHING",
            (unit.attempt_id, record),
        )

    def pending(self, limit: int | None = None) -> list[UnitRecord]:
        """The waiting units, oldest first (at most ``limit`` of them)."""
        sql = "SELECT record FROM waiting ORDER BY seq LIMIT ?"
        rows = self._read("reading", sql, (-1 if limit is None else limit,))
        return [unit_from_json(r[0]) for r in rows]

    def holds(self, attempt_id: str) -> bool:
        """True if the unit ``attempt_id`` is waiting."""
        sql = "SELECT 1 FROM waiting WHERE attempt_id = ?"
        return bool(self._read("reading", sql, (attempt_id,)))

    def count(self) -> int:
        """How many units are waiting."""
        return int(self._read("reading", "SELECT COUNT(*) FROM waiting")[0][0])

    def remove(self, attempt_id: str) -> None:
        """Forget the unit ``attempt_id`` (once the store has committed it); no-op if absent."""
        self._write("removing from", "DELETE FROM waiting WHERE attempt_id = ?", (attempt_id,))

    def note_failure(self, attempt_id: str, error: str) -> None:
        """Record that writing unit ``attempt_id`` to the store failed with ``error``."""
        self._write(
            "writing to",
            "UPDATE waiting SET tries = tries + 1, last_error = ? WHERE attempt_id = ?",
            (error, attempt_id),
        )

    def last_error(self) -> str:
        """Why the oldest waiting unit could not be stored yet ("" if none is waiting or it was
        never tried)."""
        rows = self._read("reading", "SELECT last_error FROM waiting ORDER BY seq LIMIT 1")
        return str(rows[0][0]) if rows else ""

    def close(self) -> None:
        """Close the file (waiting units stay in it for the next run)."""
        with self._lock:
            if self._conn is not None:
                self._conn.close()
                self._conn = None

    def __enter__(self) -> Outbox:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Outbox({str(self.path)!r})"

    _conn: sqlite3.Connection | None
    _lock: threading.Lock


class RecordKeeper:
    """Writes units to the store through the outbox, so that none is lost while it is away.

    ``save(unit)`` returns True when the unit is committed to the store, False when the store
    raised a StoreError (the unit waits, durable, in the outbox). Units reach the store in the
    order they were saved: while units wait, a new one queues behind them. Any other exception
    from the store (a bug, an interrupt) propagates with the unit still safe in the outbox. A
    StoreError from the outbox itself (its disk full, its file unreadable) propagates from
    ``save`` too: then the unit is *not* kept, and the station must stop and say so.

    Each saved unit costs two local commits (put and removal) besides the store's own; a unit
    the store keeps refusing (``last_error`` says why) holds back the ones behind it until it is
    dealt with.
    """

    def __init__(self, store: UnitSink, outbox: Outbox) -> None:
        self.store = store
        self.outbox = outbox
        self.last_error = outbox.last_error()

    @property
    def waiting(self) -> int:
        """How many units wait in the outbox for the store."""
        return self.outbox.count()

    def save(self, unit: UnitRecord) -> bool:
        """Put ``unit`` in the outbox, then flush; True if the store now has it."""
        self.outbox.put(unit)
        self.flush()
        return not self.outbox.holds(unit.attempt_id)

    def flush(self) -> int:
        """Write the waiting units to the store, oldest first, removing each after its commit;
        stop at the first StoreError (kept in ``last_error``). Return how many were delivered
        (including any the store already had from an earlier, interrupted flush)."""
        delivered = 0
        while True:
            batch = self.outbox.pending(limit=50)
            if not batch:
                self.last_error = ""
                return delivered
            for unit in batch:
                try:
                    self.store.save_unit(unit)
                except StoreError as exc:
                    self.last_error = str(exc)
                    self.outbox.note_failure(unit.attempt_id, self.last_error)
                    return delivered
                self.outbox.remove(unit.attempt_id)
                delivered += 1

    def flush_patiently(self, patience: float, sleep: Any = None) -> int:
        """Flush until nothing waits or ``patience`` seconds have passed, pausing between tries
        (0.2 s, doubling up to 2 s) while the store is away; how many were delivered."""
        import time

        pause = sleep or time.sleep
        deadline = time.monotonic() + patience
        delivered, wait = self.flush(), 0.2
        while self.waiting and time.monotonic() < deadline:
            pause(min(wait, max(0.0, deadline - time.monotonic())))
            delivered += self.flush()
            wait = min(wait * 2, 2.0)
        return delivered

    store: UnitSink
    outbox: Outbox
    last_error: str
