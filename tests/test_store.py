"""Results store: meters, fixtures, plans, lots, reference sets and sweeps on both engines;
store URLs and opening errors.

The PostgreSQL cases use the server named by ACQUIRE_TEST_POSTGRES (default
postgresql://postgres@127.0.0.1:5432/test), each in its own schema that is dropped afterwards;
they skip when it is unreachable, and fail instead when CI=true.
"""

from __future__ import annotations

import os
import signal
import socket
import sqlite3
import subprocess
import sys
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from sqlalchemy import text
from store_support import store_location

from acquire.compensation import ReferenceSet
from acquire.errors import StoreError
from acquire.store import (
    UnitRecord,
    open_store,
    plan_hash,
)
from acquire.store.url import parse_store_url


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request, tmp_path):
    """(url, schema) of an empty store location on each engine."""
    with store_location(request.param, tmp_path) as found:
        yield found


@pytest.fixture
def store(place):
    url, schema = place
    with open_store(url, schema=schema) as opened:
        yield opened


def _refs() -> ReferenceSet:
    f = np.array([1e2, 1e3, 1e4, 1e5, 1e6])
    w = 2 * np.pi * f
    open_ = 1 / (1e-7 + 1j * w * 8e-12)
    short = 0.02 + 1j * w * 3e-7
    load = 100.0 + 0.02 + 1j * w * 3e-7
    open_[4] = complex(np.inf, np.inf)
    short[0] = complex(np.nan, np.nan)
    return ReferenceSet(
        f,
        open=open_,
        short=short,
        load=load,
        load_true=100.0,
        captured_at=datetime(2026, 2, 3, 4, 5, 6, 789012, tzinfo=UTC),
        fixture="bench-leads",
        meter="Example LCR-1",
        temperature=23.5,
        notes="after lunch; clips cleaned",
    )


def test_meters_fixtures_plans_lots_round_trip(store):
    meter = store.record_meter("Example Instruments", "LCR-1", "SN-7", "2.0", "simulated")
    assert store.record_meter("Example Instruments", "LCR-1", "SN-7", "2.0", "simulated") == meter
    assert store.record_meter("Example Instruments", "LCR-1", "SN-8", "2.0", "simulated") != meter
    m = store.meter(meter)
    assert (m.manufacturer, m.model, m.serial, m.firmware, m.dialect) == (
        "Example Instruments",
        "LCR-1",
        "SN-7",
        "2.0",
        "simulated",
    )
    assert m.first_seen.tzinfo is not None

    fixture = store.record_fixture("bench-leads", "first notes")
    assert store.record_fixture("bench-leads", "other notes") == fixture
    assert store.fixture(fixture).notes == "first notes"

    plan_text = "Ls at 1 kHz: 330 uH to 350 uH\nRdc at most 5.5 ohm\n"
    plan = store.record_plan(plan_text, "demo plan")
    assert store.record_plan(plan_text) == plan
    assert store.plan(plan).text == plan_text
    assert store.plan(hash=plan_hash(plan_text)).id == plan
    assert store.record_plan(plan_text + " ") != plan

    lot = store.record_lot("LOT-7", "winding machine 2")
    assert store.record_lot("LOT-7") == lot
    info = store.lot("LOT-7")
    assert (info.id, info.name, info.notes, info.attempts) == (lot, "LOT-7", "winding machine 2", 0)
    with pytest.raises(StoreError, match="no lot"):
        store.lot("LOT-8")
    with pytest.raises(StoreError, match="no such meter"):
        store.meter(meter + 100)


def test_reference_set_round_trip(store):
    refs = _refs()
    meter = store.record_meter("Example Instruments", "LCR-1", "SN-7", "2.0")
    fixture = store.record_fixture("bench-leads")
    ref_id = store.save_reference_set(refs, "morning", meter_id=meter, fixture_id=fixture)
    back = store.load_reference_set(ref_id)
    assert isinstance(back, ReferenceSet)
    for name in ("frequency", "open", "short", "load", "load_true"):
        assert np.array_equal(getattr(back, name), getattr(refs, name), equal_nan=True), name
    for name in ("captured_at", "fixture", "meter", "temperature", "notes", "method"):
        assert getattr(back, name) == getattr(refs, name), name
    f, z = np.array([1e3, 1e4]), np.array([5 + 2000j, 6 + 21000j])
    assert np.array_equal(back.correct(f, z), refs.correct(f, z))

    short_only = ReferenceSet(refs.frequency, short=refs.short, fixture="clips")
    other = store.save_reference_set(short_only)
    assert store.load_reference_set(other).open is None
    infos = store.list_reference_sets()
    assert [i.id for i in infos] == [ref_id, other]
    first = infos[0]
    assert (first.name, first.fixture, first.meter, first.points) == (
        "morning",
        "bench-leads",
        "Example LCR-1",
        5,
    )
    assert first.standards == ("open", "short", "load")
    assert (first.meter_id, first.fixture_id, first.method) == (meter, fixture, "open-short-load")
    assert first.captured_at == refs.captured_at
    assert infos[1].standards == ("short",)
    with pytest.raises(StoreError, match="no reference set"):
        store.load_reference_set(other + 1)


