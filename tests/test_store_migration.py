"""Store migrations: a version-1 store (the checked-in file, or one the code makes now, on both
engines) opens as version 2 with every value kept; a newer store is refused; a failed migration
changes nothing."""

from __future__ import annotations

import math
import shutil
import sqlite3
from pathlib import Path

import numpy as np
import pytest
from sqlalchemy import inspect, text

from acquire.errors import StoreError
from acquire.store import SCHEMA_VERSION, UnitRecord, open_store
from acquire.store import migrate as migrate_module
from acquire.store.engine import Database
from acquire.store.legacy import (
    EXAMPLE_V1,
    attempt_id_of,
    create_store_at_version,
    fill_v1_example,
)
from acquire.store.testing import store_location
from acquire.store.url import parse_store_url

FIXTURE_V1 = Path(__file__).parent / "data" / "store_v1.db"


@pytest.fixture(params=["sqlite-file", "sqlite", "postgresql"])
def v1_place(request, tmp_path):
    """(url, schema) of a version-1 store holding EXAMPLE_V1."""
    if request.param == "sqlite-file":
        copy = tmp_path / "store_v1.db"
        shutil.copyfile(FIXTURE_V1, copy)
        yield f"sqlite:///{copy}", None
        return
    with store_location(request.param, tmp_path) as (url, schema):
        create_store_at_version(url, 1, schema)
        fill_v1_example(url, schema)
        yield url, schema


def _versions(store) -> list[int]:
    with store.engine.connect() as conn:
        return (
            conn.execute(text("SELECT version FROM schema_version ORDER BY version"))
            .scalars()
            .all()
        )


def _check_example(store) -> None:
    ex = EXAMPLE_V1
    m = store.meter(1)
    assert (m.manufacturer, m.model, m.serial, m.firmware, m.dialect) == ex["meter"]
    f = store.fixture(1)
    assert (f.name, f.notes) == ex["fixture"]
    refs = store.load_reference_set(1)
    r = ex["reference"]
    assert np.array_equal(refs.frequency, r["frequency"])
    assert np.array_equal(refs.open, r["open"]) and np.array_equal(refs.short, r["short"])
    assert refs.load is None and refs.method == "open-short"
    assert (refs.captured_at, refs.temperature) == (r["captured_at"], r["temperature"])
    assert store.list_reference_sets()[0].name == r["name"]
    done, died = store.list_sweeps()
    assert (done.status, done.points, done.settings) == (
        "complete",
        5,
        ex["sweep_complete"]["settings"],
    )
    raw = store.sweep_points(done.id)
    assert np.array_equal(raw.frequency, ex["sweep_complete"]["frequency"])
    assert np.array_equal(raw.raw_r + 1j * raw.raw_x, ex["sweep_complete"]["raw"])
    assert (died.status, died.recorded_status, died.points) == ("interrupted", "running", 2)
    plan_text, plan_name = ex["plan"]
    assert (store.plan(1).text, store.plan(1).name) == (plan_text, plan_name)
    assert {(lot.name, lot.attempts) for lot in store.list_lots()} == {("LOT-A", 3), ("LOT-B", 1)}
    for i, (serial, lot, attempt, outcome, bin_, ls, rdc, q) in enumerate(ex["units"]):
        unit = store.load_unit(attempt_id_of(i))
        assert (unit.serial, unit.lot, unit.attempt, unit.outcome, unit.bin) == (
            serial,
            lot,
            attempt,
            outcome,
            bin_,
        )
        kept = [(x.parameter, x.frequency, x.value, x.unit) for x in unit.measurements]
        assert kept[:2] == [("Ls", 1e3, ls, "H"), ("Rdc", None, rdc, "ohm")]
        assert kept[2][:2] == ("Q", 1e5) and (
            kept[2][2] == q or math.isnan(q) == math.isnan(kept[2][2])
        )
        assert (unit.plan_id, unit.meter_id, unit.fixture_id, unit.reference_set_id) == (1, 1, 1, 1)
    summary = store.lot_summary("LOT-A").set_index("parameter")
    assert summary.loc["Q", ["count", "valid", "mean"]].tolist() == [3, 2, (38.2 + 37.9) / 2]
    assert math.isnan(summary.loc["Rdc", "frequency"]) and summary.loc["Rdc", "count"] == 3
    y = store.lot_yield("LOT-A")
    assert (y.attempts, y.serials, y.first_pass, y.final_pass) == (3, 2, 1, 2)


