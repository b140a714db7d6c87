"""Speed of the results store, as ratios against baselines measured in the same run.

    python benchmarks/bench_store.py            # full sizes (about two and a half minutes)
    python benchmarks/bench_store.py --quick    # smaller sizes (about 40 s; rougher numbers)
    python benchmarks/bench_store.py --only units   # one case (units, stations, lot; repeatable)

1. Units into SQLite with durability on (WAL, synchronous=FULL, one transaction per unit), each
   unit with 10 measurements, through ``Store.save_unit``; baseline: bare ``sqlite3`` putting the
   same rows into an identical empty store, one transaction per unit (``execute`` for the unit,
   ``executemany`` for its measurements, same pragmas, same table and indexes, rows prepared
   outside the timing). A third side, bare ``sqlite3`` that prepares each unit with the store's
   own ``unit_parameters`` inside the timing, shows how much of the gap is preparing the values
   and how much is the store around them. Each round interleaves the three unit by unit (the
   order turns with each unit), so all meet the same moods of the shared disk, and the best
   round total of each counts; each round's ratio and the thread's CPU time per unit are
   printed beside it. Goal: at least 0.9x the baseline.
2. Four station processes writing units to PostgreSQL at once (``python
   tests/store_support.py``), beside one such process alone and beside what the machine allows:
   four bare psycopg processes (``--bare``) sending the same one statement with the same
   parameters (prepared before the timing) in autocommit, the server's durability unchanged
   (synchronous_commit on). Rounds interleave the two; the best of each counts. Goal: at least
   1,000 units/s together.
3. Lot statistics as ``acquire lot LOT`` computes them (the selection made by the command's own
   argument handling, then ``lot_statistics``: yields, bins, per quantity mean, std, extremes,
   moving ranges in test order, limits) over 100,000 units of 10 measurements each (Rdc among
   them) loaded with bulk inserts outside the timing; best of 3 (no cache between the calls:
   each reads the store again). Goal: at most 0.5 s. Beside it two floors: the bare driver
   reading the lot's packed readings (a row per unit, ``units.readings``, what lot_statistics
   reads) in test order, and the bare driver reading the lot's finite values in test order from
   the measurement rows (a row per measurement, what it read before revision 0012). Also the
   older ``lot_summary`` against the same rows grouped in pandas.
   On PostgreSQL too when it is reachable, after the
   ``VACUUM ANALYZE`` that autovacuum would run after such a bulk load.

The PostgreSQL server is ``ACQUIRE_TEST_POSTGRES`` (default
postgresql://postgres@127.0.0.1:5432/test); each run uses its own schema and drops it.
Unit values are demo data of our own invention (``tests/store_support.py``).
"""

from __future__ import annotations

import argparse
import json
import sqlite3
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pandas as pd
from sqlalchemy import text

from acquire.report.statistics import lot_statistics
from acquire.store import UnitRecord, open_store
from acquire.store.lot_query import LotFilter
from acquire.store.production import MEASUREMENT_COLUMNS, unit_parameters
from acquire.store.unit_insert import UNIT_COLUMNS

sys.path.insert(0, str(Path(__file__).resolve().parent))
from goals import Goal  # noqa: E402 - benchmarks run as scripts
from goals import report as report_goal

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from store_support import (  # noqa: E402 - the tests' helpers, found through the path above
    STATION,
    make_unit,
    postgres_unreachable,
    postgres_url,
    temporary_schema,
)

ROWS: list[tuple[str, str, str, str, str]] = []


def report(case: str, ours: str, baseline: str, ratio: str, goal: str, met: bool | None) -> None:
    ROWS.append((case, ours, baseline, ratio, goal, {True: "yes", False: "NO", None: "-"}[met]))


def synthetic_units(
    count: int, lot: str = "LOT-1", worker: int = 0, measurements: int = 10, seed: int = 0
) -> Iterator[UnitRecord]:
    """``count`` synthetic units like the tests' ``synthetic_unit`` (other values, drawn in one
    go: faster for the large loads here)."""
    z = np.random.default_rng([seed, worker, count, 1]).standard_normal((count, measurements))
    for index in range(count):
        yield make_unit(index, lot, worker, z[index].tolist(), seed)


