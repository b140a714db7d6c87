"""The sweep command's plain-SQLite store path (acquire.store.sqlite_sweeps) writes what the
usual SQLAlchemy path writes, and steps aside for every store it was not made for.

The reference for every stored value is the store's usual path, built on SQLAlchemy Core (a
reference library): its ``DateTime`` text on SQLite, its JSON column, its rows and its messages.
"""

from __future__ import annotations

import json
import math
import os
import signal
import sqlite3
import subprocess
import sys
import time
from datetime import UTC, datetime, timedelta, timezone
from pathlib import Path

import numpy as np
import pytest

from acquire.errors import StoreError
from acquire.store import open_store
from acquire.store.plain_values import sqlite_time
from acquire.store.sqlite_sweeps import PlainSweepStore, open_sweep_store
from drivers.simulator import running

ROOT = Path(__file__).resolve().parents[1]
#: Runs `acquire` as `python -m acquire` does, then writes the names of the loaded modules the
#: sweep must not need (the first argument is that file; the rest is the command line).
WRAPPER = (
    "import json, sys\n"
    "from acquire.cli import main\n"
    "out = sys.argv[1]\n"
    "try:\n"
    "    code = main(sys.argv[2:])\n"
    "finally:\n"
    "    heavy = ('sqlalchemy', 'alembic', 'pandas', 'scipy')\n"
    "    found = sorted(m for m in sys.modules if m.split('.')[0] in heavy\n"
    "                   or m.startswith('acquire.commands.station'))\n"
    "    open(out, 'w').write(json.dumps(found))\n"
    "sys.exit(code)\n"
)


def _store(tmp_path: Path, name: str = "s.db") -> str:
    url = f"sqlite:///{tmp_path / name}"
    with open_store(url):
        pass  # a store at the newest revision, made the usual way
    return url


def _batches() -> list[dict]:
    """Three batches: corrected with U and flags, NaN and infinity in them; raw only."""
    f = np.geomspace(100.0, 1e6, 7)
    raw = 1.5 + 2j * np.pi * f * 1e-4
    cor = raw - 0.01
    u = np.column_stack([np.full(7, 1e-3), np.full(7, 2e-3)])
    raw[2], cor[3], u[4, 1] = complex(np.nan, 1.0), complex(np.inf, -np.inf), np.nan
    flags = ["", "overrange", "", "beyond-accuracy,overrange", "", "", "x"]
    return [
        {"frequency": f[:4], "raw_z": raw[:4], "corrected_z": cor[:4],
         "uncertainty": u[:4], "flags": flags[:4]},
        {"frequency": f[4:6], "raw_z": raw[4:6], "corrected_z": cor[4:6],
         "uncertainty": u[4:6], "flags": flags[4:6]},
        {"frequency": f[6:], "raw_z": raw[6:], "corrected_z": None},
    ]  # fmt: skip


def _write(store, status: str, settings) -> int:
    meter = store.record_meter("Maker", "M1", "SN 7", "1.0", dialect="simulated")
    fixture = store.record_fixture("bench 'leads'")
    writer = store.begin_sweep(dut="coil A", meter_id=meter, fixture_id=fixture,
                               settings=settings)  # fmt: skip
    for batch in _batches():
        writer.add_points(**batch)
    writer.finish(status, note="stopped with Ctrl-C" if status == "interrupted" else "")
    return writer.id


def _typed_rows(path: Path, query: str) -> list[tuple]:
    with sqlite3.connect(path) as conn:
        rows = conn.execute(query).fetchall()
        names = [d[0] for d in conn.execute(query).description]
    out = []
    for row in rows:
        out.append(tuple((n, type(v).__name__, v) for n, v in zip(names, row, strict=True)))
    return out


@pytest.mark.parametrize(
    "when",
    [datetime(2026, 3, 2, 8, 0, tzinfo=UTC), datetime(2026, 3, 2, 8, 0, 1, 5, tzinfo=UTC),
     datetime(1999, 12, 31, 23, 59, 59, 999999, tzinfo=timezone(timedelta(hours=-5))),
     datetime(2026, 7, 1, 0, 30, tzinfo=timezone(timedelta(hours=5, minutes=30)))],
)  # fmt: skip
def test_times_are_the_text_sqlalchemy_writes_on_sqlite(when):
    from sqlalchemy.dialects import sqlite

    from acquire.store.schema import TABLES

    dialect = sqlite.dialect()
    column = TABLES["sweeps"].c.last_write_at
    bind = column.type.dialect_impl(dialect).bind_processor(dialect)
    assert sqlite_time(when) == bind(when)