def test_sweep_round_trip(store):
    settings = {"level": np.float64(1.0), "speed": "slow", "plan": np.array([1e2, 1e3])}
    u = np.array([[0.02, 0.004], [0.02, 0.01]])
    with store.begin_sweep("demo-coil", settings=settings) as writer:
        writer.add_points(
            [1e2, 1e3], [4.8 + 0.2j, 4.8 + 2.1j], [4.7 + 0.1j, 4.7 + 2.0j], u, ["", "overrange"]
        )
        assert store.sweep_info(writer.id).status == "running"
        writer.add_points(np.array([1e4]), np.array([complex(np.nan, np.nan)]), None)
        writer.add_points(
            [1e5],
            [complex(np.inf, np.inf)],
            [complex(np.inf, np.inf)],
            uncertainty=np.array([[np.inf, np.nan]]),
            flags=["overrange,beyond-accuracy"],
        )
    info = store.sweep_info(writer.id)
    assert (info.status, info.recorded_status, info.points, info.dut) == (
        "complete",
        "complete",
        4,
        "demo-coil",
    )
    assert info.settings == {"level": 1.0, "speed": "slow", "plan": [100.0, 1000.0]}
    assert info.finished_at >= info.started_at
    points = store.sweep_points(writer.id)
    numbers = ["frequency", "raw_r", "raw_x", "corrected_r", "corrected_x", "u_r", "u_x"]
    assert list(points.columns) == [*numbers, "flags"]
    nan, inf = np.nan, np.inf
    expected = np.array(
        [
            [1e2, 4.8, 0.2, 4.7, 0.1, 0.02, 0.004],
            [1e3, 4.8, 2.1, 4.7, 2.0, 0.02, 0.01],
            [1e4, nan, nan, nan, nan, nan, nan],
            [1e5, inf, inf, inf, inf, inf, nan],
        ]
    )
    assert np.array_equal(points[numbers].to_numpy(), expected, equal_nan=True)
    assert points["flags"].tolist() == ["", "overrange", "", "overrange,beyond-accuracy"]
    with store.engine.connect() as conn:
        stored = conn.exec_driver_sql(
            f"SELECT u_r, flags FROM sweep_points WHERE sweep_id = {writer.id} AND idx = 2"
        ).one()
    assert tuple(stored) == (None, "")
    bad = store.begin_sweep()
    with pytest.raises(StoreError, match=r"shape \(2, 2\)"):
        bad.add_points([1, 2], [1j, 1j], [1j, 1j], uncertainty=[0.1, 0.1])
    with pytest.raises(StoreError, match="2 strings"):
        bad.add_points([1, 2], [1j, 1j], [1j, 1j], flags=["overrange"])
    with pytest.raises(StoreError, match="one string per point"):
        bad.add_points([1, 2], [1j, 1j], [1j, 1j], flags="ok")
    bad.finish("interrupted")
    with pytest.raises(StoreError, match="already complete"):
        writer.add_points([1e6], [1j], [1j])
    with pytest.raises(StoreError, match="matching"):
        store.begin_sweep().add_points([1, 2], [1j], [1j])
    with pytest.raises(StoreError, match="cannot be stored as JSON"):
        store.begin_sweep(settings={"level": float("nan")})


def test_sweep_interrupted_by_exception_keeps_points(store):
    with pytest.raises(KeyboardInterrupt), store.begin_sweep("demo-coil") as writer:
        writer.add_points([1e2, 1e3], [1 + 1j, 2 + 2j], [1 + 1j, 2 + 2j])
        raise KeyboardInterrupt
    info = store.sweep_info(writer.id)
    assert (info.status, info.points, info.note) == (
        "interrupted",
        2,
        "stopped by KeyboardInterrupt",
    )
    assert len(store.sweep_points(writer.id)) == 2
    assert [s.id for s in store.list_sweeps()] == [writer.id]


