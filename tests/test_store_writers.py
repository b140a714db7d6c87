"""Store under stress: a writer killed with SIGKILL mid-stream, several station processes at once,
and a connection lost between two units. Writers are real processes
(``python tests/store_support.py``), the way stations are."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import pytest
from sqlalchemy import text
from store_support import STATION, attempt_id, store_location, synthetic_unit

from acquire.store import open_store

MEASUREMENTS = 100


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request, tmp_path):
    with store_location(request.param, tmp_path) as found:
        yield found


def _writer(url: str, schema: str | None, *args: str) -> subprocess.Popen:
    command = [sys.executable, STATION, url, *args]
    if schema is not None:
        command += ["--schema", schema]
    return subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _count(store, table: str) -> int:
    with store.engine.connect() as conn:
        return conn.execute(text(f"SELECT COUNT(*) FROM {table}")).scalar_one()


@pytest.mark.skipif(os.name != "posix", reason="SIGKILL is POSIX")
def test_writer_killed_mid_stream_leaves_only_whole_units(place):
    url, schema = place
    with open_store(url, schema=schema) as store:
        child = _writer(url, schema, "--count", "5000", "--measurements", str(MEASUREMENTS))
        deadline = time.monotonic() + 60
        while _count(store, "units") < 40:
            assert child.poll() is None, child.stderr.read()
            assert time.monotonic() < deadline, "the writer stored too few units in 60 s"
            time.sleep(0.02)
        os.kill(child.pid, signal.SIGKILL)
        assert child.wait(timeout=30) == -signal.SIGKILL
    with open_store(url, schema=schema) as store:
        with store.engine.connect() as conn:
            if store.engine_name == "sqlite":
                assert conn.exec_driver_sql("PRAGMA integrity_check").scalar_one() == "ok"
            per_unit = conn.execute(
                text(
                    "SELECT u.attempt_id, COUNT(m.seq) FROM units u "
                    "LEFT JOIN measurements m ON m.unit_id = u.id GROUP BY u.attempt_id"
                )
            ).all()
        units = len(per_unit)
        assert 40 <= units < 5000
        assert {n for _, n in per_unit} == {MEASUREMENTS}
        assert _count(store, "measurements") == units * MEASUREMENTS
        stored = {a for a, _ in per_unit}
        assert stored == {attempt_id(0, i) for i in range(units)}
        last = store.load_unit(attempt_id(0, units - 1))
        expected = synthetic_unit(units - 1, measurements=MEASUREMENTS)
        assert all(
            a.same_as(b) for a, b in zip(last.measurements, expected.measurements, strict=True)
        )
        assert store.save_unit(synthetic_unit(units, measurements=MEASUREMENTS))
        assert not store.save_unit(synthetic_unit(units - 1, measurements=MEASUREMENTS))


def _run_stations(
    url: str, schema: str | None, stations: int, units: int, replay: int
) -> list[dict]:
    start = f"{time.time() + 1.5:.3f}"
    procs = [
        _writer(
            url,
            schema,
            "--worker",
            str(k),
            "--count",
            str(units),
            "--replay-worker",
            str((k + 1) % stations),
            "--replay",
            str(replay),
            "--start-at",
            start,
        )  # fmt: skip
        for k in range(stations)
    ]
    results = []
    for p in procs:
        out, err = p.communicate(timeout=120)
        assert p.returncode == 0, err
        results.append(json.loads(out))
    return results


def _check_stations(url: str, schema: str | None, stations: int, units: int, results: list) -> None:
    total = stations * units
    assert sum(r["stored"] + r["replayed_new"] for r in results) == total
    with open_store(url, schema=schema) as store:
        with store.engine.connect() as conn:
            row = conn.execute(
                text(
                    "SELECT COUNT(*), COUNT(DISTINCT attempt_id), COUNT(DISTINCT serial) FROM units"
                )
            ).one()
            sizes = (
                conn.execute(text("SELECT COUNT(*) FROM measurements GROUP BY unit_id"))
                .scalars()
                .all()
            )
            ids = set(conn.execute(text("SELECT attempt_id FROM units")).scalars())
        assert tuple(row) == (total, total, total)
        assert sizes == [10] * total
        assert ids == {attempt_id(k, i) for k in range(stations) for i in range(units)}
        assert store.lot("LOT-1").attempts == total
        assert [lot.name for lot in store.list_lots()] == ["LOT-1"]


def test_four_stations_write_to_postgresql_at_once(tmp_path):
    """4 processes x 250 units, each replaying its own and a neighbour's attempt ids."""
    with store_location("postgresql", tmp_path) as (url, schema):
        results = _run_stations(url, schema, stations=4, units=250, replay=40)
        _check_stations(url, schema, 4, 250, results)


def test_four_stations_share_one_sqlite_file(tmp_path):
    with store_location("sqlite", tmp_path) as (url, schema):
        results = _run_stations(url, schema, stations=4, units=60, replay=20)
        _check_stations(url, schema, 4, 60, results)


def test_unit_write_survives_a_dropped_postgresql_connection(tmp_path):
    """The server ends the store's connection between two writes; the next unit is still stored
    (once), and a non-idempotent write replaces the dead connection before sending anything."""
    import psycopg

    with (
        store_location("postgresql", tmp_path) as (url, schema),
        open_store(url, schema=schema) as store,
    ):
        assert store.save_unit(synthetic_unit(0))

        def drop_connections() -> int:
            pid = text("SELECT pg_backend_pid()")
            mine = store._db.read("finding the connection", lambda c: c.execute(pid).scalar_one())
            with psycopg.connect(url, autocommit=True) as admin:
                admin.execute("SELECT pg_terminate_backend(%s)", (mine,))
            return mine

        first = drop_connections()
        assert store.save_unit(synthetic_unit(1))
        assert not store.save_unit(synthetic_unit(1))
        second = drop_connections()
        assert second != first
        with store.begin_sweep("after a drop") as writer:
            writer.add_points([1e3], [1j], [1j])
        assert store.sweep_info(writer.id).points == 1
        assert _count(store, "units") == 2


def test_many_sweeps_written_from_threads_of_their_own_do_not_exhaust_the_pool(tmp_path):
    # Each sweep's points are written from a thread of its own (acquire.sweep_saving); the pool
    # holds 5 + 10 overflow connections (SQLAlchemy's QueuePool defaults), so 40 sweeps in one
    # process would run out if each thread kept its connection after it ended.
    import threading

    import numpy as np

    from acquire.store import open_store

    with open_store(f"sqlite:///{tmp_path / 'many.db'}") as store:
        for i in range(40):
            writer = store.begin_sweep(dut=f"coil {i}")

            def write(w=writer) -> None:
                w.add_points(np.array([1e3]), np.array([1 + 2j]))
                w.finish()

            thread = threading.Thread(target=write)
            thread.start()
            thread.join()
        assert len(store.list_sweeps()) == 40
        assert all(info.points == 1 for info in store.list_sweeps())