@pytest.mark.parametrize("status", ["complete", "interrupted"])
@pytest.mark.parametrize("settings", [{"plan": "log", "points": np.int64(7), "show": ["Ls"]},
                                      None])  # fmt: skip
def test_a_sweep_written_either_way_is_stored_and_read_back_the_same(tmp_path, status, settings):
    url = _store(tmp_path)
    with open_store(url) as store:
        usual = _write(store, status, settings)
    with open_sweep_store(url) as plain:
        assert isinstance(plain, PlainSweepStore) and plain.url == url
        fast = _write(plain, status, settings)
    path = tmp_path / "s.db"
    points = "SELECT * FROM sweep_points WHERE sweep_id = {} ORDER BY idx"
    stored = [_typed_rows(path, points.format(k)) for k in (usual, fast)]
    assert [r[2:] for r in stored[0]] == [r[2:] for r in stored[1]] and len(stored[0]) == 7
    heads = [_typed_rows(path, f"SELECT * FROM sweeps WHERE id = {k}")[0] for k in (usual, fast)]
    times = ("started_at", "finished_at", "last_write_at")
    for a, b in zip(*heads, strict=True):
        if a[0] in times:  # the same kind of text, of course not the same instant
            assert a[1] == b[1] == "str" and len(a[2]) == len(b[2]) == 26
            assert sqlite_time(datetime.fromisoformat(b[2]).replace(tzinfo=UTC)) == b[2]
        elif a[0] != "id":
            assert a == b
    assert len(_typed_rows(path, "SELECT * FROM meters")) == 1  # found again, not doubled
    with open_store(url) as store:
        one, two = store.sweep_info(usual), store.sweep_info(fast)
        assert (one.status, one.note, one.points, one.settings, one.dut, one.meter_id,
                one.fixture_id, one.writer) == (two.status, two.note, two.points, two.settings,
                two.dut, two.meter_id, two.fixture_id, two.writer)  # fmt: skip
        assert two.status == status and two.points == 7
        assert two.started_at.tzinfo == UTC and two.finished_at >= two.started_at
        frames = store.sweep_points(usual), store.sweep_points(fast)
        assert frames[0].equals(frames[1])
        assert math.isinf(frames[1]["corrected_r"][3]) and math.isnan(frames[1]["raw_r"][2])


def _refusals(store, url: str) -> list[str]:
    said = []
    writer = store.begin_sweep(dut="x")
    attempts = [
        lambda: store.begin_sweep(settings={"bad": float("nan")}),
        lambda: store.begin_sweep(meter_id=9999),
        lambda: writer.add_points(np.ones(2), np.ones(3)),
        lambda: writer.add_points(np.ones(2), np.ones(2), flags="ab"),
        lambda: writer.add_points(np.ones(2), np.ones(2), uncertainty=np.ones(2)),
        lambda: writer.finish("stopped"),
    ]
    for attempt in attempts:
        with pytest.raises(StoreError) as caught:
            attempt()
        said.append(str(caught.value))
    writer.finish("complete")
    for attempt in (lambda: writer.add_points(np.ones(1), np.ones(1)), writer.finish):
        with pytest.raises(StoreError) as caught:
            attempt()
        said.append(str(caught.value))
    return said


def test_the_ends_a_sweep_may_have_are_the_schemas():
    from acquire.store.schema import SWEEP_STATES
    from acquire.store.sweep_batch import END_STATES

    assert SWEEP_STATES[1:] == END_STATES


def test_refusals_and_failures_say_the_same_line(tmp_path):
    urls = _store(tmp_path, "usual.db"), _store(tmp_path, "plain.db")
    with open_store(urls[0]) as store:
        usual = [line.replace(urls[0], "URL") for line in _refusals(store, urls[0])]
    with open_sweep_store(urls[1]) as plain:
        assert isinstance(plain, PlainSweepStore)
        fast = [line.replace(urls[1], "URL") for line in _refusals(plain, urls[1])]
    assert fast == usual
    assert fast[1].startswith("starting a sweep failed in store URL: FOREIGN KEY constraint")


