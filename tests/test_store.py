"""Results store: round trip of every record kind, hostile text, lot statistics, on both engines.

The PostgreSQL cases use the server named by ACQUIRE_TEST_POSTGRES (default
postgresql://postgres@127.0.0.1:5432/test), each in its own schema that is dropped afterwards;
they skip when it is unreachable, and fail instead when CI=true.
"""

from __future__ import annotations

import dataclasses
import math
import os
import signal
import socket
import sqlite3
import subprocess
import sys
from datetime import UTC, datetime, timedelta, timezone

import numpy as np
import pytest
from sqlalchemy import text

from acquire.compensation import ReferenceSet
from acquire.errors import StoreError
from acquire.store import (
    MeasurementRecord,
    UnitRecord,
    new_attempt_id,
    open_store,
    plan_hash,
)
from acquire.store.testing import store_location, synthetic_unit
from acquire.store.url import parse_store_url

HOSTILE = [
    "Robert'); DROP TABLE units;--",
    "x' OR '1'='1",
    '"; DELETE FROM measurements; --',
    "semi;colon;; and a trailing backslash \\",
    "%s %(name)s ? :name $1 {0} %%",
    "tab\tnew\nline\r\ncarriage",
    "µH Ω ±5 % 测试线圈 🧲 é e\u0301 שלום",
    "zero\u200bwidth \ufeff bom",
    "'" * 3000,
    "long serial " + "ABCDEF0123456789" * 6250,  # 100,000 characters
    "",
    " padded ",
]


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
    with store.begin_sweep("demo-coil", settings=settings) as writer:
        writer.add_points([1e2, 1e3], [4.8 + 0.2j, 4.8 + 2.1j], [4.7 + 0.1j, 4.7 + 2.0j])
        assert store.sweep_info(writer.id).status == "running"
        writer.add_points(np.array([1e4]), np.array([complex(np.nan, np.nan)]), None)
        writer.add_points([1e5], [complex(np.inf, np.inf)], [complex(np.inf, np.inf)])
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
    assert list(points.columns) == ["frequency", "raw_r", "raw_x", "corrected_r", "corrected_x"]
    expected = np.array(
        [
            [1e2, 4.8, 0.2, 4.7, 0.1],
            [1e3, 4.8, 2.1, 4.7, 2.0],
            [1e4, np.nan, np.nan, np.nan, np.nan],
            [1e5, np.inf, np.inf, np.inf, np.inf],
        ]
    )
    assert np.array_equal(points.to_numpy(), expected, equal_nan=True)
    with pytest.raises(StoreError, match="already complete"):
        writer.add_points([1e6], [1j], [1j])
    with pytest.raises(StoreError, match="matching"):
        store.begin_sweep().add_points([1, 2], [1j], [1j])


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


def _unit(**changes) -> UnitRecord:
    base = UnitRecord(
        serial="DC-0001",
        lot="LOT-1",
        outcome="fail",
        bin="reject-high",
        station="bench-2",
        operator="A. Operator",
        started_at=datetime(2026, 2, 3, 10, 0, 0, 123456, tzinfo=UTC),
        finished_at=datetime(2026, 2, 3, 10, 0, 21, tzinfo=UTC),
        notes="retest after re-seating",
        measurements=[
            MeasurementRecord("Ls", 3.52e-4, "H", 1e3, 3.3e-4, 3.5e-4, "fail"),
            MeasurementRecord("Q", 38.5, "", 1e5, 30.0, None, "pass"),
            MeasurementRecord("Rdc", float("nan"), "ohm", None, None, 5.5, "error"),
            MeasurementRecord("Z", float("inf"), "ohm", 1e7, None, None, "overrange"),
        ],
    )
    return dataclasses.replace(base, **changes)


def _same_unit(a: UnitRecord, b: UnitRecord) -> bool:
    heads = [f.name for f in dataclasses.fields(UnitRecord) if f.name != "measurements"]
    same_head = all(getattr(a, n) == getattr(b, n) for n in heads)
    return (
        same_head
        and len(a.measurements) == len(b.measurements)
        and all(x.same_as(y) for x, y in zip(a.measurements, b.measurements, strict=True))
    )


