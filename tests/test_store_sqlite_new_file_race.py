"""Programs opening a new SQLite store at the same moment all get it.

Putting a file in WAL mode needs it to itself (SQLite documentation, "Write-Ahead Logging",
section 3.3 "Activating And Configuring WAL Mode"; PRAGMA journal_mode). When several
connections switch a new file at once, SQLite answers "database is locked" to the losers at
once, without waiting through the busy timeout; seen here as 51 failures in 300 rounds of three
connections before the store waited for it. The store now waits for it as for any other lock.
"""

from __future__ import annotations

import sqlite3
import threading

from acquire.store import open_store
from acquire.store.sqlite_connection import apply_settings


def test_three_connections_switching_a_new_file_to_wal_at_once_all_succeed(tmp_path):
    failed = 0
    for k in range(200):
        path = tmp_path / f"store-{k}.db"
        errors: list[BaseException] = []
        start = threading.Barrier(3)

        def settle(path=path, errors=errors, start=start) -> None:
            conn = sqlite3.connect(path, isolation_level=None)
            start.wait()
            try:
                apply_settings(conn)
            except sqlite3.Error as exc:
                errors.append(exc)
            finally:
                conn.close()

        threads = [threading.Thread(target=settle) for _ in range(3)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(60)
        failed += bool(errors)
        with sqlite3.connect(path) as check:
            assert check.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert failed == 0


def test_three_threads_opening_one_new_store_all_get_it(tmp_path):
    for k in range(3):
        url = f"sqlite:///{tmp_path / f'whole-{k}.db'}"
        failures: list[BaseException] = []

        def open_it(url: str = url, failures=failures) -> None:
            try:
                with open_store(url):
                    pass
            except Exception as exc:  # noqa: BLE001 - reported by the assertion below
                failures.append(exc)

        threads = [threading.Thread(target=open_it) for _ in range(3)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(60)
        assert not failures, failures
