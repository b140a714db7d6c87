"""Lot statistics (acquire.report.statistics) and the lot exports (acquire.report.lot_export).

Sources: NIST/SEMATECH e-Handbook of Statistical Methods, 6.1.6 (process capability: Cp, Cpk
and its worked example USL 20, LSL 8, mean 16, sigma 2 -> Cp 1.00, Cpk 0.667; one-sided
indices) and 6.3.2 (sigma from the mean moving range, d2 = 1.128). The store's own numbers are
checked against pandas computing them from the exported long CSV file, read back with
``pandas.read_csv(comment="#")``, for the demo's lot on SQLite and on PostgreSQL.
"""

from __future__ import annotations

import io
import math
from datetime import UTC, datetime, timedelta

import numpy as np
import pandas as pd
import pytest
from rich.console import Console
from store_support import store_location

from acquire.demo import run_demo
from acquire.demo_lot import LOT
from acquire.errors import StoreError
from acquire.report.lot_export import units_long, units_wide, write_csv
from acquire.report.statistics import (
    LotFilter,
    lot_statistics,
    process_capability,
    quantity_series,
)
from acquire.store import MeasurementRecord, UnitRecord, open_store

T0 = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)


def test_capability_of_the_handbook_example():
    # NIST/SEMATECH 6.1.6: USL 20, LSL 8, mean 16, sigma 2 -> Cp = 12/12 = 1.00,
    # Cpk = min(20 - 16, 16 - 8) / 6 = 0.667.
    cp, cpk = process_capability(16.0, 2.0, 8.0, 20.0)
    assert cp == pytest.approx(1.00, abs=5e-3)
    assert cpk == pytest.approx(0.667, abs=5e-4)


def test_one_sided_and_undefined_capability():
    # 6.1.6's one-sided indices: Cpu = (USL - mean)/3 sigma, Cpl = (mean - LSL)/3 sigma;
    # Cp needs both limits.
    cp, cpk = process_capability(16.0, 2.0, None, 20.0)
    assert math.isnan(cp) and cpk == pytest.approx(4 / 6)
    cp, cpk = process_capability(16.0, 2.0, 8.0, None)
    assert math.isnan(cp) and cpk == pytest.approx(8 / 6)
    assert all(math.isnan(v) for v in process_capability(16.0, 2.0, None, None))
    assert all(math.isnan(v) for v in process_capability(16.0, 0.0, 8.0, 20.0))


def _unit(serial, value, order, attempt=1, station="s1", plan_id=None, verdict="pass"):
    """A unit with one Rs reading at 10 kHz, tolerance 8 ... 20 ohm, finished at T0 + order s."""
    m = MeasurementRecord(
        "Rs", value, "Ω", 1e4, 8.5, 19.5, verdict, uncertainty=0.1,
        tolerance_low=8.0, tolerance_high=20.0,
    )  # fmt: skip
    good = verdict == "pass"
    end = T0 + timedelta(seconds=order)
    return UnitRecord(
        serial=serial, outcome="pass" if good else "fail", bin="1" if good else "reject",
        measurements=(m,), lot="L1", attempt=attempt, station=station, plan_id=plan_id,
        started_at=end - timedelta(seconds=1), finished_at=end,
    )  # fmt: skip


@pytest.fixture
def small_store(tmp_path):
    """Six attempts whose valid values in test order are 10, 12, 11, 15, 13, saved out of order;
    C's first attempt is an invalid reading (NaN) that fails, its retest reads 11."""
    with open_store(f"sqlite:///{tmp_path / 's.db'}") as store:
        plan = store.record_plan("our own plan text", "small plan")
        units = [
            _unit("E", 13.0, 6, station="s2", plan_id=plan),
            _unit("C", 11.0, 4, attempt=2, plan_id=plan),
            _unit("A", 10.0, 1, plan_id=plan),
            _unit("D", 15.0, 5, plan_id=plan),
            _unit("C", math.nan, 3, verdict="fail", plan_id=plan),
            _unit("B", 12.0, 2, plan_id=plan),
        ]
        for u in units:
            store.save_unit(u)
        yield store


