"""Make the fixture stores in tests/data with the store code itself.

    python tests/data/make_store_fixtures.py

writes ``store_v1.db``: an SQLite store of schema version 1 holding
``acquire.store.legacy.EXAMPLE_V1`` (demo data of our own invention), in rollback-journal mode
so that it is one self-contained file.
"""

from __future__ import annotations

import sqlite3
import sys
from pathlib import Path

from acquire.store.legacy import create_store_at_version, fill_v1_example

HERE = Path(__file__).resolve().parent


def make_v1(path: Path) -> None:
    for leftover in (path, path.with_name(path.name + "-wal"), path.with_name(path.name + "-shm")):
        leftover.unlink(missing_ok=True)
    url = f"sqlite:///{path}"
    create_store_at_version(url, 1)
    fill_v1_example(url)
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA journal_mode = DELETE")
    conn.execute("PRAGMA page_size = 1024")
    conn.execute("VACUUM")
    conn.close()


if __name__ == "__main__":
    make_v1(HERE / "store_v1.db")
    sys.exit(0)
