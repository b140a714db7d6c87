"""The read-only listing of reference sets without SQLAlchemy (acquire.store.quick_read) reads
exactly what the store's own path reads, and steps aside for everything it was not made for."""

from __future__ import annotations

import contextlib
import io
import sqlite3
from datetime import UTC, datetime

import numpy as np
import pytest

from acquire.cli import main
from acquire.compensation import ReferenceSet
from acquire.store import open_store, quick_read
from acquire.store.migrations import HEAD_REVISION
from acquire.store.url import parse_store_url

#: Names a paste or a careless operator may give (quotes, SQL, markup, control characters,
#: right-to-left text, a long name); the same kinds as tests/test_hardening_cli.py uses.
HOSTILE = [
    'O\'Brien "quoted"',
    "x'; DROP TABLE reference_sets; --",
    "[bold red]x[/] :x: [link=file:///etc/passwd]y[/link]",
    "tab\tbell\x07escape\x1b[2Jend",
    "\u05e9\u05dc\u05d5\u05dd \u202eevil\u202c",
    "x" * 500,
    " leading and trailing ",
]


def _refs(fixture: str, captured_at: datetime | None, load: bool = False) -> ReferenceSet:
    f = np.array([1e3, 1e4, 1e5])
    return ReferenceSet(
        frequency=f,
        open=1e-3 - 1e6j / f,
        short=0.02 + 1e-6j * f,
        load=np.full(3, 100.0 + 0j) if load else None,
        load_true=np.full(3, 100.0 + 0j) if load else None,
        fixture=fixture,
        captured_at=captured_at,
    )


@pytest.fixture
def store_url(tmp_path) -> str:
    url = f"sqlite:///{tmp_path / 'refs.db'}"
    with open_store(url) as store:
        for k, name in enumerate(HOSTILE):
            fixture_id = store.record_fixture(name) if k % 2 else None
            store.save_reference_set(_refs(name, None, load=k % 3 == 0), name=name,
                                     fixture_id=fixture_id)  # fmt: skip
    return url


def _listed(url: str) -> str:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["reference", "list", "--store", url])
    assert code == 0, err.getvalue()
    return out.getvalue()


def test_head_revision_is_alembics_head_and_the_schemas():
    from alembic.script import ScriptDirectory

    from acquire.store.migrate import alembic_config
    from acquire.store.schema import SCHEMA_REVISION

    head = ScriptDirectory.from_config(alembic_config()).get_current_head()
    assert HEAD_REVISION == head == SCHEMA_REVISION


def test_names_it_reads_are_the_schemas():
    from acquire.store import references
    from acquire.store.migrate import VERSION_TABLE
    from acquire.store.schema import TABLES

    table = TABLES[quick_read.SETS_TABLE]
    assert set(quick_read.LISTED_COLUMNS) <= set(table.c.keys())
    assert quick_read.VERSION_TABLE == VERSION_TABLE
    assert quick_read.STANDARDS == references.STANDARDS


@pytest.mark.parametrize(
    "url",
    ["sqlite:///acquire.db", "acquire.db", "sqlite:////tmp/a b/x.db", " sqlite:///d/r-1_2.db ",
     "sqlite:///a+b~c.db", "results/store.db"],
)  # fmt: skip
def test_a_plain_url_means_the_same_file_and_is_shown_the_same(url):
    plain = quick_read.plain_sqlite_path(url)
    assert plain is not None
    location = parse_store_url(url)
    assert plain == (location.path, location.shown)


@pytest.mark.parametrize(
    "url",
    ["sqlite://", "sqlite:///", "sqlite:///a%20b.db", "sqlite:///ü.db", "sqlite:///a?x=1",
     "sqlite:///a#b.db", "postgresql://u@localhost/test", "sqlite+pysqlite:///a.db",
     "sqlite:///:memory:"],
)  # fmt: skip
def test_other_urls_go_the_usual_way(url):
    assert quick_read.plain_sqlite_path(url) is None


def test_it_lists_what_the_store_lists(tmp_path):
    url = f"sqlite:///{tmp_path / 'times.db'}"
    times = [datetime(2026, 3, 2, 8, 0, tzinfo=UTC), None,
             datetime(2026, 3, 2, 8, 0, 1, 123456, tzinfo=UTC)]  # fmt: skip
    with open_store(url) as store:
        for k, when in enumerate(times):
            store.save_reference_set(_refs(f"jig {k}", when, load=k == 2), name=f"set {k}")
        expected = store.list_reference_sets()
    listed = quick_read.list_reference_sets(url)
    assert listed == (url, expected)


def test_the_command_prints_the_same_either_way_hostile_names_included(store_url, monkeypatch):
    quick = _listed(store_url)
    monkeypatch.setattr(quick_read, "list_reference_sets", lambda url: None)
    usual = _listed(store_url)
    assert quick == usual
    assert "DROP TABLE" in quick


def test_it_reads_a_write_not_yet_checkpointed_and_writes_nothing(store_url):
    path = parse_store_url(store_url).path
    assert path is not None
    writer = sqlite3.connect(path, isolation_level=None)
    try:
        writer.execute("PRAGMA wal_autocheckpoint = 0")
        writer.execute("UPDATE reference_sets SET name = 'renamed' WHERE id = 1")
        before = path.read_bytes()
        listed = quick_read.list_reference_sets(store_url)
        assert listed is not None and listed[1][0].name == "renamed"
        assert path.read_bytes() == before
    finally:
        writer.close()


def test_another_revision_goes_the_usual_way_with_its_message(store_url):
    path = parse_store_url(store_url).path
    with sqlite3.connect(path) as conn:
        conn.execute("UPDATE alembic_version SET version_num = '9999'")
    assert quick_read.list_reference_sets(store_url) is None
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        code = main(["reference", "list", "--store", store_url])
    assert code == 2
    assert "schema revision 9999, which this program does not know" in err.getvalue()


def test_a_missing_store_or_another_file_goes_the_usual_way(tmp_path):
    missing = f"sqlite:///{tmp_path / 'nothing.db'}"
    assert quick_read.list_reference_sets(missing) is None
    other = tmp_path / "other.db"
    other.write_text("not a database\n", encoding="utf-8")
    assert quick_read.list_reference_sets(f"sqlite:///{other}") is None
    assert not (tmp_path / "nothing.db").exists()