def test_sweep_of_dead_writer_is_reported_interrupted(store, place):
    """A writer killed with SIGKILL leaves 'running' in the row; the store reports interrupted."""
    url, schema = place
    child = (
        "import os, signal, sys\n"
        "from acquire.store import open_store\n"
        "s = open_store(sys.argv[1], schema=sys.argv[2] or None)\n"
        "w = s.begin_sweep('demo-coil')\n"
        "w.add_points([1e2, 1e3], [1j, 2j], [1j, 2j])\n"
        "w.add_points([1e4], [3j], [3j])\n"
        "print(w.id, flush=True)\n"
        "os.kill(os.getpid(), signal.SIGKILL)\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", child, url, schema or ""], capture_output=True, text=True, timeout=60
    )
    assert done.returncode == -signal.SIGKILL, done.stderr
    sweep_id = int(done.stdout)
    mine = store.begin_sweep("live")
    info = store.sweep_info(sweep_id)
    assert (info.status, info.recorded_status, info.abandoned, info.points) == (
        "interrupted",
        "running",
        True,
        3,
    )
    assert "ended without finishing" in info.note
    assert store.sweep_info(mine.id).status == "running"
    assert store.close_abandoned_sweeps() == [sweep_id]
    assert store.sweep_info(sweep_id).recorded_status == "interrupted"
    assert store.sweep_info(mine.id).recorded_status == "running"
    mine.finish("complete")


def test_running_sweep_counts_as_abandoned_after_silence(tmp_path):
    url = f"sqlite:///{tmp_path / 's.db'}"
    with open_store(url) as store:
        writer = store.begin_sweep()
        writer.add_points([1.0], [1j], [1j])
    with open_store(url, stale_after=0.0) as store:
        assert store.sweep_info(writer.id).status == "interrupted"
    with open_store(url, stale_after=3600.0) as store:
        assert store.sweep_info(writer.id).status == "running"


def test_store_urls():
    assert parse_store_url("postgresql://u@h/db").url.drivername == "postgresql+psycopg"
    assert parse_store_url("postgres://u@h/db").url.drivername == "postgresql+psycopg"
    loc = parse_store_url("postgresql://u:secret@h:5433/db?schema=line_2")
    assert (loc.schema, loc.url.database, loc.url.port) == ("line_2", "db", 5433)
    assert "secret" not in loc.shown and "schema" not in loc.url.query
    assert parse_store_url("results.db").path.name == "results.db"
    assert parse_store_url("sqlite://").path is None
    for bad, message in [
        ("mysql://u@h/db", "unsupported"),
        ("", "empty"),
        ("postgresql://u@h/db?schema=Bad-Name", "schema name"),
        ("sqlite:///x.db?schema=a", "PostgreSQL"),
    ]:
        with pytest.raises(StoreError, match=message):
            parse_store_url(bad)


def test_opening_errors_are_store_errors(tmp_path):
    with pytest.raises(StoreError, match="does not exist"):
        open_store(f"sqlite:///{tmp_path / 'missing' / 'x.db'}")
    foreign = tmp_path / "foreign.db"
    sqlite3.connect(foreign).execute("CREATE TABLE units (id INTEGER)").connection.commit()
    with pytest.raises(StoreError, match="not a store of this program"):
        open_store(f"sqlite:///{foreign}")
    with pytest.raises(StoreError, match="cannot be reached|reachable"):
        open_store("postgresql://nobody@127.0.0.1:1/none?connect_timeout=2")


def test_sqlite_store_settings(tmp_path):
    path = tmp_path / "s.db"
    with open_store(f"sqlite:///{path}") as store:
        assert store.created and store.path == path
        with store.engine.connect() as conn:
            mode = conn.exec_driver_sql("PRAGMA journal_mode").scalar_one()
            sync = conn.exec_driver_sql("PRAGMA synchronous").scalar_one()
            keys = conn.exec_driver_sql("PRAGMA foreign_keys").scalar_one()
    assert (mode, sync, keys) == (
        "wal",
        2,
        1,
    )  # 2 = FULL (SQLite documentation, PRAGMA synchronous)
    with open_store(str(path)) as again:
        assert not again.created and again.migrated_from is None
    memory = open_store("sqlite://")
    memory.save_unit(UnitRecord(serial="A", lot="LOT-1", outcome="pass"))
    assert memory.lot("LOT-1").attempts == 1
    memory.close()
    with pytest.raises(StoreError, match="closed"):
        memory.lot("LOT-1")


@pytest.mark.skipif(os.name != "posix", reason="process checks use POSIX signals")
def test_process_check_sees_own_process():
    from acquire.store.sweeps import writer_gone

    now = datetime.now(UTC)
    assert not writer_gone(socket.gethostname(), os.getpid(), now, now, 60.0)
    assert writer_gone(socket.gethostname(), os.getpid(), now - timedelta(hours=2), now, 60.0)
    assert not writer_gone("another-host", 1, now, now, 60.0)


