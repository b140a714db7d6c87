"""A unit is written as one transaction: on PostgreSQL one statement, one round trip to the
server with its commit (psycopg sends a BEGIN before a transaction's first statement and a
COMMIT after it, so a transaction of k statements costs k + 2); atomic and idempotent on both
engines, with the same rows as SQLAlchemy Core's own INSERT would store."""

from __future__ import annotations

import dataclasses

import pytest
from sqlalchemy import select
from store_support import RoundTrips, attempt_id, store_location, synthetic_unit

from acquire.errors import StoreError
from acquire.store import open_store
from acquire.store.schema import TABLES


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as opened,
    ):
        yield opened


def test_one_round_trip_a_unit_on_postgresql(store):
    store.save_unit(synthetic_unit(0))  # the lot is looked up once per store
    trips = RoundTrips(store)
    for i in range(1, 21):
        store.save_unit(synthetic_unit(i))
    # SQLite: the unit's INSERT, then its measurements' one executemany, run once per row.
    expected = 1 if store.engine_name == "postgresql" else 1 + len(synthetic_unit(0).measurements)
    assert trips.count == 20 * expected


def test_a_repeated_unit_is_stored_once(store):
    unit = synthetic_unit(1)
    assert store.save_unit(unit) is True
    assert store.save_unit(unit) is False
    assert store.load_unit(unit.attempt_id) == unit
    with store.engine.connect() as conn:
        n = conn.execute(select(TABLES["measurements"].c.seq)).all()
    assert len(n) == len(unit.measurements)


def test_a_unit_that_cannot_be_stored_leaves_nothing(store):
    good = synthetic_unit(2)
    bad_measurement = dataclasses.replace(good.measurements[-1], unit="ohm\x00")
    if store.engine_name == "sqlite":  # SQLite takes NUL: refuse the last measurement
        with store.engine.begin() as conn:
            conn.exec_driver_sql(
                "CREATE TRIGGER refuse BEFORE INSERT ON measurements WHEN NEW.si_unit LIKE "
                "'ohm_' BEGIN SELECT RAISE(ABORT, 'refused'); END"
            )
        bad_measurement = dataclasses.replace(good.measurements[-1], unit="ohm!")
    bad = dataclasses.replace(good, measurements=(*good.measurements[:-1], bad_measurement))
    with pytest.raises(StoreError):
        store.save_unit(bad)
    with store.engine.connect() as conn:
        assert conn.execute(select(TABLES["units"].c.id)).all() == []
        assert conn.execute(select(TABLES["measurements"].c.seq)).all() == []
    assert store.save_unit(good) is True  # the connection is usable afterwards


def test_rows_match_a_core_insert(store, tmp_path):
    """The stored rows equal those that Core's ``save_units`` path (an INSERT built by
    SQLAlchemy, the one batch imports take) stores for the same unit."""
    unit = synthetic_unit(3)
    other = dataclasses.replace(unit, attempt_id=attempt_id(9, 3))
    store.save_unit(unit)
    store.save_units([other])
    with store.engine.connect() as conn:
        u = TABLES["units"]
        heads = conn.execute(select(u).order_by(u.c.id)).all()
        m = TABLES["measurements"]
        rows = conn.execute(select(m).order_by(m.c.unit_id, m.c.seq)).all()
    skip = {"id", "attempt_id", "saved_at"}
    first, second = ({k: v for k, v in h._mapping.items() if k not in skip} for h in heads)
    assert first == second
    half = len(rows) // 2
    assert [tuple(r)[1:] for r in rows[:half]] == [tuple(r)[1:] for r in rows[half:]]
    if store.engine_name == "sqlite":
        # The text itself, as SQLite compares it: a time stored without its microseconds sorts
        # before the same time stored with them, and a filter `finished < T` would let it in.
        with store.engine.connect() as conn:
            raw = conn.exec_driver_sql(
                "SELECT started_at, finished_at FROM units ORDER BY id"
            ).all()
            tested = conn.exec_driver_sql(
                "SELECT DISTINCT tested_at FROM measurements ORDER BY unit_id"
            ).all()
        assert raw[0] == raw[1]
        assert tested[0] == tested[-1]


def test_times_on_whole_seconds_keep_the_lot_filters_exact(store):
    """A unit finished exactly at a filter's `until` is outside it (until is exclusive)."""
    from datetime import UTC, datetime, timedelta

    from acquire.report.statistics import LotFilter, lot_statistics

    end = datetime(2026, 3, 2, 8, 0, 4, tzinfo=UTC)
    for i, finished in enumerate((end - timedelta(seconds=1), end)):
        unit = dataclasses.replace(
            synthetic_unit(20 + i), started_at=finished - timedelta(seconds=1),
            finished_at=finished, lot="L-edge",
        )  # fmt: skip
        store.save_unit(unit)
    assert lot_statistics(store, LotFilter(lot="L-edge", until=end)).attempts == 1
    assert lot_statistics(store, LotFilter(lot="L-edge", since=end)).attempts == 1


def test_a_measurements_bias_current_reads_back(store):
    unit = synthetic_unit(3)
    first = dataclasses.replace(unit.measurements[0], bias_current=2.5)
    biased = dataclasses.replace(unit, measurements=(first, *unit.measurements[1:]))
    assert store.save_unit(biased)
    again = store.load_unit(biased.attempt_id)
    assert again.measurements[0].bias_current == 2.5
    assert all(m.bias_current is None for m in again.measurements[1:])
    assert again == biased
