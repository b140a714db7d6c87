"""The line overview's numbers: each station's yield is the lot report's, the yield over time
ends at the lot's final yield, a quiet station is called silent.

The final yield is defined by the lot report (acquire/report/statistics.py, "yields ... use each
serial's latest attempt"): the reference values here are worked out independently with pandas
(latest attempt per serial by ``groupby``) and by hand.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import UTC, datetime, timedelta

import numpy as np
import pandas as pd
from store_support import make_unit

from acquire.production.station_watch import StationState
from acquire.report.statistics import lot_statistics
from acquire.store import open_store
from acquire.store.lot_query import LotFilter
from acquire.web.overview import SILENT_AFTER_S, cumulative_yield, read_overview

T0 = datetime(2026, 5, 4, 6, 0, tzinfo=UTC)


def test_the_yield_after_each_attempt_counts_each_serials_latest_attempt():
    # worked by hand: A passes (1/1); B fails (1/2); B again passes (2/2); C fails (2/3);
    # A's second attempt fails (1/3)
    serials = np.array(["A", "B", "B", "C", "A"])
    attempts = np.array([1, 1, 2, 1, 2])
    outcomes = np.array(["pass", "fail", "pass", "fail", "fail"])
    expected = [1.0, 0.5, 1.0, 2 / 3, 1 / 3]
    np.testing.assert_allclose(cumulative_yield(serials, attempts, outcomes), expected)


def _state(station: str, lot: str, updated: datetime, state: str = "running") -> StationState:
    return StationState(
        station=station, state=state, reason="", lot=lot, plan="coil", plan_hash="",
        operator="ana", meter="m", fixture="jig", tested=0, passed=0, waiting=0,
        references="", check_standard="", started_at=T0, updated_at=updated,
    )  # fmt: skip


def _units(lot: str, worker: int, count: int, seed: int) -> list:
    """``count`` units, every fourth tested again (a second attempt)."""
    rng = np.random.default_rng(seed)
    units = []
    for i in range(count):
        unit = make_unit(i, lot, worker, rng.standard_normal(10) * 1.2)
        units.append(unit)
        if i % 4 == 0:
            again = make_unit(i, lot, worker, rng.standard_normal(10) * 0.5)
            later = again.finished_at + timedelta(minutes=30)
            retest = f"{unit.attempt_id[:-4]}beef"
            units.append(replace(again, attempt=2, attempt_id=retest, finished_at=later))
    return units


def _latest_yield(frame: pd.DataFrame) -> float:
    latest = frame.sort_values("attempt").groupby("serial").tail(1)
    return float((latest.outcome == "pass").mean())


def test_each_stations_numbers_are_the_lot_reports_and_the_picture_ends_at_the_lot_yield(
    tmp_path,
):
    url = f"sqlite:///{tmp_path / 'line.db'}"
    with open_store(url) as store:
        store.save_units(_units("L-9", 0, 21, seed=1) + _units("L-9", 1, 13, seed=2))
        store.save_units(_units("L-10", 2, 5, seed=3))
        now = T0 + timedelta(hours=2)
        for name, lot in (("station-0", "L-9"), ("station-1", "L-9"), ("station-2", "L-10")):
            store.save_station_state(_state(name, lot, now - timedelta(seconds=5)))
        overview = read_overview(store, now)
        units = store.lot_units("L-9")
        for view in overview.stations:
            chosen = LotFilter(lot=view.state.lot, station=view.state.station)
            report = lot_statistics(store, chosen)
            assert (view.tested, view.passed, view.attempts) == (
                report.units, report.passed, report.attempts,
            )  # fmt: skip
            assert view.yield_ == report.yield_
            if view.state.lot == "L-9":
                mine = units[units.station == view.state.station]
                assert view.yield_ == _latest_yield(mine)
                assert [u.serial for u in view.recent] == list(mine.serial[::-1][:8])
        lots = {v.lot: v for v in overview.lots}
        assert set(lots) == {"L-9", "L-10"}
        whole = lot_statistics(store, LotFilter(lot="L-9"))
        assert lots["L-9"].yield_ == whole.yield_ == _latest_yield(units)
        assert lots["L-9"].yields[-1] == whole.yield_
        assert len(lots["L-9"].times) == whole.attempts
        assert list(lots["L-9"].times) == sorted(lots["L-9"].times)


def test_a_station_quiet_for_over_a_minute_is_silent_unless_it_stopped(tmp_path):
    url = f"sqlite:///{tmp_path / 'line.db'}"
    with open_store(url) as store:
        store.record_lot("L-1")
        now = T0 + timedelta(hours=1)
        old = now - timedelta(seconds=SILENT_AFTER_S + 1)
        store.save_station_state(_state("quiet", "L-1", old))
        store.save_station_state(_state("ended", "L-1", old, state="stopped"))
        store.save_station_state(_state("busy", "L-1", now - timedelta(seconds=2)))
        shown = {v.state.station: v.shown_state for v in read_overview(store, now).stations}
    assert shown == {"quiet": "silent", "ended": "stopped", "busy": "running"}