def _refs_201() -> ReferenceSet:
    """A 201-point open-short set on a log grid (values computed from a 8 pF / 300 nH fixture)."""
    f = np.geomspace(100.0, 1e7, 201)
    w = 2 * np.pi * f
    return ReferenceSet(
        f,
        open=1 / (1e-7 + 1j * w * 8e-12),
        short=0.02 + 1j * w * 3e-7,
        captured_at=datetime(2026, 2, 3, 4, 5, 6, tzinfo=UTC),
        fixture="bench-leads",
    )


def _delete_points(store, ref_id: int) -> None:
    """Delete 11 of the 201 points (idx 5, 24, ..., 195: every 19th from 5) behind the API."""
    with store.engine.begin() as conn:
        conn.execute(
            text(
                "DELETE FROM reference_points WHERE reference_set_id = :r "
                "AND idx - (idx / 19) * 19 = 5"
            ),
            {"r": ref_id},
        )


DAMAGED = (
    "reference set {} is damaged: 11 of its 201 points are missing; capture the references again"
)


def test_reference_set_with_missing_points_is_refused(store):
    ref_id = store.save_reference_set(_refs_201(), "morning")
    kept = store.save_reference_set(_refs_201(), "evening")
    _delete_points(store, ref_id)
    with pytest.raises(StoreError) as caught:
        store.load_reference_set(ref_id)
    assert str(caught.value) == DAMAGED.format(ref_id)
    assert store.load_reference_set(kept).frequency.size == 201
    with store.engine.begin() as conn:
        conn.exec_driver_sql(
            f"UPDATE reference_points SET idx = idx + 1000 WHERE reference_set_id = {kept} "
            "AND idx = 200"
        )
    with pytest.raises(StoreError, match=f"reference set {kept} is damaged: 1 of its 201"):
        store.load_reference_set(kept)


def test_reference_check_command_reports_a_damaged_set(place, capsys):
    from acquire.cli import main

    url, schema = place
    with open_store(url, schema=schema) as store:
        ref_id = store.save_reference_set(_refs_201(), "morning")
        _delete_points(store, ref_id)
    where = url if schema is None else f"{url}?schema={schema}"
    capsys.readouterr()
    code = main(["reference", "check", "--store", where, str(ref_id)])
    out, err = capsys.readouterr()
    assert code == 2
    assert err.strip().splitlines() == [f"acquire reference: error: {DAMAGED.format(ref_id)}"]
    assert "no problems found" not in out


def test_reference_uncertainty_and_repeats_round_trip(store, monkeypatch):
    """A set carrying per-standard uncertainty and a repeat count (fields the capture code adds
    to ReferenceSet) is stored column by column and given back only to a class that has them."""
    import dataclasses

    import acquire.compensation as compensation

    @dataclasses.dataclass(frozen=True, eq=False, repr=False)
    class WithUncertainty(ReferenceSet):
        open_u: np.ndarray | None = None
        short_u: np.ndarray | None = None
        load_u: np.ndarray | None = None
        repeats: int = 1

    base = _refs()
    n = base.frequency.size
    short_u = np.array([np.nan, 1e-4, 2e-4, np.inf, 5e-4])
    refs = WithUncertainty(
        base.frequency, open=base.open, short=base.short, load=base.load, load_true=100.0,
        open_u=np.full(n, 30.0), short_u=short_u, repeats=8,
    )  # fmt: skip
    ref_id = store.save_reference_set(refs)
    plain = store.save_reference_set(base)
    with store.engine.connect() as conn:
        rows = conn.exec_driver_sql(
            f"SELECT open_u, short_u, load_u FROM reference_points WHERE reference_set_id = "
            f"{ref_id} ORDER BY idx"
        ).all()
        repeats = conn.exec_driver_sql("SELECT id, repeats FROM reference_sets ORDER BY id").all()
    assert [tuple(r) for r in rows] == [
        (30.0, None, None),
        (30.0, 1e-4, None),
        (30.0, 2e-4, None),
        (30.0, np.inf, None),
        (30.0, 5e-4, None),
    ]
    assert [tuple(r) for r in repeats] == [(ref_id, 8), (plain, 1)]
    back = store.load_reference_set(ref_id)
    assert type(back) is ReferenceSet and not hasattr(back, "open_u")
    monkeypatch.setattr(compensation, "ReferenceSet", WithUncertainty)
    back = store.load_reference_set(ref_id)
    assert np.array_equal(back.open_u, np.full(n, 30.0))
    assert np.array_equal(back.short_u, short_u, equal_nan=True)
    assert back.load_u is None and back.repeats == 8
    again = store.load_reference_set(plain)
    assert again.open_u is None and again.short_u is None and again.repeats == 1
    with pytest.raises(StoreError, match="open_u array"):
        store.save_reference_set(dataclasses.replace(refs, open_u=np.ones(n + 1)))