def test_version_1_store_is_migrated_without_loss(v1_place):
    url, schema = v1_place
    with open_store(url, schema=schema) as store:
        assert (store.created, store.migrated_from) == (False, 1)
        assert _versions(store) == [1, 2]
        _check_example(store)
        assert store.save_unit(UnitRecord(serial="DC-0100", lot="LOT-A", outcome="pass"))
        with store.begin_sweep("demo-coil") as w:
            w.add_points([1e3], [1j], [1j])
        if store.engine_name == "sqlite":
            with store.engine.connect() as conn:
                assert conn.exec_driver_sql("PRAGMA integrity_check").scalar_one() == "ok"
                assert conn.exec_driver_sql("PRAGMA foreign_key_check").all() == []
    with open_store(url, schema=schema) as again:
        assert again.migrated_from is None
        assert again.lot("LOT-A").attempts == 4


def _layout(store) -> dict:
    """Tables, columns (name, type, nullable), indexes, foreign keys and unique constraints."""
    with store.engine.connect() as conn:
        insp = inspect(conn)
        out = {}
        for table in insp.get_table_names():
            columns = {(c["name"], str(c["type"]), c["nullable"]) for c in insp.get_columns(table)}
            indexes = {
                (i["name"], tuple(i["column_names"]), bool(i["unique"]))
                for i in insp.get_indexes(table)
            }
            keys = {
                (tuple(k["constrained_columns"]), k["referred_table"], tuple(k["referred_columns"]))
                for k in insp.get_foreign_keys(table)
            }
            uniques = {tuple(u["column_names"]) for u in insp.get_unique_constraints(table)}
            out[table] = (columns, indexes, keys, uniques)
        return out


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_migrated_layout_equals_a_fresh_store(engine, tmp_path):
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    with store_location(engine, tmp_path / "a") as (url_old, schema_old):
        create_store_at_version(url_old, 1, schema_old)
        with (
            store_location(engine, tmp_path / "b") as (url_new, schema_new),
            open_store(url_old, schema=schema_old) as old,
            open_store(url_new, schema=schema_new) as new,
        ):
            assert old.migrated_from == 1 and new.created
            assert _layout(old) == _layout(new)


def test_newer_store_is_refused_and_left_alone(place_any):
    url, schema = place_any
    with open_store(url, schema=schema) as store:
        store.record_lot("LOT-1")
        with store.engine.begin() as conn:
            conn.execute(
                text("INSERT INTO schema_version (version, applied_at, note) VALUES (:v, :t, '')"),
                {"v": SCHEMA_VERSION + 1, "t": "2030-01-01 00:00:00"},
            )
    with pytest.raises(StoreError, match=rf"schema version {SCHEMA_VERSION + 1}.*Upgrade"):
        open_store(url, schema=schema)
    raw = Database(parse_store_url(url, schema))
    with raw.engine.connect() as conn:
        assert conn.execute(text("SELECT MAX(version) FROM schema_version")).scalar_one() == 3
        assert conn.execute(text("SELECT name FROM lots")).scalars().all() == ["LOT-1"]
    raw.dispose()


@pytest.fixture(params=["sqlite", "postgresql"])
def place_any(request, tmp_path):
    with store_location(request.param, tmp_path) as found:
        yield found


def test_failed_migration_changes_nothing(place_any, monkeypatch):
    url, schema = place_any
    create_store_at_version(url, 1, schema)
    fill_v1_example(url, schema)
    real = migrate_module.MIGRATIONS[1]

    def broken(conn):
        real(conn)
        raise StoreError("simulated failure after the migration step ran")

    monkeypatch.setitem(migrate_module.MIGRATIONS, 1, broken)
    with pytest.raises(StoreError, match="simulated failure"):
        open_store(url, schema=schema)
    monkeypatch.setitem(migrate_module.MIGRATIONS, 1, real)
    if schema is None:
        path = url.removeprefix("sqlite:///")
        with sqlite3.connect(path) as raw:
            assert raw.execute("SELECT MAX(version) FROM schema_version").fetchone() == (1,)
            names = {r[1] for r in raw.execute("PRAGMA table_info(units)")}
            assert "lot" in names and "lot_id" not in names
    with open_store(url, schema=schema) as store:
        assert store.migrated_from == 1
        _check_example(store)


def test_fixture_store_is_version_1():
    with sqlite3.connect(f"file:{FIXTURE_V1}?mode=ro", uri=True) as raw:
        assert raw.execute("SELECT MAX(version) FROM schema_version").fetchone() == (1,)
        assert raw.execute("SELECT COUNT(*) FROM units").fetchone() == (len(EXAMPLE_V1["units"]),)
