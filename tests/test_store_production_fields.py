"""Results store, schema revision 0003: a measurement's expanded uncertainty and tolerance limits,
a unit's references override and temperature; saved and read back on both engines.

The example is our own invented scenario: a 344 µH coil judged against 344 µH ± 3 % with guarded
acceptance, guard band w = U (ILAC-G8:09/2019, guarded acceptance with w = 1 × U, k = 2), so the
acceptance limits are the tolerance limits moved inwards by U. The PostgreSQL cases skip when the
server is unreachable (fail when CI=true), as ``tests/store_support.py`` describes.
"""

from __future__ import annotations

import dataclasses
import math
from datetime import UTC, datetime

import pytest
from sqlalchemy import text
from store_support import store_location

from acquire.errors import StoreError
from acquire.store import MeasurementRecord, UnitRecord, new_attempt_id, open_store

NOMINAL = 344e-6
TOL_LOW, TOL_HIGH = NOMINAL * 0.97, NOMINAL * 1.03
U_LS = 2.0e-6


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as s,
    ):
        yield s


def _ls(value: float, u: float | None = U_LS) -> MeasurementRecord:
    """Ls at 10 kHz judged with w = U: pass inside the acceptance limits (ILAC-G8 binary)."""
    w = 0.0 if u is None or not math.isfinite(u) else u
    low, high = TOL_LOW + w, TOL_HIGH - w
    verdict = "pass" if low <= value <= high else "fail"
    return MeasurementRecord(
        "Ls",
        value,
        "H",
        1e4,
        low,
        high,
        verdict,
        uncertainty=u,
        tolerance_low=TOL_LOW,
        tolerance_high=TOL_HIGH,
    )


def _unit(serial: str, *measurements: MeasurementRecord, **changes) -> UnitRecord:
    return UnitRecord(
        serial=serial,
        lot="LOT-U",
        outcome="pass" if all(m.verdict == "pass" for m in measurements) else "fail",
        station="bench-3",
        started_at=datetime(2026, 4, 7, 9, 0, tzinfo=UTC),
        measurements=measurements,
        **changes,
    )


def _fields(record) -> dict:
    return {f.name: getattr(record, f.name) for f in dataclasses.fields(record)}


def _same(a: UnitRecord, b: UnitRecord) -> None:
    head_a, head_b = _fields(a), _fields(b)
    ms_a, ms_b = head_a.pop("measurements"), head_b.pop("measurements")
    assert head_a == head_b
    assert len(ms_a) == len(ms_b)
    for x, y in zip(ms_a, ms_b, strict=True):
        assert x.same_as(y), (x, y)


def _units() -> list[UnitRecord]:
    rdc = MeasurementRecord(
        "Rdc", 4.97, "ohm", None, 4.70, 5.20, "pass",
        uncertainty=0.012, tolerance_low=4.653, tolerance_high=5.247,
    )  # fmt: skip
    q_min = MeasurementRecord("Q", 41.0, "", 1e5, 30.5, None, "pass", 0.5, 30.0, None)
    return [
        _unit("DC-0101", _ls(344.9e-6), rdc, q_min, temperature=23.4),
        _unit(
            "DC-0102",
            _ls(335.0e-6),  # inside tolerance, in the guard band: fails the guarded rule
            reference_override="references 9 h old; supervisor approved re-use until noon",
        ),
        _unit("DC-0103", _ls(math.inf, u=math.inf), temperature=-5.0),  # overrange
        _unit("DC-0104", _ls(math.nan, u=None)),  # invalid reading, uncertainty unknown
        _unit("DC-0105", _ls(345.0e-6, u=0.0)),
    ]


def test_production_fields_round_trip_one_unit_at_a_time(store):
    units = _units()
    for unit in units:
        assert store.save_unit(unit) is True
    for unit in units:
        _same(store.load_unit(unit.attempt_id), unit)
    back = store.load_unit(units[2].attempt_id)
    assert back.measurements[0].uncertainty == math.inf
    assert back.temperature == -5.0
    assert store.load_unit(units[3].attempt_id).measurements[0].uncertainty is None
    assert store.load_unit(units[0].attempt_id).measurements[2].tolerance_high is None


def test_production_fields_round_trip_in_batches(store):
    units = _units()
    assert store.save_units(units, batch=2) == len(units)
    for unit in units:
        _same(store.load_unit(unit.attempt_id), unit)


def test_the_columns_answer_guard_band_questions_in_sql(store):
    """Units whose Ls lay inside the tolerance but outside the acceptance limits: the guard
    band cases that an engineer reviews (ILAC-G8:09/2019, zone between tolerance and acceptance
    limits)."""
    store.save_units(_units())
    query = text(
        "SELECT u.serial, m.uncertainty, u.reference_override FROM units u "
        "JOIN measurements m ON m.unit_id = u.id "
        "WHERE m.parameter = 'Ls' AND m.value BETWEEN m.tolerance_low AND m.tolerance_high "
        "AND (m.value < m.low_limit OR m.value > m.high_limit) ORDER BY u.serial"
    )
    with store.engine.connect() as conn:
        found = [tuple(r) for r in conn.execute(query)]
    # 335.0 µH lies above TL = 333.68 µH and below AL = TL + 2 µH = 335.68 µH.
    assert found == [("DC-0102", U_LS, "references 9 h old; supervisor approved re-use until noon")]
    with store.engine.connect() as conn:
        temps = conn.execute(text("SELECT serial, temperature FROM units ORDER BY serial")).all()
    assert [tuple(t) for t in temps] == [
        ("DC-0101", 23.4), ("DC-0102", None), ("DC-0103", -5.0), ("DC-0104", None),
        ("DC-0105", None),
    ]  # fmt: skip


def test_unknown_values_become_none_and_impossible_ones_are_refused():
    assert MeasurementRecord("Ls", 1e-4, "H", uncertainty=math.nan).uncertainty is None
    assert MeasurementRecord("Ls", 1e-4, "H", uncertainty=math.inf).uncertainty == math.inf
    assert UnitRecord(serial="A", outcome="pass", temperature=math.nan).temperature is None
    assert UnitRecord(serial="A", outcome="pass", temperature=21).temperature == 21.0
    with pytest.raises(StoreError, match="tolerance_low is NaN"):
        MeasurementRecord("Ls", 1e-4, "H", tolerance_low=math.nan)
    with pytest.raises(StoreError, match="temperature must be finite"):
        UnitRecord(serial="A", outcome="pass", temperature=math.inf)
    old_style = MeasurementRecord("Ls", 1e-4, "H", 1e3, 9e-5, 1.1e-4, "pass")
    assert (old_style.uncertainty, old_style.tolerance_low, old_style.tolerance_high) == (
        None,
        None,
        None,
    )
    unit = UnitRecord(serial="A", outcome="pass", attempt_id=new_attempt_id())
    assert (unit.reference_override, unit.temperature) == ("", None)
