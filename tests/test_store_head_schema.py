"""A new SQLite store made from the frozen script (acquire.store.new_sqlite, head_schema.sql) is
the store Alembic's migrations make, object for object and row for row.

The reference is a store made the usual way (acquire.store.open_store: Alembic's migrations
through SQLAlchemy), read back with SQLite's own catalogue and pragmas (sqlite.org, "The Schema
Table" and "Pragma statements"): table_info, index_list, index_xinfo, foreign_key_list.
"""

from __future__ import annotations

import re
import shutil
import sqlite3
import threading
from contextlib import closing
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from acquire.commands.head_schema import main
from acquire.store import UnitRecord, open_store
from acquire.store.head_schema import COMMAND
from acquire.store.migrations import HEAD_REVISION
from acquire.store.new_sqlite import SCRIPT, make_if_new, read_script
from acquire.store.records import MeasurementRecord
from acquire.store.schema import TABLES
from acquire.store.sqlite_sweeps import PlainSweepStore, open_sweep_store

STALE = f"acquire/store/head_schema.sql is stale: run `{COMMAND}` (after every new migration)"
#: SQLAlchemy's SQLite DATETIME text (sqlalchemy.dialects.sqlite.DATETIME's storage format).
TIME_TEXT = re.compile(r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\.\d{6}")
#: The file-wide settings a store keeps (sqlite.org/pragma.html).
FILE_PRAGMAS = ("journal_mode", "page_size", "auto_vacuum", "encoding", "user_version",
                "application_id", "foreign_keys", "synchronous")  # fmt: skip


def layout(path: Path, made: tuple[datetime, datetime]) -> dict:
    """Everything SQLite says about the store at ``path``; a time of making (a DATETIME value)
    is checked to be SQLAlchemy's text within ``made`` and then shown as "<made>"."""
    from acquire.store.sqlite_connection import apply_settings

    with closing(sqlite3.connect(path, isolation_level=None)) as conn:
        apply_settings(conn)  # foreign_keys and synchronous are per connection: as the store's
        out: dict = {p: conn.execute(f"PRAGMA {p}").fetchall() for p in FILE_PRAGMAS}
        out["sqlite_master"] = conn.execute(
            "SELECT type, name, tbl_name, sql FROM sqlite_master ORDER BY rowid"
        ).fetchall()
        tables = [r[1] for r in out["sqlite_master"] if r[0] == "table"]
        for table in tables:
            info = conn.execute(f'PRAGMA table_info("{table}")').fetchall()
            indexes = conn.execute(f'PRAGMA index_list("{table}")').fetchall()
            out[f"{table} table_info"] = info
            out[f"{table} index_list"] = indexes
            out[f"{table} foreign_key_list"] = conn.execute(
                f'PRAGMA foreign_key_list("{table}")'
            ).fetchall()
            for index in indexes:
                for pragma in ("index_info", "index_xinfo"):
                    rows = conn.execute(f'PRAGMA {pragma}("{index[1]}")').fetchall()
                    out[f"{table} {index[1]} {pragma}"] = rows
            timed = [str(c[2]).upper() == "DATETIME" for c in info]
            rows = conn.execute(f'SELECT * FROM "{table}"').fetchall()
            out[f"{table} rows"] = [
                tuple(
                    _made(v, made) if t else (v, type(v).__name__)
                    for v, t in zip(r, timed, strict=True)
                )
                for r in rows
            ]
    return out


def _made(value, made: tuple[datetime, datetime]):
    if value is None:
        return None
    assert isinstance(value, str) and TIME_TEXT.fullmatch(value), value
    when = datetime.fromisoformat(value).replace(tzinfo=UTC)
    assert made[0] <= when <= made[1], (value, made)
    return "<made>"


def assert_same(mine: dict, usual: dict) -> None:
    """The script's store equals the usual path's, part by part (the message says what to do)."""
    assert mine.keys() == usual.keys(), f"{STALE}: objects differ"
    for key in usual:
        assert mine[key] == usual[key], f"{STALE}: {key} differs"


def _made_by_migrations(folder: Path) -> dict:
    begun = datetime.now(UTC)
    path = folder / "usual.db"
    with open_store(f"sqlite:///{path}", by_migrations=True) as store:
        assert store.created and store.schema_revision == HEAD_REVISION
    return layout(path, (begun, datetime.now(UTC)))


def _made_by_script(folder: Path, script: Path = SCRIPT, name: str = "script.db") -> dict:
    begun = datetime.now(UTC)
    path = folder / name
    assert make_if_new(f"sqlite:///{path}", script)
    return layout(path, (begun, datetime.now(UTC)))


def test_the_script_is_of_the_newest_revision():
    revision, statements = read_script()
    assert revision == HEAD_REVISION, STALE
    revision_row = """INSERT INTO "alembic_version" ("version_num") VALUES ('{}');"""
    assert revision_row.format(HEAD_REVISION) in statements, STALE


def test_the_script_makes_what_the_migrations_make(tmp_path):
    usual = _made_by_migrations(tmp_path)
    mine = _made_by_script(tmp_path)
    assert usual["alembic_version rows"] == [((HEAD_REVISION, "str"),)]
    assert usual["journal_mode"] == [("wal",)] and usual["synchronous"] == [(2,)]  # 2 = FULL
    assert set(TABLES) <= {row[1] for row in usual["sqlite_master"]}  # every table of schema.py
    assert_same(mine, usual)


def _edited(tmp_path: Path, old: str, new: str) -> Path:
    text = SCRIPT.read_text(encoding="utf-8")
    assert text.count(old) == 1, old
    copy = tmp_path / "edited.sql"
    copy.write_text(text.replace(old, new), encoding="utf-8")
    return copy


@pytest.mark.parametrize(
    ("old", "new"),
    [
        # an index a migration made, left out
        ("CREATE INDEX ix_units_lot_bin ON units (lot_id, bin, outcome);", ""),
        # a column's default changed
        ("repeats INTEGER DEFAULT 1 NOT NULL", "repeats INTEGER DEFAULT 2 NOT NULL"),
        # a seeded row left out
        ("(3, :now, 'kept by Alembic from here on');", "(4, :now, 'kept');"),
        # the revision row of an older layout
        (f"VALUES ('{HEAD_REVISION}');", "VALUES ('0010');"),
        # only the spelling of a statement (the stored text differs)
        ("CREATE INDEX ix_units_serial_key ON units (serial_key)",
         "CREATE INDEX ix_units_serial_key ON units(serial_key)"),
    ],
)  # fmt: skip
def test_a_stale_script_is_caught_and_the_message_names_the_command(tmp_path, old, new):
    usual = _made_by_migrations(tmp_path)
    mine = _made_by_script(tmp_path, _edited(tmp_path, old, new))
    with pytest.raises(AssertionError, match=re.escape(COMMAND)):
        assert_same(mine, usual)


def test_the_check_command_says_stale_and_write_makes_it_current(tmp_path, monkeypatch, capsys):
    from acquire.store import head_schema

    copy = _edited(tmp_path, "CREATE INDEX ix_units_lot_bin ON units (lot_id, bin, outcome);", "")
    monkeypatch.setattr(head_schema, "SCRIPT", copy)
    assert main(["--check"]) == 1
    assert COMMAND in capsys.readouterr().err
    assert main(["--write"]) == 0
    assert main(["--check"]) == 0
    assert copy.read_text(encoding="utf-8") == SCRIPT.read_text(encoding="utf-8")


def test_a_store_the_script_made_is_a_store_of_the_usual_path(tmp_path):
    url = f"sqlite:///{tmp_path / 'made.db'}"
    assert make_if_new(url)
    with open_store(url) as store:
        assert not store.created and store.migrated_from is None  # found at the newest revision
        meter = store.record_meter("Maker", "M1", "7", "1.0")
        writer = store.begin_sweep(dut="coil 7", meter_id=meter, settings={"points": 3})
        writer.add_points(np.array([1e3, 1e4, 1e5]), np.array([1 + 6j, 1 + 60j, 2 + 600j]))
        writer.finish("complete")
        unit = UnitRecord(serial="S-1", outcome="pass", lot="L-1",
                          measurements=(MeasurementRecord("Ls", 1e-3, "H", 1e4),))  # fmt: skip
        assert store.save_unit(unit)
    with open_store(url) as store:
        info = store.sweep_info(writer.id)
        assert (info.status, info.points, info.settings) == ("complete", 3, {"points": 3})
        assert list(store.sweep_points(writer.id)["raw_x"]) == [6.0, 60.0, 600.0]
        (again,) = store.unit_attempts("S-1")
        assert again.lot == "L-1" and again.measurements[0].value == 1e-3


def test_an_empty_file_is_made_and_anything_else_left_alone(tmp_path):
    empty = tmp_path / "empty.db"
    empty.touch()
    with open_sweep_store(f"sqlite:///{empty}") as store:
        assert isinstance(store, PlainSweepStore)
    with closing(sqlite3.connect(empty)) as conn:
        assert conn.execute("SELECT version_num FROM alembic_version").fetchall() == [
            (HEAD_REVISION,)
        ]
    no_tables = tmp_path / "no-tables.db"
    with closing(sqlite3.connect(no_tables)) as conn:
        conn.execute("PRAGMA user_version = 0")
        conn.execute("CREATE TABLE t (x)")
        conn.execute("DROP TABLE t")  # an SQLite file of a page or more, holding nothing
    assert no_tables.stat().st_size > 0
    assert make_if_new(f"sqlite:///{no_tables}")
    other = tmp_path / "other.db"
    with closing(sqlite3.connect(other)) as conn:
        conn.execute("CREATE TABLE notes (x)")
    assert not make_if_new(f"sqlite:///{other}")
    assert not make_if_new(f"sqlite:///{tmp_path / 'missing' / 'x.db'}")
    assert not make_if_new(f"sqlite:///{tmp_path / 'x.db'}?mode=ro")
    assert not make_if_new("postgresql://someone@127.0.0.1/test")
    older = _edited(tmp_path, f"-- revision: {HEAD_REVISION}", "-- revision: 0010")
    assert not make_if_new(f"sqlite:///{tmp_path / 'new.db'}", older)
    assert not (tmp_path / "new.db").exists()


def test_a_script_cut_short_is_refused(tmp_path):
    text = SCRIPT.read_text(encoding="utf-8")
    cut = tmp_path / "cut.sql"
    cut.write_text(text[: text.index("CREATE TABLE meters") + 40], encoding="utf-8")
    with pytest.raises(ValueError, match="ends inside a statement"):
        read_script(cut)
    assert not make_if_new(f"sqlite:///{tmp_path / 'cut.db'}", cut)


def _at_once(tasks) -> list[BaseException]:
    failures: list[BaseException] = []
    start = threading.Barrier(len(tasks))

    def run(task) -> None:
        try:
            start.wait()
            task()
        except Exception as exc:  # noqa: BLE001 - reported by the caller's assertion
            failures.append(exc)

    threads = [threading.Thread(target=run, args=(t,)) for t in tasks]
    for t in threads:
        t.start()
    for t in threads:
        t.join(120)
    return failures


def test_programs_making_one_new_file_at_once_make_it_once(tmp_path):
    reference = _made_by_migrations(tmp_path)
    begun = datetime.now(UTC)
    for k in range(30):
        path = tmp_path / f"race-{k}.db"
        url = f"sqlite:///{path}"
        tasks = [lambda url=url: open_sweep_store(url).close()] * 3
        if k % 3 == 0:  # one of them the usual way (a station starting at the same moment)
            tasks[0] = lambda url=url: open_store(url, by_migrations=True).close()
        failures = _at_once(tasks)
        assert not failures, failures
        assert_same(layout(path, (begun, datetime.now(UTC))), reference)
        with open_sweep_store(url) as store:
            assert isinstance(store, PlainSweepStore)


def test_the_usual_path_finds_the_store_a_script_made_a_moment_before(tmp_path):
    url = f"sqlite:///{tmp_path / 's.db'}"
    shutil.copy(SCRIPT, tmp_path / "copy.sql")
    assert make_if_new(url, tmp_path / "copy.sql")
    assert not make_if_new(url)  # held something by then: nothing done twice
    with open_store(url) as store:
        assert not store.created


def test_a_script_that_fails_half_way_leaves_nothing_and_says_so(tmp_path):
    from acquire.errors import StoreError

    broken = _edited(tmp_path, "ON units (lot_id, bin, outcome);", "ON units (lot_id, no_such);")
    path = tmp_path / "half.db"
    url = f"sqlite:///{path}"
    with pytest.raises(StoreError, match=r"^creating or upgrading the store failed in store "):
        make_if_new(url, broken)
    with closing(sqlite3.connect(path)) as conn:  # one transaction: none of the tables stayed
        assert conn.execute("SELECT count(*) FROM sqlite_master").fetchone() == (0,)
    assert make_if_new(url)  # still empty, so made the next time
