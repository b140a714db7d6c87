"""Store upgrades: a store at revision 0001 (made by the migration itself, or by the first
release's own layout, rebuilt here) or at revision 0002 opens at the newest revision with every
row and value kept and the new columns at their defaults; several stations upgrading at once do
it once; a failed upgrade changes nothing; a revision this program does not know is refused.
Both engines.

The example data are our own invention; NaN is stored as NULL and infinity as itself, as the
store's schema module documents.
"""

from __future__ import annotations

import hashlib
import json
import math
import subprocess
import sys
import time
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from sqlalchemy import (
    JSON,
    CheckConstraint,
    Column,
    DateTime,
    Double,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Table,
    Text,
    inspect,
    select,
    text,
)
from store_support import store_location

from acquire.errors import StoreError
from acquire.store import SCHEMA_REVISION, UnitRecord, open_store
from acquire.store import migrate as migrate_module
from acquire.store.engine import Database
from acquire.store.schema import build_metadata
from acquire.store.url import parse_store_url

T0 = datetime(2026, 1, 5, 9, 30, tzinfo=UTC)
NAN, INF = math.nan, math.inf
#: Reference set 1: frequency, open, short (NaN: an invalid reading; inf: an overrange one).
REF_F = [1e3, 1e4, 1e5, 1e6]
REF_OPEN = [5e4 - 2e6j, 4e3 - 2e5j, 400 - 2e4j, complex(INF, INF)]
REF_SHORT = [complex(NAN, NAN), 0.02 + 0.02j, 0.021 + 0.19j, 0.03 + 1.9j]
#: Sweep 1 (complete): frequency, raw, corrected.
SWEEP_F = [1e2, 1e3, 1e4, 1e5, 1e6]
SWEEP_RAW = [4.8 + 0.2j, 4.8 + 2.1j, complex(NAN, NAN), 5.6 + 214j, complex(INF, INF)]
SWEEP_COR = [4.79 + 0.19j, 4.79 + 2.09j, complex(NAN, NAN), 5.58 + 213j, complex(INF, INF)]
#: Units: (serial, lot, attempt, outcome, bin, [(parameter, frequency, value, unit)]).
UNITS = [
    ("DC-0001", "LOT-A", 1, "pass", "1", [("Ls", 1e3, 3.41e-4, "H"), ("Rdc", 0.0, 4.8, "ohm")]),
    ("DC-0002", "LOT-A", 1, "fail", "reject", [("Q", 1e5, NAN, ""), ("Ls", 1e3, INF, "H")]),
    ("DC-0002", "LOT-A", 2, "pass", "1", [("Q", 1e5, 38.2, ""), ("Rs", 1e5, -INF, "ohm")]),
    ("DC-0003", "LOT-B", 1, "pass", "2", [("Q", 1e5, 37.9, "")]),
    ("DC-0004", "", 1, "pass", "1", []),
]


def _key(*parts: str) -> str:
    """A record's identity key as the schema documents it: SHA-256 of the JSON list of its parts
    (computed here with hashlib and json, not by the store's code)."""
    return hashlib.sha256(json.dumps(list(parts), ensure_ascii=False).encode()).hexdigest()


def _attempt_id(i: int) -> str:
    return f"00000000-0000-4000-8000-{i:012d}"