def test_statistics_of_a_small_lot_worked_by_hand(small_store):
    s = lot_statistics(small_store, LotFilter(lot="L1"))
    assert (s.units, s.attempts, s.passed, s.first_pass) == (5, 6, 5, 4)
    assert s.yield_ == 1.0 and s.first_pass_yield == pytest.approx(0.8)
    assert s.bins == {"1": 5} and s.failing == {}
    (q,) = s.quantities
    assert (q.parameter, q.frequency, q.unit, q.count, q.valid, q.passed) == (
        "Rs", 1e4, "Ω", 6, 5, 5,
    )  # fmt: skip
    # By hand: mean 61/5 = 12.2; squared deviations 4.84 + 0.04 + 1.44 + 7.84 + 0.64 = 14.8,
    # std = sqrt(14.8/4) = 1.923538406; moving ranges in test order (the NaN bridged) 2, 1, 4, 2,
    # sigma within = 2.25/1.128 = 1.994680851 (NIST/SEMATECH 6.3.2).
    assert q.mean == pytest.approx(12.2, rel=1e-12)
    assert q.std == pytest.approx(1.923538406, rel=1e-9)
    assert (q.minimum, q.maximum) == (10.0, 15.0)
    assert q.sigma_within == pytest.approx(1.994680851, rel=1e-9)
    # Capability by hand (6.1.6): Cp = 12/(6·1.994680851) = 1.002666667,
    # Cpk = 4.2/(3·1.994680851) = 0.701866667, Pp = 12/(6·1.923538406) = 1.039750490,
    # Ppk = 4.2/(3·1.923538406) = 0.727825343.
    assert q.cp == pytest.approx(1.002666667, rel=1e-8)
    assert q.cpk == pytest.approx(0.701866667, rel=1e-8)
    assert q.pp == pytest.approx(1.039750490, rel=1e-8)
    assert q.ppk == pytest.approx(0.727825343, rel=1e-8)
    assert (q.tolerance_low, q.tolerance_high) == (8.0, 20.0)
    assert (q.acceptance_low, q.acceptance_high) == (8.5, 19.5)
    document = s.to_json()
    assert document["lot"] == "L1" and document["yield"] == 1.0
    assert document["quantities"][0]["min"] == 10.0 and "within" in document["sigma"]


def test_filters_narrow_the_selection(small_store):
    # Before C's retest (finished at T0 + 4 s): C's latest attempt is the failing one.
    early = lot_statistics(small_store, LotFilter(lot="L1", until=T0 + timedelta(seconds=4)))
    assert (early.units, early.attempts, early.passed) == (3, 3, 2)
    assert early.bins == {"1": 2, "reject": 1} and early.failing == {"Rs@10000": 1}
    late = lot_statistics(small_store, LotFilter(since=T0 + timedelta(seconds=4)))
    assert late.units == 3 and late.quantities[0].mean == pytest.approx(13.0)
    station = lot_statistics(small_store, LotFilter(station="s2"))
    assert station.units == 1 and station.quantities[0].mean == 13.0
    plan_hash = small_store.plan(plan_id=1).hash
    by_hash = lot_statistics(small_store, LotFilter(plan_hash=plan_hash[:8]))
    by_name = lot_statistics(small_store, LotFilter(plan_hash="small plan"))
    assert by_hash.attempts == by_name.attempts == 6
    with pytest.raises(StoreError, match="no stored test plan"):
        lot_statistics(small_store, LotFilter(plan_hash="other"))
    with pytest.raises(StoreError, match="no lot"):
        lot_statistics(small_store, LotFilter(lot="L2"))
    with pytest.raises(StoreError, match="timezone"):
        LotFilter(since=datetime(2026, 3, 2))


def test_series_and_wide_table_in_test_order(small_store):
    series = quantity_series(small_store, LotFilter(lot="L1"), "Rs", 1e4)
    assert series["serial"].tolist() == ["A", "B", "C", "C", "D", "E"]
    np.testing.assert_array_equal(series["value"], [10, 12, np.nan, 11, 15, 13])
    assert series["verdict"].tolist()[2] == "fail" and series["tolerance_high"].eq(20).all()
    wide = units_wide(small_store, LotFilter(lot="L1"))
    assert wide["serial"].tolist() == ["A", "B", "C", "C", "D", "E"]
    assert list(wide.columns[-2:]) == ["Rs@10kHz [ohm]", "U(Rs@10kHz) [ohm]"]
    assert wide["U(Rs@10kHz) [ohm]"].eq(0.1).all()


