"""Results store: production units (round trip, attempt ids), hostile text, lot statistics.

Both engines; the PostgreSQL cases skip when the server is unreachable (fail when CI=true), as
described in ``tests/store_support.py``.
"""

from __future__ import annotations

import dataclasses
import math
from datetime import UTC, datetime, timedelta, timezone

import numpy as np
import pytest
from sqlalchemy import text
from store_support import store_location, synthetic_unit

from acquire.compensation import ReferenceSet
from acquire.errors import StoreError
from acquire.store import MeasurementRecord, UnitRecord, new_attempt_id, open_store

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
def store(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as s,
    ):
        yield s


def _refs() -> ReferenceSet:
    f = np.array([1e3, 1e4, 1e5])
    return ReferenceSet(f, short=0.02 + 2j * np.pi * f * 3e-7, fixture="clips")


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


def test_time_stamps_keep_utc(store):
    local = datetime(2026, 6, 1, 12, 0, tzinfo=UTC).astimezone(
        timezone(timedelta(hours=5, minutes=30))
    )
    unit = _unit(started_at=local, attempt_id=new_attempt_id())
    store.save_unit(unit)
    back = store.load_unit(unit.attempt_id).started_at
    assert back == local and back.utcoffset() == timedelta(0)