def released_layout() -> MetaData:
    """The tables the first release created (its ``build_metadata(2)``), written out again here
    so that this test does not depend on the migration that claims to reproduce them."""
    md = MetaData()
    stamp = DateTime(timezone=True)

    def txt(name):
        return Column(name, Text, nullable=False, default="")

    def real(name):
        return Column(name, Double, nullable=True)

    def ref(name, table):
        return Column(name, Integer, ForeignKey(f"{table}.id"), nullable=True)

    def key():
        return Column("key", String(64), nullable=False, unique=True)

    def pk():
        return Column("id", Integer, primary_key=True, autoincrement=True)

    Table(
        "schema_version",
        md,
        Column("version", Integer, primary_key=True, autoincrement=False),
        Column("applied_at", stamp, nullable=False),
        txt("note"),
    )
    Table(
        "meters",
        md,
        pk(),
        key(),
        *map(txt, ["manufacturer", "model", "serial", "firmware", "dialect"]),
        Column("first_seen", stamp, nullable=False),
    )
    Table(
        "fixtures",
        md,
        pk(),
        key(),
        txt("name"),
        txt("notes"),
        Column("created_at", stamp, nullable=False),
    )
    Table(
        "reference_sets",
        md,
        pk(),
        txt("name"),
        ref("fixture_id", "fixtures"),
        ref("meter_id", "meters"),
        txt("fixture"),
        txt("meter"),
        Column("captured_at", stamp, nullable=True),
        real("temperature"),
        *map(txt, ["notes", "method", "standards"]),
        Column("points", Integer, nullable=False),
        Column("saved_at", stamp, nullable=False),
    )
    Table(
        "reference_points",
        md,
        Column("reference_set_id", Integer, ForeignKey("reference_sets.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        Column("frequency", Double, nullable=False),
        *(real(f"{s}_{p}") for s in ("open", "short", "load", "load_true") for p in "rx"),
        sqlite_with_rowid=False,
    )
    Table(
        "sweeps",
        md,
        pk(),
        txt("dut"),
        ref("meter_id", "meters"),
        ref("fixture_id", "fixtures"),
        ref("reference_set_id", "reference_sets"),
        Column("settings", JSON, nullable=True),
        Column("status", String(16), nullable=False),
        txt("note"),
        Column("points", Integer, nullable=False, default=0),
        Column("started_at", stamp, nullable=False),
        Column("finished_at", stamp, nullable=True),
        Column("last_write_at", stamp, nullable=True),
        Column("writer_host", Text, nullable=True),
        Column("writer_pid", Integer, nullable=True),
        CheckConstraint(
            "status IN ('running', 'complete', 'interrupted')", name="ck_sweeps_status"
        ),
    )
    Table(
        "sweep_points",
        md,
        Column("sweep_id", Integer, ForeignKey("sweeps.id"), primary_key=True),
        Column("idx", Integer, primary_key=True, autoincrement=False),
        Column("frequency", Double, nullable=False),
        *map(real, ["raw_r", "raw_x", "corrected_r", "corrected_x"]),
        sqlite_with_rowid=False,
    )
    Table(
        "plans",
        md,
        pk(),
        Column("hash", String(64), nullable=False, unique=True),
        txt("name"),
        Column("text", Text, nullable=False),
        Column("created_at", stamp, nullable=False),
    )
    Table(
        "lots",
        md,
        pk(),
        key(),
        txt("name"),
        txt("notes"),
        Column("created_at", stamp, nullable=False),
    )
    Table(
        "units",
        md,
        pk(),
        Column("attempt_id", String(36), nullable=False, unique=True),
        txt("serial"),
        Column("serial_key", String(64), nullable=False, index=True),
        Column("attempt", Integer, nullable=False, default=1),
        txt("station"),
        txt("operator"),
        *(ref(f"{t[:-1]}_id", t) for t in ("plans", "reference_sets", "meters", "fixtures")),
        Column("started_at", stamp, nullable=True),
        Column("finished_at", stamp, nullable=True),
        *map(txt, ["outcome", "bin", "notes"]),
        Column("saved_at", stamp, nullable=False),
        ref("lot_id", "lots"),
        Index("ix_units_lot_id", "lot_id"),
    )
    Table(
        "measurements",
        md,
        Column("unit_id", Integer, ForeignKey("units.id"), primary_key=True),
        Column("seq", Integer, primary_key=True, autoincrement=False),
        txt("parameter"),
        real("frequency"),
        real("value"),
        txt("si_unit"),
        real("low_limit"),
        real("high_limit"),
        txt("verdict"),
        ref("lot_id", "lots"),
        Column("value_special", String(4), nullable=False, default=""),
        Index(
            "ix_measurements_lot_summary",
            "lot_id",
            "parameter",
            "frequency",
            "si_unit",
            "value",
            "verdict",
        ),
        sqlite_with_rowid=False,
    )
    return md


def _database(url: str, schema: str | None) -> Database:
    return Database(parse_store_url(url, schema))


def _in_schema(conn, schema: str | None) -> None:
    if schema is not None:
        conn.execute(text(f'CREATE SCHEMA IF NOT EXISTS "{schema}"'))


def make_revision(url: str, schema: str | None, revision: str) -> None:
    """An empty store at ``revision``, made by the migrations."""

    def work(conn) -> None:
        _in_schema(conn, schema)
        migrate_module.upgrade(conn, revision)

    db = _database(url, schema)
    try:
        db.write(f"making a revision-{revision} store", work)
    finally:
        db.dispose()


def make_revision_1(url: str, schema: str | None) -> None:
    """An empty store at revision 0001, made by the migration."""
    make_revision(url, schema, "0001")


def make_released(url: str, schema: str | None) -> None:
    """An empty store as the first release made it: its tables and schema_version 2."""
    db = _database(url, schema)

    def work(conn):
        _in_schema(conn, schema)
        md = released_layout()
        md.create_all(conn)
        when = T0 if db.is_postgres else T0.replace(tzinfo=None)
        conn.execute(md.tables["schema_version"].insert(), {"version": 2, "applied_at": when})

    try:
        db.write("making a released store", work)
    finally:
        db.dispose()


def _cells(z: list[complex]) -> list[tuple[float | None, float | None]]:
    """Complex readings as (R, X) cells the way the store keeps them (NaN as NULL)."""
    return [tuple(None if math.isnan(v) else v for v in (c.real, c.imag)) for c in z]


def fill(url: str, schema: str | None) -> None:
    """Put the example into an empty store at the first layout, through plain SQL inserts on the
    tables found in the database."""
    db = _database(url, schema)

    def work(conn):
        md = MetaData()
        md.reflect(conn)
        t = md.tables
        when = T0 if db.is_postgres else T0.replace(tzinfo=None)

        def add(table, **row):
            return conn.execute(t[table].insert().values(**row).returning(t[table].c.id)).scalar()

        identity = ("Example Instruments", "LCR-1", "SN-0042", "1.2.3", "simulated")
        meter = add("meters", key=_key(*identity), manufacturer="Example Instruments",
                    model="LCR-1", serial="SN-0042", firmware="1.2.3", dialect="simulated",
                    first_seen=when)  # fmt: skip
        fixture = add("fixtures", key=_key("bench-leads"), name="bench-leads",
                      notes="two 10 cm leads", created_at=when)  # fmt: skip
        ref = add("reference_sets", name="bench-leads morning", fixture_id=fixture,
                  meter_id=meter, fixture="bench-leads", meter="Example LCR-1", captured_at=when,
                  temperature=22.5, notes="", method="open-short", standards="open,short",
                  points=len(REF_F), saved_at=when)  # fmt: skip
        conn.execute(
            t["reference_points"].insert(),
            [
                {
                    "reference_set_id": ref,
                    "idx": i,
                    "frequency": f,
                    "open_r": o[0],
                    "open_x": o[1],
                    "short_r": s[0],
                    "short_x": s[1],
                }  # fmt: skip
                for i, (f, o, s) in enumerate(
                    zip(REF_F, _cells(REF_OPEN), _cells(REF_SHORT), strict=True)
                )
            ],
        )
        for status, count in (("complete", len(SWEEP_F)), ("running", 2)):
            sweep = add("sweeps", dut="demo-coil", meter_id=meter, fixture_id=fixture,
                        reference_set_id=ref, settings={"level": 1.0, "speed": "slow"},
                        status=status, note="", points=count, started_at=when,
                        finished_at=when if status == "complete" else None,
                        last_write_at=when, writer_host="gone-host", writer_pid=1)  # fmt: skip
            conn.execute(
                t["sweep_points"].insert(),
                [
                    {
                        "sweep_id": sweep,
                        "idx": i,
                        "frequency": f,
                        "raw_r": r[0],
                        "raw_x": r[1],
                        "corrected_r": c[0],
                        "corrected_x": c[1],
                    }  # fmt: skip
                    for i, (f, r, c) in enumerate(
                        zip(SWEEP_F, _cells(SWEEP_RAW), _cells(SWEEP_COR), strict=True)
                    )
                ][:count],
            )
        plan = add("plans", hash="p" * 64, name="demo plan", text="Ls at 1 kHz\n", created_at=when)
        lots = {n: add("lots", key=_key(n), name=n, notes="", created_at=when)
                for n in ("LOT-A", "LOT-B")}  # fmt: skip
        for i, (serial, lot, attempt, outcome, bin_, values) in enumerate(UNITS):
            unit = add("units", attempt_id=_attempt_id(i), serial=serial,
                       serial_key=_key(serial), attempt=attempt, station="bench-1",
                       operator="demo operator", plan_id=plan, reference_set_id=ref,
                       meter_id=meter, fixture_id=fixture, started_at=when,
                       finished_at=when + timedelta(seconds=20), outcome=outcome, bin=bin_,
                       notes="", saved_at=when, lot_id=lots.get(lot))  # fmt: skip
            for seq, (parameter, f, value, si) in enumerate(values):
                special = "" if math.isfinite(value) else repr(value)
                conn.execute(
                    t["measurements"].insert(),
                    {
                        "unit_id": unit,
                        "seq": seq,
                        "parameter": parameter,
                        "frequency": f,
                        "value": value if not special else None,
                        "si_unit": si,
                        "low_limit": None,
                        "high_limit": 5.5,
                        "verdict": "pass",
                        "lot_id": lots.get(lot),
                        "value_special": special,
                    },  # fmt: skip
                )

    try:
        db.write("filling a store", work)
    finally:
        db.dispose()


def dump(url: str, schema: str | None) -> dict[str, list[dict]]:
    """Every row of every table (but the version records), in primary-key order."""
    db = _database(url, schema)

    def work(conn):
        md = MetaData()
        md.reflect(conn)
        out = {}
        for name, table in md.tables.items():
            if name in ("schema_version", "alembic_version"):
                continue
            rows = conn.execute(select(table).order_by(*table.primary_key.columns)).mappings()
            out[name] = [dict(r) for r in rows]
        return out

    try:
        return db.read("dumping a store", work)
    finally:
        db.dispose()


def _raw(url: str, schema: str | None, sql: str) -> list[tuple]:
    db = _database(url, schema)
    try:
        return db.read("querying", lambda c: [tuple(r) for r in c.execute(text(sql))])
    finally:
        db.dispose()


def _change(url: str, schema: str | None, sql: str) -> None:
    db = _database(url, schema)
    try:
        db.write("changing", lambda c: c.execute(text(sql)))
    finally:
        db.dispose()


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request, tmp_path):
    with store_location(request.param, tmp_path) as found:
        yield found


def check_example(store, revision_2_values: bool = False) -> None:
    """The example, read through the store's API, equals what was put in (with the values of
    :data:`REVISION_2_VALUES` when ``revision_2_values``)."""
    refs = store.load_reference_set(1)
    assert np.array_equal(refs.frequency, REF_F)
    assert np.array_equal(refs.open, REF_OPEN, equal_nan=True)
    assert np.array_equal(refs.short, REF_SHORT, equal_nan=True)
    assert refs.load is None and refs.method == "open-short"
    assert (refs.captured_at, refs.temperature) == (T0, 22.5)
    done, died = store.list_sweeps()
    points = store.sweep_points(done.id)
    assert (done.status, done.points, done.settings) == (
        "complete",
        5,
        {"level": 1.0, "speed": "slow"},
    )
    assert np.array_equal(points.frequency, SWEEP_F)
    for name, want in (("raw", SWEEP_RAW), ("corrected", SWEEP_COR)):
        got = points[[f"{name}_r", f"{name}_x"]].to_numpy()
        assert np.array_equal(got, [(z.real, z.imag) for z in want], equal_nan=True), name
    if revision_2_values:
        assert np.array_equal(points.u_r, [0.001, 0.003, 0.005, NAN, NAN], equal_nan=True)
        assert np.array_equal(points.u_x, [0.003] * 3 + [NAN] * 2, equal_nan=True)
        assert points["flags"].tolist() == ["beyond-accuracy"] * 3 + [""] * 2
    else:
        assert points.u_r.isna().all() and points.u_x.isna().all()
        assert points["flags"].tolist() == [""] * 5
    assert (died.status, died.recorded_status, died.points) == ("interrupted", "running", 2)
    for i, (serial, lot, attempt, outcome, bin_, values) in enumerate(UNITS):
        unit = store.load_unit(_attempt_id(i))
        assert (unit.serial, unit.lot, unit.attempt, unit.outcome, unit.bin) == (
            serial,
            lot,
            attempt,
            outcome,
            bin_,
        )
        got = [(m.parameter, m.frequency, m.value, m.unit) for m in unit.measurements]
        want = [(p, None if f == 0.0 else f, v, s) for p, f, v, s in values]
        assert len(got) == len(want)
        for g, w in zip(got, want, strict=True):
            assert g[:2] + g[3:] == w[:2] + w[3:]
            assert g[2] == w[2] or (math.isnan(g[2]) and math.isnan(w[2]))
    assert {(lot.name, lot.attempts) for lot in store.list_lots()} == {("LOT-A", 3), ("LOT-B", 1)}
    y = store.lot_yield("LOT-A")
    assert (y.attempts, y.serials, y.first_pass, y.final_pass) == (3, 2, 1, 2)


def _same_rows(before: dict, after: dict) -> None:
    """Every row of ``before`` is in ``after`` with the same values (NaN never stored); the
    tables a later revision added are there and empty."""
    assert set(after) >= set(before)
    assert all(after[name] == [] for name in set(after) - set(before))
    for table, rows in before.items():
        kept = [{k: r[k] for k in rows[0]} for r in after[table]] if rows else after[table]
        assert kept == rows, table


def check_new_columns(url: str, schema: str | None) -> None:
    assert _raw(url, schema, "SELECT DISTINCT u_r, u_x, flags FROM sweep_points") == [
        (None, None, "")
    ]
    assert _raw(url, schema, "SELECT DISTINCT open_u, short_u, load_u FROM reference_points") == [
        (None, None, None)
    ]
    assert _raw(url, schema, "SELECT DISTINCT repeats FROM reference_sets") == [(1,)]
    assert _raw(url, schema, "SELECT DISTINCT grid_spacing FROM reference_sets") == [("",)]
    assert _raw(url, schema, "SELECT version_num FROM alembic_version") == [(SCHEMA_REVISION,)]
    versions = _raw(url, schema, "SELECT version FROM schema_version ORDER BY version")
    assert versions == [(2,), (3,)]
    check_production_columns(url, schema)


def check_production_columns(url: str, schema: str | None) -> None:
    """The columns of revision 0003 hold their defaults in every row stored before it."""
    sql = "SELECT DISTINCT uncertainty, tolerance_low, tolerance_high FROM measurements"
    assert _raw(url, schema, sql) == [(None, None, None)]
    sql = "SELECT DISTINCT reference_override, temperature FROM units"
    assert _raw(url, schema, sql) == [("", None)]


def check_test_times(url: str, schema: str | None) -> None:
    """Revision 0004 gave every measurement stored before it its unit's test time."""
    sql = (
        "SELECT COUNT(*) FROM measurements m JOIN units u ON u.id = m.unit_id WHERE "
        "m.tested_at IS NULL OR m.tested_at <> COALESCE(u.finished_at, u.started_at, u.saved_at)"
    )
    assert _raw(url, schema, sql) == [(0,)]
    assert _raw(url, schema, "SELECT COUNT(*) FROM measurements")[0][0] > 0


@pytest.mark.parametrize("origin", ["revision 1", "first release"])
def test_upgrade_keeps_every_row_and_value(place, origin):
    url, schema = place
    (make_revision_1 if origin == "revision 1" else make_released)(url, schema)
    fill(url, schema)
    before = dump(url, schema)
    with open_store(url, schema=schema) as store:
        assert (store.created, store.migrated_from) == (
            False,
            "0001" if origin == "revision 1" else "released",
        )
        check_example(store)
        assert store.save_unit(UnitRecord(serial="DC-0100", lot="LOT-A", outcome="pass"))
        with store.begin_sweep("demo-coil") as w:
            w.add_points([1e3], [1j], [1j], [[0.1, 0.2]], ["beyond-accuracy"])
        if store.engine_name == "sqlite":
            with store.engine.connect() as conn:
                assert conn.exec_driver_sql("PRAGMA integrity_check").scalar_one() == "ok"
                assert conn.exec_driver_sql("PRAGMA foreign_key_check").all() == []
    after = dump(url, schema)
    after["units"] = [u for u in after["units"] if u["serial"] != "DC-0100"]
    after["sweeps"] = after["sweeps"][:2]
    after["sweep_points"] = [p for p in after["sweep_points"] if p["sweep_id"] <= 2]
    _same_rows(before, after)
    with open_store(url, schema=schema) as again:
        assert again.migrated_from is None and again.lot("LOT-A").attempts == 4
        assert again.sweep_points(3)["flags"].tolist() == ["beyond-accuracy"]


def test_new_columns_have_their_defaults_after_an_upgrade(place):
    url, schema = place
    make_revision_1(url, schema)
    fill(url, schema)
    open_store(url, schema=schema).close()
    check_new_columns(url, schema)


#: Values put in the columns revision 0002 added, so that an upgrade from it must keep them.
REVISION_2_VALUES = [
    "UPDATE sweep_points SET u_r = 0.002 * idx + 0.001, u_x = 0.003, flags = 'beyond-accuracy' "
    "WHERE sweep_id = 1 AND idx < 3",
    "UPDATE reference_points SET open_u = 1.5, short_u = 0.0004 WHERE idx = 1",
    "UPDATE reference_sets SET repeats = 4, grid_spacing = 'log'",
]


def test_upgrade_from_revision_2_keeps_every_row_and_value(place):
    url, schema = place
    make_revision(url, schema, "0002")
    fill(url, schema)
    for sql in REVISION_2_VALUES:
        _change(url, schema, sql)
    before = dump(url, schema)
    assert before["reference_sets"][0]["repeats"] == 4
    with open_store(url, schema=schema) as store:
        assert (store.created, store.migrated_from) == (False, "0002")
        check_example(store, revision_2_values=True)
    _same_rows(before, dump(url, schema))
    check_production_columns(url, schema)
    check_test_times(url, schema)
    assert _raw(url, schema, "SELECT version_num FROM alembic_version") == [(SCHEMA_REVISION,)]
    points = _raw(url, schema, "SELECT u_r, u_x, flags FROM sweep_points ORDER BY sweep_id, idx")
    assert points[:3] == [(0.001, 0.003, "beyond-accuracy"), (0.003, 0.003, "beyond-accuracy"),
                          (0.005, 0.003, "beyond-accuracy")]  # fmt: skip
    assert points[3:] == [(None, None, "")] * (len(points) - 3)


def _layout(url: str, schema: str | None) -> dict:
    """Tables, columns (name, type, nullable, default), indexes, foreign keys and uniques."""
    db = _database(url, schema)

    def work(conn):
        insp = inspect(conn)
        out = {}
        for table in insp.get_table_names():
            columns = {
                (c["name"], str(c["type"]), c["nullable"], c.get("default"))
                for c in insp.get_columns(table)
            }
            indexes = {
                (i["name"], tuple(i["column_names"]), bool(i["unique"]))
                for i in insp.get_indexes(table)
            }
            keys = {
                (tuple(k["constrained_columns"]), k["referred_table"], tuple(k["referred_columns"]))
                for k in insp.get_foreign_keys(table)
            }
            uniques = {tuple(u["column_names"]) for u in insp.get_unique_constraints(table)}
            checks = {c["name"] for c in insp.get_check_constraints(table)}
            out[table] = (columns, indexes, keys, uniques, checks)
        return out

    try:
        return db.read("reading the layout", work)
    finally:
        db.dispose()


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_every_way_to_the_newest_revision_gives_the_declared_layout(engine, tmp_path):
    """A new store, an upgraded revision-1 store and an upgraded first-release store all have the
    layout that ``acquire.store.schema`` declares (plus Alembic's version table)."""
    for name in ("declared", "new", "revision 1", "released"):
        (tmp_path / name).mkdir()
    with (
        store_location(engine, tmp_path / "declared") as declared,
        store_location(engine, tmp_path / "new") as new,
        store_location(engine, tmp_path / "revision 1") as old,
        store_location(engine, tmp_path / "released") as released,
    ):
        db = _database(*declared)
        db.write(
            "declaring", lambda c: (_in_schema(c, declared[1]), build_metadata().create_all(c))
        )
        db.dispose()
        make_revision_1(*old)
        make_released(*released)
        for place in (new, old, released):
            open_store(place[0], schema=place[1]).close()
        places = {"new": _layout(*new), "old": _layout(*old), "released": _layout(*released)}
        want = _layout(*declared)
    version_table = places["new"].pop("alembic_version")
    assert {c[0] for c in version_table[0]} == {"version_num"}
    assert places["new"] == want
    assert places["old"] == places["released"] == places["new"] | {"alembic_version": version_table}


def test_unknown_revision_is_refused_and_left_alone(place):
    url, schema = place
    with open_store(url, schema=schema) as store:
        store.record_lot("LOT-1")
    _change(url, schema, "UPDATE alembic_version SET version_num = '0099'")
    with pytest.raises(StoreError) as caught:
        open_store(url, schema=schema)
    message = str(caught.value)
    assert "\n" not in message
    assert "revision 0099" in message and "update coil-acquire" in message
    assert _raw(url, schema, "SELECT version_num FROM alembic_version") == [("0099",)]
    assert _raw(url, schema, "SELECT name FROM lots") == [("LOT-1",)]


def test_failed_upgrade_changes_nothing(place, monkeypatch):
    url, schema = place
    make_revision_1(url, schema)
    fill(url, schema)
    before = dump(url, schema)
    real = migrate_module.upgrade

    def broken(conn, target="head"):
        real(conn, target)
        raise StoreError("simulated failure after the upgrade ran")

    monkeypatch.setattr(migrate_module, "upgrade", broken)
    with pytest.raises(StoreError, match="simulated failure"):
        open_store(url, schema=schema)
    monkeypatch.setattr(migrate_module, "upgrade", real)
    assert _raw(url, schema, "SELECT version_num FROM alembic_version") == [("0001",)]
    assert dump(url, schema) == before
    with open_store(url, schema=schema) as store:
        assert store.migrated_from == "0001"
        check_example(store)


def test_store_of_an_unknown_old_version_is_refused(tmp_path):
    url = f"sqlite:///{tmp_path / 'odd.db'}"
    make_released(url, None)
    _change(url, None, "UPDATE schema_version SET version = 1")
    with pytest.raises(StoreError, match="schema version 1 but no revision record"):
        open_store(url)


_OPENER = """
import sys, time
from acquire.store import open_store
time.sleep(max(0.0, float(sys.argv[3]) - time.time()))
with open_store(sys.argv[1], schema=sys.argv[2] or None) as store:
    print(store.migrated_from)
"""


def test_stations_upgrading_at_once_do_it_once(place):
    url, schema = place
    make_revision_1(url, schema)
    fill(url, schema)
    start = f"{time.time() + 3.0:.3f}"
    procs = [
        subprocess.Popen(
            [sys.executable, "-c", _OPENER, url, schema or "", start],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            text=True,
        )
        for _ in range(3)
    ]
    outs = [p.communicate(timeout=60) for p in procs]
    assert [p.returncode for p in procs] == [0, 0, 0], [err for _, err in outs]
    found = sorted(out.strip() for out, _ in outs)
    assert found == ["0001", "None", "None"]
    assert _raw(url, schema, "SELECT version FROM schema_version ORDER BY version") == [(2,), (3,)]
    with open_store(url, schema=schema) as store:
        check_example(store)


def test_declared_revision_is_the_newest_migration():
    """schema.SCHEMA_REVISION (what the code reads and writes) names the last migration file."""
    from alembic.script import ScriptDirectory

    script = ScriptDirectory(str(migrate_module.MIGRATIONS))
    assert script.get_heads() == [SCHEMA_REVISION]
    files = sorted(p.name for p in (migrate_module.MIGRATIONS / "versions").glob("0*.py"))
    assert files[-1].startswith(SCHEMA_REVISION + "_")


def test_opening_a_current_store_does_not_load_alembic(tmp_path):
    """Alembic takes a good part of a second to import; a command opening an up-to-date store
    (every command but the first after an upgrade) should not pay for it."""
    url = f"sqlite:///{tmp_path / 'current.db'}"
    open_store(url).close()
    probe = (
        "import sys; from acquire.store import open_store; "
        f"open_store({url!r}).close(); print('alembic' in sys.modules)"
    )
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=60)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "False"