def test_a_batch_sent_again_stores_each_point_once_and_a_closed_sweep_refuses(tmp_path):
    url = _store(tmp_path)
    with open_sweep_store(url) as plain:
        writer = plain.begin_sweep(dut="again")
        writer.add_points(np.arange(1.0, 4.0), np.ones(3))
        again = type(writer)(plain._db, writer.id)  # a writer whose answer was lost: count 0
        again.add_points(np.arange(1.0, 6.0), np.ones(5))
        assert again.points == 5
        with open_store(url) as store:
            assert store.close_abandoned_sweeps() == []
            assert list(store.sweep_points(writer.id)["frequency"]) == [1.0, 2.0, 3.0, 4.0, 5.0]


def test_opening_closes_the_sweeps_of_dead_writers_as_the_usual_path_does(tmp_path):
    url = _store(tmp_path)
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)  # fmt: skip
    pid = int(dead.stdout)
    ids = []
    with open_store(url) as store:
        for _ in range(2):
            ids.append(store.begin_sweep(dut="gone").id)
    with sqlite3.connect(tmp_path / "s.db") as conn:
        conn.execute("UPDATE sweeps SET writer_pid = ?", (pid,))
    with open_sweep_store(url) as plain:
        assert isinstance(plain, PlainSweepStore)
    with open_store(url) as store:
        infos = [store.sweep_info(k) for k in ids]
    assert [(i.recorded_status, i.note) for i in infos] == [
        ("interrupted", "the writing process ended without finishing the sweep")
    ] * 2


def _at_revision(url: str, revision: str) -> None:
    from acquire.store import migrate
    from acquire.store.engine import Database
    from acquire.store.url import parse_store_url

    db = Database(parse_store_url(url))
    try:
        db.write("making an older store", lambda conn: migrate.upgrade(conn, revision))
    finally:
        db.dispose()


def test_a_new_file_is_made_plain_and_an_older_revision_goes_the_usual_way(tmp_path):
    from acquire.store.core import Store

    new = f"sqlite:///{tmp_path / 'new.db'}"
    assert PlainSweepStore.open_existing(new) is None and not (tmp_path / "new.db").exists()
    with open_sweep_store(new) as store:  # made from the frozen script (test_store_head_schema)
        assert isinstance(store, PlainSweepStore)
    with open_store(new) as store:
        assert not store.created and store.migrated_from is None
    old = f"sqlite:///{tmp_path / 'old.db'}"
    _at_revision(old, "0007")
    assert PlainSweepStore.open_existing(old) is None
    with open_sweep_store(old) as store:
        assert isinstance(store, Store) and store.migrated_from == "0007"
    with open_sweep_store(old) as store:
        assert isinstance(store, PlainSweepStore)
    for other in ("postgresql://someone@127.0.0.1/test", "sqlite://", f"{old}?mode=ro"):
        assert PlainSweepStore.open_existing(other) is None  # nothing is reached for these


def _sweep_command(url: str, resource: str, out: Path, points: int) -> list[str]:
    return [sys.executable, "-c", WRAPPER, str(out), "sweep", "--resource", resource,
            "--store", url, "--points", str(points), "--no-live"]  # fmt: skip


def _env() -> dict[str, str]:
    return {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}


def test_the_sweep_command_on_an_existing_or_a_new_store_loads_no_sql_toolkit(tmp_path):
    url = _store(tmp_path)
    new = f"sqlite:///{tmp_path / 'new.db'}"
    with running(dut="demo-coil", fixture="bench-leads", seed=5, measure_time=0.0) as sim:
        for where, name in ((url, "existing.json"), (new, "new.json")):
            done = subprocess.run(_sweep_command(where, sim.resource, tmp_path / name, 41),
                                  capture_output=True, text=True, cwd=ROOT, env=_env(),
                                  timeout=120)  # fmt: skip
            assert done.returncode == 0, done.stderr
    assert json.loads((tmp_path / "existing.json").read_text()) == []
    assert json.loads((tmp_path / "new.json").read_text()) == []  # made from the frozen script
    for where in (url, new):
        with open_store(where) as store:
            assert not store.created
            info = store.sweep_info(1)
            assert info.status == "complete" and info.points == 41
            assert info.settings["points"] == 41 and info.meter_id == 1


