"""A unit's packed readings (acquire.store.packed_readings, schema revision 0012) hold exactly
its measurement rows, whichever path wrote the unit: ``save_unit`` (the station's path, one
statement on PostgreSQL), ``save_units`` (imports), the station's outbox, and the migration that
fills units stored before 0012; on SQLite and on PostgreSQL.

The rows are read back with plain SQL and compared with the decoded copy: the value (NaN for an
invalid, overrange or NULL reading), the four limits (NaN for NULL), the verdict and the
``value_special`` text, in ``seq`` order. Units and values are our own invented examples.
"""

from __future__ import annotations

import math
import uuid
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from store_support import store_location
from test_store_migration import _change, _raw

from acquire.production.outbox import Outbox, RecordKeeper
from acquire.store import MeasurementRecord, UnitRecord, open_store
from acquire.store.packed_readings import SPECIAL_CODES, VERDICT_CODES, pack, unpack
from acquire.store.unit_rows import measurement_rows

T0 = datetime(2021, 3, 1, 9, 0, tzinfo=UTC)
VERDICTS = ["pass", "fail", "conditional pass", "conditional fail", "", "fail high"]


def varied_unit(k: int, lot: str = "P") -> UnitRecord:
    """A unit whose readings cover the awkward cases: NaN, +inf, -inf, DC, open sides, every
    verdict spelling (one the codes do not know), a repeated quantity; unit 3 has none."""
    values = [1e-4 + k * 1e-9, math.nan, math.inf, -math.inf, 0.35 + k, 42.0]
    records = [
        MeasurementRecord(
            ["Ls", "Q", "Rs", "Rs", "Rdc", "Q"][j],
            values[(j + k) % 6],
            ["H", "", "ohm", "ohm", "ohm", ""][j],
            [1e4, 1e4, 1e5, 2e5, None, 1e4][j],
            None if j == 2 else -1.0 - j,
            None if j == 3 else 1e3 + k,
            VERDICTS[(j + k) % len(VERDICTS)],
            tolerance_low=None if j == 4 else -2.0,
            tolerance_high=5.5 + j,
        )
        for j in range(6)
    ]
    return UnitRecord(
        serial=f"P-{k}", lot=lot, outcome="pass", finished_at=T0 + timedelta(seconds=k),
        measurements=() if k == 3 else tuple(records[: 3 + k % 4]),
        attempt_id=str(uuid.UUID(int=7_000 + k)),
    )  # fmt: skip


