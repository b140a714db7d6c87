"""Helpers for the store's tests (``tests/test_store*.py``; ``benchmarks/bench_store.py`` borrows
the station process and the synthetic units). Not part of the installed program.

- The PostgreSQL server for tests is ``ACQUIRE_TEST_POSTGRES`` (default
  ``postgresql://postgres@127.0.0.1:5432/test``); :func:`require_postgres` skips a test when it
  cannot be reached, or fails it when the environment has ``CI=true``.
- :func:`temporary_schema` gives a run its own PostgreSQL schema and drops it afterwards.
- :func:`synthetic_unit` makes a deterministic unit (demo values, our own invention).
- ``python tests/store_support.py URL --worker K --count N`` (:data:`STATION`) is a station
  process writing units, for the crash and concurrency tests and the benchmark; it prints a JSON
  summary.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from datetime import UTC, datetime, timedelta
from functools import cache
from pathlib import Path

from acquire.store.records import MeasurementRecord, UnitRecord

#: The station process: ``[sys.executable, STATION, url, ...]``.
STATION = str(Path(__file__).resolve())
DEFAULT_TEST_POSTGRES = "postgresql://postgres@127.0.0.1:5432/test"
_NAMESPACE = uuid.UUID("6f1d7c2e-3b1a-4c55-9a0e-2f4b8d6c1a90")
_T0 = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)
#: Parameters of a synthetic unit: name, frequency (Hz or None), SI unit, nominal, spread (1 sigma).
_PARAMETERS = [
    ("Ls", 1e3, "H", 3.40e-4, 3.4e-6),
    ("Ls", 1e4, "H", 3.40e-4, 3.4e-6),
    ("Ls", 1e5, "H", 3.41e-4, 3.4e-6),
    ("Rs", 1e3, "ohm", 4.8, 0.1),
    ("Rs", 1e5, "ohm", 5.6, 0.12),
    ("Q", 1e3, "", 0.45, 0.01),
    ("Q", 1e4, "", 4.4, 0.1),
    ("Q", 1e5, "", 38.0, 1.0),
    ("Rdc", None, "ohm", 4.8, 0.1),
    ("Cp", None, "F", 1.5e-12, 7.5e-14),
]


def postgres_url() -> str:
    """The PostgreSQL server the tests use."""
    return os.environ.get("ACQUIRE_TEST_POSTGRES", DEFAULT_TEST_POSTGRES)


@cache
def postgres_unreachable(url: str) -> str | None:
    """Why the server at ``url`` cannot be used, or None if it answers."""
    import psycopg

    plain = url.replace("postgresql+psycopg://", "postgresql://", 1)
    try:
        with psycopg.connect(plain, connect_timeout=3) as conn:
            conn.execute("SELECT 1")
    except psycopg.Error as exc:
        return f"PostgreSQL at {url} cannot be reached ({str(exc).strip().splitlines()[0]})"
    return None


def require_postgres() -> str:
    """The test server's URL; skip the calling test if it is unreachable (fail it if CI=true)."""
    import pytest

    url = postgres_url()
    reason = postgres_unreachable(url)
    if reason is not None:
        if os.environ.get("CI") == "true":
            pytest.fail(f"{reason}; CI=true requires the PostgreSQL tests to run")
        pytest.skip(f"{reason}; set ACQUIRE_TEST_POSTGRES to a reachable server to run this test")
    return url


@contextmanager
def temporary_schema(url: str) -> Iterator[str]:
    """A fresh schema name on PostgreSQL ``url``; the schema (if made) is dropped afterwards."""
    import psycopg

    name = f"acquire_test_{os.getpid()}_{uuid.uuid4().hex[:10]}"
    try:
        yield name
    finally:
        plain = url.replace("postgresql+psycopg://", "postgresql://", 1)
        with psycopg.connect(plain, autocommit=True) as conn:
            conn.execute(f'DROP SCHEMA IF EXISTS "{name}" CASCADE')


