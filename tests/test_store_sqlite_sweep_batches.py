"""Batches of sweep points on the plain-SQLite path (acquire.store.sqlite_sweeps), which sends a
batch's rows several to an INSERT: the rows stored are those the usual path stores (SQLAlchemy
Core, the reference), each batch is one write transaction holding the sweep row's count and
heartbeat, on a connection with the store's durability settings.

The durability settings checked are SQLite's own meaning of them (sqlite.org, "PRAGMA
journal_mode" and "PRAGMA synchronous": ``synchronous`` reads 2 for FULL).
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import numpy as np
import pytest

from acquire.store import open_store, sqlite_connection
from acquire.store.sqlite_sweeps import ROWS_PER_INSERT, PlainSweepStore, open_sweep_store


def _store(tmp_path: Path) -> tuple[str, Path]:
    path = tmp_path / "s.db"
    with open_store(f"sqlite:///{path}"):
        pass  # a store at the newest revision, made the usual way
    return f"sqlite:///{path}", path


def _points(n: int) -> dict:
    """``n`` points with NaN and infinity where the store must keep them apart."""
    f = np.geomspace(20.0, 2e7, n)
    raw = 0.8 + 2j * np.pi * f * 3.3e-5
    cor = raw - (0.02 + 1e-3j)
    u = np.column_stack([np.full(n, 4e-3), np.linspace(1e-3, 9e-3, n)])
    raw[n // 3], cor[n // 2], u[n - 2, 0] = complex(np.nan, 2.0), complex(np.inf, 1.0), np.nan
    flags = [("overrange" if k % 7 == 3 else "") for k in range(n)]
    return {"frequency": f, "raw_z": raw, "corrected_z": cor, "uncertainty": u, "flags": flags}


#: Batch sizes around the rows one INSERT carries: fewer, exactly, one more, several, one.
SIZES = (5, ROWS_PER_INSERT, ROWS_PER_INSERT + 1, 3 * ROWS_PER_INSERT + 2, 1)


def _write(store, sizes=SIZES) -> int:
    points = _points(sum(sizes))
    writer = store.begin_sweep(dut="coil B")
    start = 0
    for size in sizes:
        part = slice(start, start + size)
        writer.add_points(**{k: v[part] for k, v in points.items()})
        start += size
    writer.finish("complete")
    return writer.id


def _typed(path: Path, sweep_id: int) -> list[tuple]:
    with sqlite3.connect(path) as conn:
        rows = conn.execute(
            "SELECT * FROM sweep_points WHERE sweep_id = ? ORDER BY idx", (sweep_id,)
        ).fetchall()
    return [tuple((type(v).__name__, v) for v in row[1:]) for row in rows]


def test_batches_around_one_inserts_rows_store_what_the_usual_path_stores(tmp_path):
    url, path = _store(tmp_path)
    with open_store(url) as store:
        usual = _write(store)
    with open_sweep_store(url) as plain:
        assert isinstance(plain, PlainSweepStore)
        fast = _write(plain)
    ours, theirs = _typed(path, fast), _typed(path, usual)
    assert len(ours) == sum(SIZES)
    assert [str(row) for row in ours] == [str(row) for row in theirs]  # NaN compares by text
    assert [row[0][1] for row in ours] == list(range(sum(SIZES)))


class _Traced:
    """Every connection the plain store opens, its statements recorded in order."""

    def __init__(self, monkeypatch: pytest.MonkeyPatch) -> None:
        self.statements: list[str] = []
        self.connections: list[sqlite3.Connection] = []
        made = sqlite_connection.connect

        def connect(path: Path) -> sqlite3.Connection:
            conn = made(path)
            conn.set_trace_callback(self.statements.append)
            self.connections.append(conn)
            return conn

        monkeypatch.setattr(sqlite_connection, "connect", connect)


def test_each_batch_is_one_write_transaction_with_the_sweep_rows_count_and_heartbeat(
    tmp_path, monkeypatch
):
    url, path = _store(tmp_path)
    traced = _Traced(monkeypatch)
    sizes = (3, ROWS_PER_INSERT + 4, 2)
    points = _points(sum(sizes))
    with open_sweep_store(url) as plain:
        assert isinstance(plain, PlainSweepStore)
        writer = plain.begin_sweep(dut="coil C")
        conn = traced.connections[-1]
        settings = [conn.execute(f"PRAGMA {p}").fetchone()[0] for p in ("journal_mode",
                    "synchronous", "foreign_keys")]  # fmt: skip
        assert settings == ["wal", 2, 1]
        heartbeats = []
        start = 0
        for size in sizes:
            traced.statements.clear()
            part = slice(start, start + size)
            writer.add_points(**{k: v[part] for k, v in points.items()})
            start += size
            said = [s.split()[0].upper() for s in traced.statements]
            assert said[0] == "BEGIN" and traced.statements[0].upper() == "BEGIN IMMEDIATE"
            assert said[-1] == "COMMIT" and said.count("COMMIT") == 1
            assert said[1] == "UPDATE" and "sweeps" in traced.statements[1]
            assert said[2:-1] == ["INSERT"] * -(-size // ROWS_PER_INSERT)
            with sqlite3.connect(path) as other:  # what another reader sees once committed
                row = other.execute(
                    "SELECT points, last_write_at FROM sweeps WHERE id = ?", (writer.id,)
                ).fetchone()
                stored = other.execute(
                    "SELECT count(*) FROM sweep_points WHERE sweep_id = ?", (writer.id,)
                ).fetchone()[0]
            assert row[0] == stored == start
            heartbeats.append(row[1])
        writer.finish("complete")
    assert heartbeats == sorted(heartbeats) and len(set(heartbeats)) == len(sizes)