def check_copies(url: str, schema: str | None, expect_units: int, skip: int = 0) -> None:
    """Every unit's packed copy (but unit ``skip``'s) decodes to its measurement rows, read
    with plain SQL."""
    units = _raw(url, schema, "SELECT id, readings_layout, readings FROM units ORDER BY id")
    assert len(units) == expect_units
    units = [u for u in units if u[0] != skip]
    codes = {v: k for k, v in VERDICT_CODES.items()}
    specials = {v: k for k, v in SPECIAL_CODES.items()}
    for unit_id, layout, readings in units:
        rows = _raw(
            url, schema,
            "SELECT parameter, frequency, si_unit, value, value_special, low_limit, high_limit, "
            f"tolerance_low, tolerance_high, verdict FROM measurements WHERE unit_id = {unit_id} "
            "ORDER BY seq",
        )  # fmt: skip
        got = unpack(layout, bytes(readings))
        assert list(zip(got["parameter"], got["frequency"], got["si_unit"], strict=True)) == [
            r[:3] for r in rows
        ]
        nan = float("nan")
        want_values = [nan if r[4] or r[3] is None else r[3] for r in rows]
        assert np.array_equal(got["value"], np.array(want_values, float), equal_nan=True)
        for k, name in enumerate(("low_limit", "high_limit", "tolerance_low", "tolerance_high")):
            want = np.array([nan if r[5 + k] is None else r[5 + k] for r in rows], float)
            assert np.array_equal(got[name], want, equal_nan=True), name
        assert [specials[c] for c in got["special"]] == [r[4] for r in rows]
        assert [codes.get(c, "other") for c in got["verdict"]] == [
            r[9] if r[9] in VERDICT_CODES else "other" for r in rows
        ]


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_every_write_path_stores_a_copy_equal_to_the_rows(engine, tmp_path):
    units = [varied_unit(k) for k in range(12)]
    with store_location(engine, tmp_path) as (url, schema):
        with open_store(url, schema=schema) as store:
            for unit in units[:4]:
                assert store.save_unit(unit)
            assert store.save_units(units[4:8], batch=3) == 4
            with Outbox(tmp_path / "outbox.db") as box:
                keeper = RecordKeeper(store, box)
                assert all(keeper.save(unit) for unit in units[8:])
        check_copies(url, schema, len(units))
        stored = _raw(url, schema, "SELECT count(*) FROM measurements")[0][0]
        assert stored == sum(len(u.measurements) for u in units) and stored > 30


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_the_migration_fills_units_stored_before_it(engine, tmp_path):
    """A store as revision 0011 left it (the new columns dropped, the version set back) is
    opened: every unit gets its copy from its rows; one whose rows cannot be packed exactly
    (a value_special no path writes) keeps NULL; the test-order index is made."""
    units = [varied_unit(k) for k in range(9)]
    with store_location(engine, tmp_path) as (url, schema):
        with open_store(url, schema=schema) as store:
            assert store.save_units(units, batch=4) == len(units)
        _change(url, schema, "DROP INDEX ix_units_lot_order")
        _change(url, schema, "ALTER TABLE units DROP COLUMN readings")
        _change(url, schema, "ALTER TABLE units DROP COLUMN readings_layout")
        _change(url, schema, "UPDATE alembic_version SET version_num = '0011'")
        _change(url, schema, "UPDATE measurements SET value_special = 'odd' WHERE unit_id = 5")
        with open_store(url, schema=schema) as store:
            assert store.migrated_from == "0011"
        indexes = (
            "SELECT name FROM sqlite_master WHERE type = 'index'"
            if engine == "sqlite"
            else f"SELECT indexname FROM pg_indexes WHERE schemaname = '{schema}'"
        )
        assert ("ix_units_lot_order",) in _raw(url, schema, indexes)
        assert _raw(url, schema, "SELECT readings_layout, readings FROM units WHERE id = 5") == [
            (None, None)
        ]
        check_copies(url, schema, len(units), skip=5)


def test_the_one_pass_rows_and_copy_equal_packing_the_rows_afterwards():
    # measurement_rows builds a unit's rows and their packed copy together (the station's path);
    # pack(), the reference also used on rows read back from a store, must give the same copy
    # of those rows, for the awkward cases above and for NaN where a number may be NaN.
    odd = MeasurementRecord(
        "Ls", math.nan, "H", math.nan, math.nan, math.nan, "pass",
        uncertainty=math.inf, bias_current=math.nan,
    )  # fmt: skip
    units = [varied_unit(k) for k in range(12)]
    units.append(UnitRecord(serial="P-odd", outcome="fail", measurements=(odd,) * 3))
    for lot_id, unit in enumerate(units):
        rows, layout, readings = measurement_rows(unit.measurements, lot_id, "2021-03-01")
        assert pack(rows) == (layout, readings)
        assert [r[0] for r in rows] == list(range(len(unit.measurements)))
        for row, m in zip(rows, unit.measurements, strict=True):
            assert row[1] == m.parameter and row[4] == m.unit and row[7] == m.verdict
            assert row[8] == lot_id and row[13] == "2021-03-01"
            assert (
                row[2] == (0.0 if m.frequency is None else m.frequency)
                or m.frequency != m.frequency
            )
            if math.isfinite(m.value):
                assert (row[3], row[9]) == (m.value, "")
            else:
                assert (row[3], row[9]) == (None, repr(m.value))
    odd_row = measurement_rows((odd,), None, "t")[0][0]
    assert odd_row[2] is None and odd_row[5] is None and odd_row[6] is None
    assert odd_row[10] == math.inf and odd_row[14] is None
