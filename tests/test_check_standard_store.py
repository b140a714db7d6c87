"""Check standards in the store, both engines: checks read back in order with their rules, the
newest check and acknowledgement, and the acknowledgement id stored on units (one at a time and
in batches). The names and values are our own invented data."""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

import pytest
from store_support import store_location

from acquire.store import UnitRecord, open_store
from acquire.store.check_results import CheckValue
from acquire.store.records import MeasurementRecord

T0 = datetime(2026, 5, 4, 6, 0, tzinfo=UTC)
HOSTILE = "[bold]CS'1[/bold] \"; DROP TABLE units; --"


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as s,
    ):
        yield s


def _values(ls: float, rules: tuple[str, ...] = ()) -> list[CheckValue]:
    return [
        CheckValue("Ls@10000", "H", ls, 6.6e-7, rules),
        CheckValue("Q@10000", "", math.nan, math.nan),
    ]


def test_checks_read_back_in_order_with_their_rules(store):
    assert store.check_summary(HOSTILE).checks == 0
    for i in range(3):
        store.save_check(HOSTILE, _values(344e-6 + i * 1e-7), "st-1", "ab" * 32,
                         checked_at=T0 + timedelta(hours=i))  # fmt: skip
    last = store.save_check(HOSTILE, _values(346e-6, ("beyond 3 sigma",)), "st-1", "",
                            checked_at=T0 + timedelta(hours=5))  # fmt: skip
    rows = store.check_history(HOSTILE, "Ls@10000")
    assert [r.value for r in rows] == [344e-6, 344.1e-6, 344.2e-6, 346e-6]
    assert rows[-1].rules == ("beyond 3 sigma",) and rows[0].rules == ()
    assert rows[0].station == "st-1" and rows[0].uncertainty == 6.6e-7
    q = store.check_history(HOSTILE, "Q@10000")
    assert all(math.isnan(r.value) and math.isnan(r.uncertainty) for r in q)
    summary = store.check_summary(HOSTILE)
    assert (summary.checks, summary.last_check_id) == (4, last)
    assert summary.last_checked == T0 + timedelta(hours=5)
    assert summary.broken == (("Ls@10000", "beyond 3 sigma"),)
    assert store.list_check_standards() == [(HOSTILE, 4, T0 + timedelta(hours=5))]


def test_acknowledgement_is_stored_on_units_of_both_write_paths(store):
    check = store.save_check("CS-2", _values(1e-3, ("8 in a row on one side",)), checked_at=T0)
    ack = store.acknowledge_check("CS-2", "eve", "re-seated the standard", "rules", check,
                                  made_at=T0 + timedelta(minutes=5))  # fmt: skip
    assert store.check_summary("CS-2").acknowledgement == ack
    assert store.check_acknowledgements("CS-2") == [ack]
    m = (MeasurementRecord("Ls", 344e-6, "H", 1e4),)
    one = UnitRecord(serial="U-1", outcome="pass", measurements=m, check_acknowledgement_id=ack.id)
    assert store.save_unit(one)
    many = [
        UnitRecord(serial=f"U-{i}", outcome="pass", measurements=m, check_acknowledgement_id=ack.id)
        for i in (2, 3)
    ]
    assert store.save_units(many) == 2
    plain = UnitRecord(serial="U-4", outcome="pass", measurements=m)
    assert store.save_unit(plain)
    for serial in ("U-1", "U-2", "U-3"):
        assert store.unit_attempts(serial)[-1].check_acknowledgement_id == ack.id
    assert store.unit_attempts("U-4")[-1].check_acknowledgement_id is None