def test_a_serial_with_a_hash_reads_back_whole(tmp_path):
    with open_store(f"sqlite:///{tmp_path / 'h.db'}") as store:
        store.save_unit(_unit('A#7, "x"', 10.0, 1))
        path = write_csv(units_long(store, LotFilter(lot="L1")), tmp_path / "l.csv", {"a": "b"})
    back = pd.read_csv(path, comment="#")
    assert back["serial"].tolist() == ['A#7, "x"'] and back["value"].tolist() == [10.0]


def _pandas_statistics(path):
    """Per quantity the statistics of the long CSV, worked out with pandas alone."""
    long = pd.read_csv(path, comment="#", keep_default_na=False, na_values=[""])
    long["finished_at"] = pd.to_datetime(long["finished_at"])
    long = long.sort_values("finished_at", kind="stable")
    measured = long[long["parameter"].notna()]
    out = {}
    keys = ["parameter", "frequency [Hz]", "unit"]
    for (p, f, u), g in measured.groupby(keys, dropna=False, sort=False):
        valid = g["value"][np.isfinite(g["value"])]
        mr = valid.diff().abs().dropna()
        out[(p, None if pd.isna(f) else float(f), u)] = {
            "count": len(g), "valid": len(valid), "passed": int((g["verdict"] == "pass").sum()),
            "mean": valid.mean(), "std": valid.std(ddof=1), "min": valid.min(),
            "max": valid.max(), "sigma_within": mr.mean() / 1.128,
            "low": g["tolerance_low"].median(), "high": g["tolerance_high"].median(),
        }  # fmt: skip
    attempts = long.drop_duplicates("attempt_id").sort_values(["attempt"], kind="stable")
    latest = attempts.groupby("serial").tail(1)
    first = attempts.groupby("serial").head(1)
    units = {
        "units": latest.shape[0], "attempts": attempts.shape[0],
        "passed": int((latest["outcome"] == "pass").sum()),
        "first_pass": int((first["outcome"] == "pass").sum()),
        "bins": latest["bin"].fillna("").value_counts().to_dict(),
    }  # fmt: skip
    return out, units


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_store_summary_equals_pandas_on_the_exported_csv(engine, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)  # the demo station's outbox, for a PostgreSQL store
    with store_location(engine, tmp_path) as (url, schema):
        full = url if schema is None else f"{url}?schema={schema}"
        run_demo(full, live=False, points=101, measure_time=0, console=Console(file=io.StringIO()))
        with open_store(full) as store:
            chosen = LotFilter(lot=LOT)
            stats = lot_statistics(store, chosen)
            path = write_csv(units_long(store, chosen), tmp_path / "long.csv", {"lot": LOT})
    expected, units = _pandas_statistics(path)
    assert stats.units == units["units"] == 30 and stats.attempts == units["attempts"]
    assert (stats.passed, stats.first_pass) == (units["passed"], units["first_pass"])
    assert stats.bins == units["bins"]
    labels = {"": "1", "Ω": "ohm"}
    assert len(stats.quantities) == len(expected)
    for q in stats.quantities:
        e = expected[(q.parameter, q.frequency, labels.get(q.unit, q.unit))]
        assert (q.count, q.valid, q.passed) == (e["count"], e["valid"], e["passed"])
        for name, mine in [("mean", q.mean), ("std", q.std), ("min", q.minimum)] + [
            ("max", q.maximum),
            ("sigma_within", q.sigma_within),
        ]:
            assert mine == pytest.approx(e[name], rel=1e-9), (q.key, name)
        low = None if pd.isna(e["low"]) else e["low"]
        high = None if pd.isna(e["high"]) else e["high"]
        for mine, theirs in ((q.tolerance_low, low), (q.tolerance_high, high)):
            assert mine == (None if theirs is None else pytest.approx(theirs, rel=1e-12))
        if low is not None and high is not None:
            # NIST/SEMATECH 6.1.6 with pandas' numbers.
            assert q.cp == pytest.approx((high - low) / (6 * e["sigma_within"]), rel=1e-9)
            assert q.pp == pytest.approx((high - low) / (6 * e["std"]), rel=1e-9)
        sides = [(high - e["mean"]) if high is not None else math.inf]
        sides += [(e["mean"] - low) if low is not None else math.inf]
        if min(sides) < math.inf:
            assert q.ppk == pytest.approx(min(sides) / (3 * e["std"]), rel=1e-9)
            assert q.cpk == pytest.approx(min(sides) / (3 * e["sigma_within"]), rel=1e-9)