@contextmanager
def store_location(engine: str, folder: Path) -> Iterator[tuple[str, str | None]]:
    """(url, schema) of a fresh, empty place for a store on ``engine`` ("sqlite" or
    "postgresql"): a file in ``folder``, or a temporary PostgreSQL schema dropped afterwards."""
    if engine == "sqlite":
        yield f"sqlite:///{folder / 'store.db'}", None
        return
    url = require_postgres()
    with temporary_schema(url) as schema:
        yield url, schema


class RoundTrips:
    """Counts what a store sends to its database, at the driver (the store may run its hot
    statements on the driver's cursor, past SQLAlchemy's events).

    PostgreSQL: each statement a psycopg cursor executes, plus the BEGIN that psycopg sends
    before the first statement of a transaction and the COMMIT that ends it (none in
    autocommit): the requests that wait for the server, round trips. SQLite: each statement
    SQLite runs other than BEGIN and COMMIT (an ``executemany`` runs once per row)."""

    def __init__(self, store) -> None:
        from sqlalchemy import event

        self.count = 0
        for _, conn in store._db._connections:
            self._watch(conn.connection.driver_connection)
        event.listen(store.engine, "connect", lambda raw, _record: self._watch(raw))

    def _watch(self, raw) -> None:
        if hasattr(raw, "set_trace_callback"):
            raw.set_trace_callback(self._traced)
        else:
            raw.cursor_factory = _counting_cursor(raw.cursor_factory, self)

    def _traced(self, statement: str) -> None:
        if statement.split(None, 1)[0].upper() not in ("BEGIN", "COMMIT"):
            self.count += 1

    def sent(self, raw) -> None:
        """One statement sent on psycopg connection ``raw`` (with BEGIN and COMMIT if it
        opens a transaction)."""
        self.count += 1
        idle = raw.info.transaction_status == raw.info.transaction_status.IDLE
        if idle and not raw.autocommit:
            self.count += 2


def _counting_cursor(base, trips: RoundTrips):
    class Counting(base):
        def execute(self, *args, **kwargs):
            trips.sent(self.connection)
            return super().execute(*args, **kwargs)

        def executemany(self, *args, **kwargs):
            trips.sent(self.connection)
            return super().executemany(*args, **kwargs)

    return Counting


def attempt_id(worker: int, index: int, seed: int = 0) -> str:
    """The deterministic attempt id of synthetic unit ``index`` of ``worker``."""
    return str(uuid.uuid5(_NAMESPACE, f"{seed}:{worker}:{index}"))


def synthetic_unit(
    index: int, lot: str = "LOT-1", worker: int = 0, measurements: int = 10, seed: int = 0
) -> UnitRecord:
    """A deterministic unit with ``measurements`` judged values (cycling through demo values)."""
    import numpy as np

    z = np.random.default_rng([seed, worker, index]).standard_normal(measurements)
    return make_unit(index, lot, worker, z, seed)


def make_unit(index: int, lot: str, worker: int, z, seed: int = 0) -> UnitRecord:
    """Unit ``index`` of ``worker`` whose measurements lie ``z`` (standard normal draws) from
    their nominal values."""
    records = []
    for k, zk in enumerate(z):
        name, f, unit, nominal, sigma = _PARAMETERS[k % len(_PARAMETERS)]
        value = float(nominal + sigma * zk)
        low, high = nominal - 2.5 * sigma, nominal + 2.5 * sigma
        verdict = "pass" if low <= value <= high else "fail"
        records.append(MeasurementRecord(name, value, unit, f, low, high, verdict))
    good = all(m.verdict == "pass" for m in records)
    began = _T0 + timedelta(seconds=index)
    return UnitRecord(
        serial=f"W{worker}-{index:07d}",
        lot=lot,
        outcome="pass" if good else "fail",
        bin="1" if good else "reject",
        station=f"station-{worker}",
        operator="demo operator",
        started_at=began,
        finished_at=began + timedelta(seconds=1),
        measurements=tuple(records),
        attempt_id=attempt_id(worker, index, seed),
    )