def test_unit_round_trip_and_attempt_id_idempotence(store):
    meter = store.record_meter("Example Instruments", "LCR-1", "SN-7", "2.0")
    fixture = store.record_fixture("bench-leads")
    plan = store.record_plan("demo plan")
    ref = store.save_reference_set(_refs())
    unit = _unit(meter_id=meter, fixture_id=fixture, plan_id=plan, reference_set_id=ref)
    assert store.save_unit(unit) is True
    assert store.save_unit(unit) is False
    assert store.save_unit(dataclasses.replace(unit, outcome="pass")) is False
    back = store.load_unit(unit.attempt_id)
    assert _same_unit(back, unit)
    assert back.measurements[2].value != back.measurements[2].value  # NaN stays NaN

    retest = _unit(attempt=2, outcome="pass", bin="1", attempt_id=new_attempt_id())
    other_lot = _unit(serial="DC-0002", lot="", outcome="pass", attempt_id=new_attempt_id())
    assert store.save_units([retest, other_lot, unit, retest]) == 2
    attempts = store.unit_attempts("DC-0001")
    assert [u.attempt for u in attempts] == [1, 2]
    assert _same_unit(attempts[1], retest)
    assert store.load_unit(other_lot.attempt_id).lot == ""
    assert store.lot("LOT-1").attempts == 2
    frame = store.lot_units("LOT-1")
    assert list(frame["attempt_id"]) == [unit.attempt_id, retest.attempt_id]
    with pytest.raises(StoreError, match="no unit attempt"):
        store.load_unit(new_attempt_id())
    with pytest.raises(StoreError, match="not in the store|refused"):
        store.save_unit(_unit(attempt_id=new_attempt_id(), meter_id=meter + 50))


def test_unit_record_checks_its_fields():
    with pytest.raises(StoreError, match="at most 100 characters"):
        MeasurementRecord("L" * 101, 1.0)
    with pytest.raises(StoreError, match="unit may have at most 20"):
        MeasurementRecord("Ls", 1.0, "H" * 21)
    with pytest.raises(StoreError, match="UUID"):
        UnitRecord(serial="A", outcome="pass", attempt_id="not-a-uuid")
    with pytest.raises(StoreError, match="timezone"):
        UnitRecord(serial="A", outcome="pass", started_at=datetime(2026, 1, 1))
    upper = "6F1D7C2E-3B1A-4C55-9A0E-2F4B8D6C1A90"
    assert UnitRecord(serial="A", outcome="pass", attempt_id=upper).attempt_id == upper.lower()


def test_hostile_text_is_stored_verbatim(store):
    meters = [store.record_meter(s, s, s, s, s) for s in HOSTILE]
    assert len(set(meters)) == len(HOSTILE)
    for s, meter_id in zip(HOSTILE, meters, strict=True):
        m = store.meter(meter_id)
        assert (m.manufacturer, m.model, m.serial, m.firmware, m.dialect) == (s,) * 5
    for s in HOSTILE:
        fixture = store.fixture(store.record_fixture(s, notes=s))
        assert (fixture.name, fixture.notes) == (s, s)
        assert store.plan(store.record_plan(s, name=s)).text == s
    units = []
    for s in HOSTILE:
        unit = _unit(
            serial=s,
            lot=s or "LOT-empty-name",
            station=s,
            operator=s,
            notes=s,
            bin=s,
            outcome=s,
            attempt_id=new_attempt_id(),
            measurements=[MeasurementRecord(s[:100], 1.0, s[:20], 1e3, verdict=s[:40])],
        )
        assert store.save_unit(unit)
        units.append(unit)
    for unit in units:
        assert _same_unit(store.load_unit(unit.attempt_id), unit)
        assert [u.attempt_id for u in store.unit_attempts(unit.serial)] == [unit.attempt_id]
    refs = dataclasses.replace(_refs(), fixture=HOSTILE[0], meter=HOSTILE[6], notes=HOSTILE[9])
    back = store.load_reference_set(store.save_reference_set(refs, name=HOSTILE[2]))
    assert (back.fixture, back.meter, back.notes) == (HOSTILE[0], HOSTILE[6], HOSTILE[9])
    with store.begin_sweep(HOSTILE[1], settings={"note": HOSTILE[3]}) as w:
        w.add_points([1.0], [1j], [1j])
    assert store.sweep_info(w.id).dut == HOSTILE[1]
    assert store.sweep_info(w.id).settings == {"note": HOSTILE[3]}
    with store.engine.connect() as conn:
        count = conn.execute(text("SELECT COUNT(*) FROM units")).scalar_one()
        tables = conn.execute(text("SELECT COUNT(*) FROM measurements")).scalar_one()
    assert (count, tables) == (len(HOSTILE), len(HOSTILE))