def _sqlite_rows(unit):
    """The unit's rows exactly as the store writes them (its own preparation, bind processing
    included), as plain tuples for sqlite3: the unit's values in ``UNIT_COLUMNS`` order and its
    measurement rows without ``unit_id``."""
    head, rows = unit_parameters(_DIALECT, unit, None)
    return tuple(head), rows


def _stored(conn) -> tuple[list, list]:
    """Every unit (without id and saved_at) and measurement (without unit_id) in a store."""
    keep = [c for c in UNIT_COLUMNS if c != "saved_at"]
    units = conn.execute(f"SELECT {', '.join(keep)} FROM units ORDER BY id").fetchall()
    ms = conn.execute(
        f"SELECT {', '.join(MEASUREMENT_COLUMNS[1:])} FROM measurements ORDER BY unit_id, seq"
    ).fetchall()
    return units, ms


def _bare_connection(path: Path) -> sqlite3.Connection:
    """A plain sqlite3 connection to a store file with the store's durability settings."""
    open_store(f"sqlite:///{path}").close()
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("PRAGMA foreign_keys = ON")
    return conn


def bench_sqlite_units(folder: Path, per_round: int, rounds: int) -> None:
    """The store's ``save_unit`` against bare sqlite3 writing the same rows handed to it ready
    (the goal), and, as a third side, bare sqlite3 that prepares each unit's values itself with
    the store's own :func:`unit_parameters` inside the timing: how much of the gap is preparing
    the values (which the goal's baseline does not pay) and how much is the store around it."""
    global _DIALECT
    store = open_store(f"sqlite:///{folder / 'store.db'}")
    _DIALECT = store.engine.dialect
    bare, prepares = _bare_connection(folder / "bare.db"), _bare_connection(folder / "prep.db")
    mcols = MEASUREMENT_COLUMNS
    m_sql = f"INSERT INTO measurements ({', '.join(mcols)}) VALUES ({', '.join('?' * len(mcols))})"
    u_cols = ", ".join(UNIT_COLUMNS)
    u_sql = f"INSERT INTO units ({u_cols}) VALUES ({', '.join('?' * len(UNIT_COLUMNS))})"

    def bare_unit(conn, head, measurements) -> None:
        conn.execute("BEGIN IMMEDIATE")
        unit_id = conn.execute(u_sql, head).lastrowid
        conn.executemany(m_sql, [(unit_id, *m) for m in measurements])
        conn.execute("COMMIT")

    # Interleaved unit by unit (the order of the sides turns with each unit), so all meet the
    # disk's moods alike: a round's total per side, wall and the thread's CPU time.
    totals = np.zeros((rounds, 3, 2))
    orders = ((0, 1, 2), (1, 2, 0), (2, 0, 1), (2, 1, 0), (1, 0, 2), (0, 2, 1))
    for r in range(rounds):
        units = list(synthetic_units(per_round, lot="", worker=3 * r))
        theirs = [_sqlite_rows(u) for u in synthetic_units(per_round, lot="", worker=3 * r + 1)]
        raw = list(synthetic_units(per_round, lot="", worker=3 * r + 2))
        clock, cpu_clock = time.perf_counter, time.thread_time
        spent = totals[r]
        for k, (unit, (head, measurements), own) in enumerate(zip(units, theirs, raw, strict=True)):
            for side in orders[k % len(orders)]:
                wall, cpu = clock(), cpu_clock()
                if side == 0:  # bare_unit written out: no call per unit
                    bare.execute("BEGIN IMMEDIATE")
                    unit_id = bare.execute(u_sql, head).lastrowid
                    bare.executemany(m_sql, [(unit_id, *m) for m in measurements])
                    bare.execute("COMMIT")
                elif side == 1:
                    store.save_unit(unit)
                else:
                    row, rows = unit_parameters(_DIALECT, own, None)
                    prepares.execute("BEGIN IMMEDIATE")
                    unit_id = prepares.execute(u_sql, row).lastrowid
                    prepares.executemany(m_sql, [(unit_id, *m) for m in rows])
                    prepares.execute("COMMIT")
                spent[side] += clock() - wall, cpu_clock() - cpu
    # The same rows: one more unit written by each side gives the same stored values.
    check = next(synthetic_units(1, lot="", worker=3 * rounds))
    bare_unit(bare, *_sqlite_rows(check))
    store.save_unit(check)
    store_raw = store.engine.raw_connection().driver_connection
    ends = [[rows[-1] for rows in _stored(c)] for c in (bare, store_raw)]
    assert ends[0] == ends[1], "the baseline stores other values than the store"
    durability = [
        [c.execute(f"PRAGMA {p}").fetchone()[0] for p in ("journal_mode", "synchronous")]
        for c in (bare, store_raw, prepares)
    ]
    assert durability[0] == durability[1] == durability[2] == ["wal", 2], "durability differs"
    same_indexes = [
        sorted(c.execute("SELECT name, sql FROM sqlite_master WHERE tbl_name = 'measurements'"))
        for c in (bare, store_raw)
    ]
    assert same_indexes[0] == same_indexes[1], "the baseline's table differs from the store's"
    bare.close()
    prepares.close()
    store.close()
    best = totals.min(axis=0)
    ours, base, prep = (per_round / best[k, 0] for k in (1, 0, 2))
    each = totals[:, 0, 0] / totals[:, 1, 0]
    cpu = 1e6 * best[:, 1] / per_round
    print(
        f"SQLite units: each round's ratio {each.min():.2f}x to {each.max():.2f}x (median "
        f"{np.median(each):.2f}x); thread CPU per unit: store {cpu[1]:.0f} us, bare {cpu[0]:.0f} "
        f"us, bare preparing its own values {cpu[2]:.0f} us\n"
        f"  bare sqlite3 preparing each unit's values with the store's unit_parameters inside the "
        f"timing: {prep / base:.3f}x of bare (the store: {ours / base:.3f}x); per unit, "
        f"preparing costs {1e6 * (1 / prep - 1 / base):.0f} us, the store around it "
        f"{1e6 * (1 / ours - 1 / prep):.0f} us"
    )
    report(
        f"SQLite units (10 meas., FULL sync), {rounds} x {per_round}",
        f"{ours:,.0f} units/s",
        f"{base:,.0f} units/s",
        f"{ours / base:.2f}x",
        ">= 0.9x",
        ours / base >= 0.9,
    )
    GOALS.append(
        Goal("SQLite units vs bare sqlite3, same durability", ours / base, 0.9, "x", "higher",
             "bare sqlite3, rows prepared outside the timing; the same with the store's own "
             f"preparation inside the timing: {prep / base:.3f}x")
    )  # fmt: skip


