"""A unit's parameters as the fast insert path prepares them equal those of the libraries the
store otherwise relies on: times as SQLAlchemy's own SQLite processor writes them (after the
store's UTC conversion), the serial's key as ``json.dumps`` of ``[serial]`` hashed. On SQLite
the unit's transaction, begun and committed on the driver's connection, waits for a locked
database and then reports it as the store's own error."""

from __future__ import annotations

import sqlite3
from datetime import UTC, datetime, timedelta, timezone

import pytest
from sqlalchemy.dialects import sqlite
from store_support import synthetic_unit

from acquire.errors import StoreError
from acquire.store import engine, open_store, sqlite_connection
from acquire.store.columns import UtcDateTime
from acquire.store.schema import identity_key
from acquire.store.unit_insert import serial_key, sqlite_time

DIALECT = sqlite.dialect()

TIMES = [
    datetime(2026, 3, 2, 8, 0, 4, tzinfo=UTC),  # whole second: microseconds still written
    datetime(2026, 3, 2, 8, 0, 4, 999_999, tzinfo=UTC),
    datetime(1, 1, 1, 0, 0, 0, 1, tzinfo=UTC),  # the smallest year, zero-padded to four digits
    datetime(999, 12, 31, 23, 59, 59, tzinfo=UTC),
    datetime(9999, 12, 31, 23, 59, 59, 999_999, tzinfo=UTC),
    datetime(2026, 3, 2, 8, 0, 4, 5, tzinfo=timezone(timedelta(hours=5, minutes=30))),
    datetime(2026, 3, 2, 8, 0, 4, tzinfo=timezone(timedelta(0))),  # UTC, not the UTC object
    datetime(2026, 3, 2, 8, 0, 4, tzinfo=timezone(timedelta(hours=-11))),
    datetime.now(UTC),
]


def _sqlalchemy_processor():
    """SQLAlchemy's bind processor of the store's UTC time type on SQLite (the reference)."""
    return UtcDateTime().dialect_impl(DIALECT).bind_processor(DIALECT)


@pytest.mark.parametrize("value", TIMES, ids=str)
def test_a_time_is_written_as_sqlalchemy_writes_it(value):
    generic = _sqlalchemy_processor()
    assert sqlite_time(generic)(value) == generic(value)


def test_a_time_without_a_zone_is_refused_as_before():
    generic = _sqlalchemy_processor()
    with pytest.raises(ValueError, match="timezone-aware"):
        sqlite_time(generic)(datetime(2026, 3, 2, 8, 0, 4))


@pytest.mark.parametrize(
    "serial",
    [
        "SN-000123",
        "",
        'quote " and backslash \\ and slash /',
        "control \x00 \x01 \x1f \x7f tab\tnew\nline",
        "µH Ω ±5 % 测试线圈 🧲 é e\u0301 שלום",
        "zero\u200bwidth \ufeff bom \u2028 \u2029",
        "A" * 10_000,
    ],
)
def test_the_serial_key_is_the_identity_key(serial):
    # identity_key hashes json.dumps([serial], ensure_ascii=False) (Python's json module).
    assert serial_key(serial) == identity_key(serial)


@pytest.mark.parametrize(
    "lot",
    [
        "",  # no lot: the unit's own transaction is the first (the unit's own write path)
        "LOT-LOCKED",  # a new lot: made first on the store's general write path
    ],
)
def test_a_write_to_a_locked_database_waits_then_says_it_was_busy(tmp_path, monkeypatch, lot):
    # SQLite's documented locking (sqlite.org/lang_transaction.html): while one connection
    # holds a write transaction (BEGIN IMMEDIATE), another's BEGIN IMMEDIATE waits for the busy
    # timeout, then fails with SQLITE_BUSY ("database is locked"); the store says so in its one
    # line (not the driver's own exception) and is usable once the lock is gone.
    monkeypatch.setattr(engine, "BUSY_TIMEOUT_S", 0.2)  # on every connection the store opens
    monkeypatch.setattr(sqlite_connection, "BUSY_TIMEOUT_S", 0.2)
    path = tmp_path / "store.db"
    with open_store(f"sqlite:///{path}") as store:
        other = sqlite3.connect(path, isolation_level=None)
        other.execute("BEGIN IMMEDIATE")
        unit = synthetic_unit(1, lot=lot)
        with pytest.raises(StoreError, match="busy"):
            store.save_unit(unit)
        other.execute("ROLLBACK")
        other.close()
        assert store.save_unit(unit) is True  # nothing half-begun was left behind
        assert store.save_unit(unit) is False
        assert store.load_unit(unit.attempt_id) == unit