def test_ctrl_c_on_the_plain_path_keeps_the_points_marked_interrupted(tmp_path):
    url = _store(tmp_path)
    out = tmp_path / "modules.json"
    with running(dut="demo-coil", fixture="bench-leads", seed=23, measure_time=0.005) as sim:
        proc = subprocess.Popen(_sweep_command(url, sim.resource, out, 401),
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                cwd=ROOT, env=_env())  # fmt: skip
        first = proc.stdout.readline() if proc.stdout else ""
        assert first.startswith("sweep: 401 points"), first
        time.sleep(0.6)
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=30)
    assert proc.returncode == 130, err
    assert f"saved as sweep 1 in {url}, marked interrupted" in err
    saved = int(err.split("): ")[1].split(" of ")[0])
    assert 0 < saved < 401
    assert json.loads(out.read_text()) == []
    with open_store(url) as store:
        info = store.sweep_info(1)
        assert (info.recorded_status, info.points) == ("interrupted", saved)
        assert info.note.startswith("stopped") or "Ctrl-C" in info.note, info.note
        assert len(store.sweep_points(1)) == saved


def _same_set(a, b) -> None:
    from dataclasses import fields

    for field in fields(a):
        x, y = getattr(a, field.name), getattr(b, field.name)
        if isinstance(x, np.ndarray) or isinstance(y, np.ndarray):
            np.testing.assert_array_equal(x, y)
            assert np.asarray(x).dtype == np.asarray(y).dtype, field.name
        else:
            assert x == y and type(x) is type(y), field.name


def test_reference_sets_read_the_same_either_way(tmp_path):
    from acquire.compensation import ReferenceSet

    url = _store(tmp_path)
    f = np.array([1e3, 1e4, 1e5])
    sets = [
        ReferenceSet(frequency=f, open=1e-3 - 1e6j / f, short=np.array([0.02, np.nan, 0.03]),
                     captured_at=datetime(2026, 3, 2, 8, 0, 1, 5, tzinfo=UTC), fixture="jig 'A'",
                     temperature=23.5, notes="line 1\nline 2", repeats=3, grid_spacing="log",
                     open_u=np.array([1e-4, 2e-4, np.inf]), short_u=np.full(3, 1e-5)),
        ReferenceSet(frequency=f, open=1e-3 - 1e6j / f, short=0.02 + 1e-6j * f,
                     load=np.full(3, 100.1 + 0.2j), load_true=np.full(3, 100.0 + 0j)),
    ]  # fmt: skip
    with open_store(url) as store:
        ids = [store.save_reference_set(s, name=f"set {k}") for k, s in enumerate(sets)]
        listed = store.list_reference_sets()
        loaded = [store.load_reference_set(k) for k in ids]
    with open_sweep_store(url) as plain:
        assert isinstance(plain, PlainSweepStore)
        assert plain.list_reference_sets() == listed
        for k, usual in zip(ids, loaded, strict=True):
            _same_set(plain.load_reference_set(k), usual)
        with pytest.raises(StoreError, match="there is no reference set 99 in the store"):
            plain.load_reference_set(99)


def test_a_name_that_is_not_utf8_reaches_the_command_line_as_on_the_usual_path(tmp_path):
    # The bytes b"\xff\xfe" of a command line read with surrogateescape (PEP 383): SQLite's
    # driver cannot encode them; the usual path lets that UnicodeEncodeError reach
    # acquire.cli.main, which names the option holding them (tests/test_hardening_cli.py).
    url = _store(tmp_path)
    bad = b"coil \xff\xfe".decode("utf-8", "surrogateescape")
    for opened in (open_store(url), open_sweep_store(url)):
        with opened as store:
            with pytest.raises(UnicodeEncodeError, match="surrogates not allowed"):
                store.begin_sweep(dut=bad)
            with pytest.raises(UnicodeEncodeError, match="surrogates not allowed"):
                store.record_fixture(bad)
    with open_store(url) as store:
        assert store.list_sweeps() == []