def _main(argv: list[str] | None = None) -> int:
    from acquire.store import open_store

    p = argparse.ArgumentParser(
        description="write synthetic units into a store, one per transaction"
    )
    p.add_argument("url")
    p.add_argument("--schema")
    p.add_argument("--worker", type=int, default=0)
    p.add_argument("--count", type=int, default=100)
    p.add_argument("--measurements", type=int, default=10)
    p.add_argument("--lot", default="LOT-1")
    p.add_argument("--replay-worker", type=int, help="afterwards, save this worker's units again")
    p.add_argument("--replay", type=int, default=0, help="how many units to replay")
    p.add_argument(
        "--replay-every", type=int, default=10, help="save every Nth unit twice (0: never)"
    )
    p.add_argument("--start-at", type=float, help="wait until this time.time() before writing")
    p.add_argument("--count-round-trips", action="store_true", help="report them in the JSON")
    p.add_argument(
        "--bare",
        action="store_true",
        help="PostgreSQL baseline: psycopg alone sends the store's one statement per unit with "
        "its parameters (prepared before the timing), autocommit; no replays",
    )
    args = p.parse_args(argv)
    if args.bare:
        return _bare_main(args)
    stored = replayed_new = 0
    with open_store(args.url, schema=args.schema) as store:
        trips = RoundTrips(store) if args.count_round_trips else None
        units = (
            synthetic_unit(i, args.lot, args.worker, args.measurements) for i in range(args.count)
        )
        if args.start_at is not None:
            units = list(units)
            time.sleep(max(0.0, args.start_at - time.time()))
        began = time.perf_counter()
        recent: list[UnitRecord] = []
        for i, unit in enumerate(units):
            stored += store.save_unit(unit)
            recent = [*recent[-5:], unit]
            if args.replay_every and i % args.replay_every == args.replay_every - 1:
                store.save_unit(recent[0])
        if args.replay_worker is not None:
            for i in range(args.replay):
                unit = synthetic_unit(i, args.lot, args.replay_worker, args.measurements)
                replayed_new += store.save_unit(unit)
        elapsed = time.perf_counter() - began
    summary = {"stored": stored, "replayed_new": replayed_new, "seconds": elapsed}
    if trips is not None:
        summary["round_trips"] = trips.count
    print(json.dumps(summary))
    return 0


def _bare_main(args: argparse.Namespace) -> int:
    """What the machine allows: the unit statement of ``unit_insert.postgres_sql`` with the same
    parameters, sent by psycopg alone in autocommit (the server's durability unchanged)."""
    import psycopg

    from acquire.store import open_store
    from acquire.store.production import unit_parameters
    from acquire.store.unit_insert import postgres_parameters, postgres_sql

    with open_store(args.url, schema=args.schema) as store:
        lot_id = store.record_lot(args.lot)
        dialect = store.engine.dialect
        params = [
            postgres_parameters(*unit_parameters(dialect, unit, lot_id))
            for unit in (
                synthetic_unit(i, args.lot, args.worker, args.measurements)
                for i in range(args.count)
            )
        ]
    plain = args.url.replace("postgresql+psycopg://", "postgresql://", 1)
    options = {} if args.schema is None else {"options": f"-csearch_path={args.schema}"}
    sql = postgres_sql()
    with psycopg.connect(plain, autocommit=True, **options) as conn, conn.cursor() as cursor:
        if args.start_at is not None:
            time.sleep(max(0.0, args.start_at - time.time()))
        began = time.perf_counter()
        stored = 0
        for values in params:
            stored += cursor.execute(sql, values, prepare=True).fetchone() is not None
        elapsed = time.perf_counter() - began
    print(json.dumps({"stored": stored, "replayed_new": 0, "seconds": elapsed, "round_trips": 0}))
    return 0


if __name__ == "__main__":
    sys.exit(_main())