def test_lot_summary_matches_numpy(store):
    """Mean and sample standard deviation as numpy computes them (numpy.mean, numpy.std ddof=1)."""
    units = [synthetic_unit(i, lot="LOT-S", measurements=10) for i in range(60)]
    units.append(synthetic_unit(0, lot="LOT-OTHER", worker=9))
    noisy = dataclasses.replace(
        units[0],
        attempt_id=new_attempt_id(),
        measurements=[MeasurementRecord("Ls", math.nan, "H", 1e3, verdict="error")],
    )
    assert store.save_units(units + [noisy], batch=25) == 62
    summary = store.lot_summary("LOT-S")
    records = [m for u in units[:60] + [noisy] for m in u.measurements]
    keys = sorted(
        {(m.parameter, -1.0 if m.frequency is None else m.frequency, m.unit) for m in records}
    )
    assert len(summary) == len(keys) == 10
    for row, (parameter, f, unit) in zip(summary.itertuples(index=False), keys, strict=True):
        group = [
            m
            for m in records
            if (m.parameter, m.unit) == (parameter, unit)
            and (m.frequency if m.frequency is not None else -1.0) == f
        ]
        values = np.array([m.value for m in group if math.isfinite(m.value)])
        passed = sum(m.verdict == "pass" for m in group)
        assert (row.parameter, row.unit, row.count, row.valid, row.passed) == (
            parameter,
            unit,
            len(group),
            values.size,
            passed,
        )
        assert (math.isnan(row.frequency) and f < 0) or row.frequency == f
        assert row[6] == passed / len(group)  # the "yield" column
        assert row.mean == pytest.approx(np.mean(values), rel=1e-12)
        assert row.std == pytest.approx(np.std(values, ddof=1), rel=1e-9)
        assert (row.min, row.max) == (values.min(), values.max())


def test_lot_summary_standard_deviation_is_two_pass(store):
    """Large mean, tiny spread: the one-pass sum-of-squares formula would lose every digit."""
    rng = np.random.default_rng(5)
    values = 1e9 + 1e-3 * rng.standard_normal(40)
    units = [
        UnitRecord(
            serial=f"S{i}",
            lot="LOT-F",
            outcome="pass",
            measurements=[MeasurementRecord("F", v, "Hz")],
        )
        for i, v in enumerate(values)
    ]
    store.save_units(units)
    row = store.lot_summary("LOT-F").iloc[0]
    assert row["std"] == pytest.approx(np.std(values, ddof=1), rel=1e-3)


def test_lot_yield_counts_serials(store):
    outcomes = [
        ("A", 1, "pass"),
        ("B", 1, "fail"),
        ("B", 2, "pass"),
        ("C", 1, "fail"),
        ("C", 2, "fail"),
    ]
    store.save_units(
        UnitRecord(serial=s, attempt=a, outcome=o, lot="LOT-Y") for s, a, o in outcomes
    )
    y = store.lot_yield("LOT-Y")
    assert (y.attempts, y.serials, y.first_pass, y.final_pass) == (5, 3, 1, 2)
    assert (y.first_pass_yield, y.final_yield) == (1 / 3, 2 / 3)


def test_plain_sql_answers_questions_about_a_lot(store):
    """The schema is meant for direct SQL: units of a lot whose Q at 100 kHz is below a value."""
    units = [synthetic_unit(i, lot="LOT-Q") for i in range(30)]
    store.save_units(units)
    expected = sorted(
        u.serial
        for u in units
        for m in u.measurements
        if m.parameter == "Q" and m.frequency == 1e5 and m.value < 38.0
    )
    query = text(
        "SELECT u.serial FROM units u JOIN lots l ON l.id = u.lot_id "
        "JOIN measurements m ON m.unit_id = u.id "
        "WHERE l.name = :lot AND m.parameter = 'Q' AND m.frequency = 100000 AND m.value < 38 "
        "ORDER BY u.serial"
    )
    with store.engine.connect() as conn:
        found = conn.execute(query, {"lot": "LOT-Q"}).scalars().all()
    assert found == expected and 0 < len(found) < 30


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
    memory.save_unit(_unit())
    assert memory.lot("LOT-1").attempts == 1
    memory.close()


def test_time_stamps_keep_utc(store):
    local = datetime(2026, 6, 1, 12, 0, tzinfo=UTC).astimezone(
        timezone(timedelta(hours=5, minutes=30))
    )
    unit = _unit(started_at=local, attempt_id=new_attempt_id())
    store.save_unit(unit)
    back = store.load_unit(unit.attempt_id).started_at
    assert back == local and back.utcoffset() == timedelta(0)


@pytest.mark.skipif(os.name != "posix", reason="process checks use POSIX signals")
def test_process_check_sees_own_process():
    from acquire.store.sweeps import writer_gone

    now = datetime.now(UTC)
    assert not writer_gone(socket.gethostname(), os.getpid(), now, now, 60.0)
    assert writer_gone(socket.gethostname(), os.getpid(), now - timedelta(hours=2), now, 60.0)
    assert not writer_gone("another-host", 1, now, now, 60.0)