def _stations(
    url: str, schema: str, count: int, per_station: int, first_worker: int, bare: bool = False
) -> float:
    start = time.time() + 2.0 + 0.5 * count
    procs = [
        subprocess.Popen(
            [
                sys.executable,
                STATION,
                url,
                "--schema",
                schema,
                "--worker",
                str(first_worker + k),
                "--count",
                str(per_station),
                "--replay-every",
                "0",
                "--start-at",
                f"{start:.3f}",
                "--count-round-trips",
                *(["--bare"] if bare else []),
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )  # fmt: skip
        for k in range(count)
    ]
    seconds, trips = [], 0
    for p in procs:
        out, err = p.communicate(timeout=600)
        if p.returncode != 0:
            raise SystemExit(f"a station process failed:\n{err}")
        seconds.append(json.loads(out)["seconds"])
        trips += json.loads(out)["round_trips"]
    if not bare:
        ROUND_TRIPS.append(trips / (count * per_station))
    return count * per_station / max(seconds)


def bench_postgres_stations(per_station: int, rounds: int) -> None:
    url = postgres_url()
    reason = postgres_unreachable(url)
    if reason:
        report("PostgreSQL, 4 stations", "skipped", reason, "-", ">= 1,000/s", None)
        return
    with temporary_schema(url) as schema:
        open_store(url, schema=schema).close()
        one = _stations(url, schema, 1, per_station, 100)
        fours, bares = [], []
        for r in range(rounds):  # interleaved, which goes first alternating; the best counts
            first = r % 2 == 0
            for bare in (False, True) if first else (True, False):
                rates = bares if bare else fours
                rates.append(_stations(url, schema, 4, per_station, 1000 * r + 10 * bare, bare))
    four, bare = max(fours), max(bares)
    per_unit = ROUND_TRIPS[-1]
    report(
        f"PostgreSQL units, 4 stations x {per_station} ({per_unit:.2f} round trips a unit)",
        f"{four:,.0f} units/s",
        f"{bare:,.0f} units/s (4 bare psycopg); 1 station {one:,.0f}",
        f"{four / bare:.2f}x",
        ">= 1,000/s together",
        four >= 1000,
    )
    GOALS.append(
        Goal(f"PostgreSQL, 4 stations writing units ({per_unit:.2f} round trips per unit)",
             four, 1000, " units/s", "higher",
             f"4 bare psycopg processes, same statement, autocommit: {bare:,.0f} units/s "
             f"({four / bare:.2f}x of it); 1 station alone {one:,.0f} units/s")
    )  # fmt: skip


def _time(call, repeat: int = 3) -> float:
    best = float("inf")
    for _ in range(repeat):
        began = time.perf_counter()
        call()
        best = min(best, time.perf_counter() - began)
    return best


def _pandas_summary(store) -> pd.DataFrame:
    query = text(
        "SELECT parameter, frequency, si_unit, value, verdict FROM measurements m "
        "JOIN lots l ON l.id = m.lot_id WHERE l.name = :lot"
    )
    with store.engine.connect() as conn:
        frame = pd.DataFrame(conn.execute(query, {"lot": "LOT-BIG"}).all())
    frame["passed"] = frame["verdict"] == "pass"
    grouped = frame.groupby(["parameter", "frequency", "si_unit"])
    return grouped.agg(
        count=("value", "size"),
        passed=("passed", "sum"),
        mean=("value", "mean"),
        std=("value", "std"),
    )


def _bare_rows(store, sql: str) -> list:
    """Every row of ``sql``, fetched at once by the bare driver (binary rows on PostgreSQL)."""
    postgres = store.engine_name == "postgresql"
    raw = store.engine.raw_connection()
    try:
        driver = raw.driver_connection
        cursor = driver.cursor(binary=True) if postgres else driver.cursor()
        cursor.execute(sql)
        rows = cursor.fetchall()
        cursor.close()
        if postgres:
            driver.rollback()
    finally:
        raw.close()
    return rows


def _bare_values(store) -> np.ndarray:
    """The lot's finite values in test order, read by the bare driver into numpy: one plain
    query on the test-order index (no sort), rows fetched at once (binary rows on PostgreSQL)."""
    postgres = store.engine_name == "postgresql"
    finite = "m.value_special = ''" if postgres else "length(m.value_special) = 0"
    sql = (
        "SELECT m.value FROM measurements m WHERE m.lot_id = (SELECT id FROM lots WHERE name = "
        f"'LOT-BIG') AND {finite} AND m.value IS NOT NULL ORDER BY m.parameter, m.frequency, "
        "m.si_unit, m.value_special, m.tested_at, m.unit_id, m.seq"
    )
    return np.fromiter((v for (v,) in _bare_rows(store, sql)), float)


def _bare_packed(store) -> np.ndarray:
    """The lot's packed readings (every unit's values, limits, verdicts; one row a unit) in
    test order, read by the bare driver and taken by numpy as one byte array: the floor of
    what lot_statistics reads now."""
    sql = (
        "SELECT u.readings FROM units u WHERE u.lot_id = (SELECT id FROM lots WHERE name = "
        "'LOT-BIG') ORDER BY COALESCE(u.finished_at, u.started_at, u.saved_at), u.id"
    )
    return np.frombuffer(b"".join(b for (b,) in _bare_rows(store, sql)), np.uint8)


def _command_filter(lot: str) -> LotFilter:
    """The selection ``acquire lot LOT`` makes, through the command's own argument handling."""
    from acquire.commands import lot as lot_command

    parser = argparse.ArgumentParser()
    lot_command.add_arguments(parser)
    return lot_command.filter_from_args(parser.parse_args([lot]))


def bench_summary(store, units: int, label: str) -> None:
    began = time.perf_counter()
    store.save_units(synthetic_units(units, lot="LOT-BIG", worker=7), batch=5000)
    loaded = time.perf_counter() - began
    if store.engine_name == "postgresql":
        with store.engine.connect().execution_options(isolation_level="AUTOCOMMIT") as conn:
            conn.exec_driver_sql("VACUUM ANALYZE")
    summary = store.lot_summary("LOT-BIG")
    assert int(summary["count"].sum()) == 10 * units, "the summary lost rows"
    ours = _time(lambda: store.lot_summary("LOT-BIG"))
    per_serial = _time(lambda: store.lot_yield("LOT-BIG"))
    chosen = _command_filter("LOT-BIG")
    assert chosen == LotFilter(lot="LOT-BIG"), "the command selects other units"
    stats = _time(lambda: lot_statistics(store, chosen))
    finite = _bare_values(store).size
    floor = _time(lambda: _bare_values(store))
    packed = _time(lambda: _bare_packed(store))
    GOALS.append(
        Goal(f"{label} lot summary (acquire lot's statistics) over {units:,} units", stats,
             0.5, " s", "lower",
             f"the driver alone reading the lot's packed readings in test order (one row a "
             f"unit, what lot_statistics reads): {packed:.3f} s; the lot's {finite:,} finite "
             f"values in test order from the measurement rows (a row each): {floor:.3f} s")
    )  # fmt: skip
    theirs = _time(lambda: _pandas_summary(store), repeat=1)
    report(
        f"{label} lot summary, {units:,} units (loaded in {loaded:.0f} s)",
        f"{ours:.3f} s",
        f"{theirs:.3f} s (rows into pandas)",
        f"{theirs / ours:.1f}x faster",
        "< 1 s",
        ours < 1.0,
    )
    report(
        f"{label} lot yield per serial", f"{per_serial:.3f} s", "-", "-", "< 1 s", per_serial < 1.0
    )


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, for a fast look")
    parser.add_argument("--no-postgres", action="store_true", help="SQLite only")
    parser.add_argument(
        "--only",
        action="append",
        choices=CASES,
        help="run only this case (units: 1, stations: 2, lot: 3); may be given again",
    )
    args = parser.parse_args()
    cases = set(args.only or CASES)
    per_round, rounds = (400, 3) if args.quick else (1500, 5)
    per_station = 500 if args.quick else 1000
    summary_units = 20_000 if args.quick else 100_000
    if args.quick and "lot" in cases:
        print(f"QUICK RUN: the lot statistics use a lot of {summary_units:,} units, not 100,000")
    with tempfile.TemporaryDirectory() as folder:
        if "units" in cases:
            bench_sqlite_units(Path(folder), per_round, rounds)
        if "lot" in cases:
            with open_store(f"sqlite:///{Path(folder) / 'big.db'}") as store:
                bench_summary(store, summary_units, "SQLite")
    if not args.no_postgres:
        if "stations" in cases:
            bench_postgres_stations(per_station, 2 if args.quick else 3)
        url = postgres_url()
        if "lot" in cases and postgres_unreachable(url) is None:
            with temporary_schema(url) as schema, open_store(url, schema=schema) as store:
                bench_summary(store, summary_units, "PostgreSQL")
    widths = [max(len(r[i]) for r in ROWS + [HEAD]) for i in range(6)]
    for row in [HEAD, tuple("-" * w for w in widths), *ROWS]:
        print("  ".join(cell.ljust(w) for cell, w in zip(row, widths, strict=True)))
    if args.quick:
        print("QUICK RUN: smaller lot and fewer units than the goals name; rough figures")
    for goal in GOALS:
        report_goal(goal)
    return 0 if all(g.met for g in GOALS) else 1


#: The cases ``--only`` picks from, in the order they run.
CASES = ("units", "stations", "lot")
GOALS: list[Goal] = []
ROUND_TRIPS: list[float] = []
HEAD = ("case", "store", "baseline", "ratio", "goal", "met")
_DIALECT = None

if __name__ == "__main__":
    sys.exit(main())
