"""Lot statistics as ``acquire lot`` reads them (acquire.report.statistics.lot_statistics, over
acquire.store.quantity_summary) against an independent computation on the units as written:
Python's ``statistics`` module (fmean, stdev, median) and numpy (moving ranges), on random lots
on SQLite and PostgreSQL. The mean moving range and d2 = 1.128 for ranges of two are from the
NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2; the capability indices are checked in
tests/test_report_statistics.py.

Test order is the unit's finished_at (else started_at), then the order the units were stored in;
a unit's measurements by their sequence; an invalid reading is left out of the moving ranges.
"""

from __future__ import annotations

import math
import statistics
import uuid
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from store_support import store_location

from acquire.report.control import D2
from acquire.report.statistics import LotFilter, lot_statistics, quantity_key
from acquire.store import MeasurementRecord, UnitRecord, open_store

T0 = datetime(2026, 5, 4, 7, 0, tzinfo=UTC)
#: Quantities of the random lot: parameter, frequency (None: DC), SI unit, nominal, spread.
QUANTITIES = [
    ("Ls", 1e3, "H", 2.2e-4, 2e-6),
    ("Ls", 1e5, "H", 2.21e-4, 2e-6),
    ("Rs", 1e4, "ohm", 1.5e3, 0.02),  # a large mean and a small spread
    ("Q", 1e5, "", 52.0, 1.5),
    ("Rdc", None, "ohm", 0.9, 0.01),
]


def random_lot(seed: int, count: int) -> list[UnitRecord]:
    """``count`` unit attempts (some retests) of lot "R", in the order they are stored: equal
    finish times, units without a finish time, invalid readings, open sides and limits that
    change part way."""
    rng = np.random.default_rng(seed)
    units = []
    for i in range(count):
        serial = f"R-{i % (count - count // 8):05d}"  # the last eighth are retests
        finished = T0 + timedelta(seconds=int(rng.integers(0, count // 3)))  # many ties
        records = []
        for k, (name, f, unit, nominal, sigma) in enumerate(QUANTITIES):
            value = float(nominal + sigma * rng.standard_normal())
            if rng.random() < 0.05:
                value = float(rng.choice([math.nan, math.inf]))
            wide = 3 if i < count // 2 or k != 0 else 4  # Ls at 1 kHz: limits widen half way
            low, high = nominal - wide * sigma, nominal + wide * sigma
            tolerance = (
                (None, nominal + 5 * sigma)
                if k == 3
                else (nominal - 5 * sigma,) * 1 + (nominal + 5 * sigma,)
            )
            if k == 4:
                low, tolerance = None, (None, None)  # Rdc: an upper acceptance limit only
            verdict = "pass" if (low is None or low <= value) and value <= high else "fail"
            records.append(
                MeasurementRecord(name, value, unit, f, low, high, verdict,
                                  tolerance_low=tolerance[0], tolerance_high=tolerance[1])
            )  # fmt: skip
        good = all(m.verdict == "pass" for m in records)
        units.append(
            UnitRecord(
                serial=serial, lot="R", outcome="pass" if good else "fail",
                bin="A" if good else "reject", attempt=1 + (i >= count - count // 8),
                started_at=finished - timedelta(seconds=1),
                finished_at=None if i % 37 == 5 else finished,
                measurements=tuple(records), attempt_id=str(uuid.UUID(int=seed * 10**6 + i)),
            )
        )  # fmt: skip
    return units


def expected(units: list[UnitRecord]) -> dict:
    """The numbers computed from the units as written, independently of the store."""
    stored = list(enumerate(units))
    order = sorted(stored, key=lambda p: (p[1].finished_at or p[1].started_at, p[0]))
    out: dict[str, dict] = {}
    for _, unit in order:
        for m in unit.measurements:
            q = out.setdefault(quantity_key(m.parameter, m.frequency), {"all": [], "rows": []})
            q["all"].append(m.value)
            q["rows"].append(m)
    numbers = {}
    for key, q in out.items():
        valid = [v for v in q["all"] if math.isfinite(v)]
        ranges = np.abs(np.diff(valid))

        def median(name, rows=q["rows"]):
            stated = [getattr(m, name) for m in rows if getattr(m, name) is not None]
            return statistics.median(stated) if stated else None

        numbers[key] = {
            "count": len(q["all"]), "valid": len(valid),
            "passed": sum(m.verdict == "pass" for m in q["rows"]),
            "mean": statistics.fmean(valid), "std": statistics.stdev(valid),
            "minimum": min(valid), "maximum": max(valid),
            "sigma_within": float(ranges.mean()) / D2,
            "acceptance_low": median("low"), "acceptance_high": median("high"),
            "tolerance_low": median("tolerance_low"), "tolerance_high": median("tolerance_high"),
        }  # fmt: skip
    latest: dict[str, UnitRecord] = {}
    first: dict[str, UnitRecord] = {}
    for unit in units:
        latest[unit.serial] = (
            unit if unit.attempt >= latest.get(unit.serial, unit).attempt else latest[unit.serial]
        )
        first.setdefault(unit.serial, unit)
    bins: dict[str, int] = {}
    failing: dict[str, int] = {}
    for unit in latest.values():
        bins[unit.bin] = bins.get(unit.bin, 0) + 1
        for key in {quantity_key(m.parameter, m.frequency) for m in unit.measurements
                    if m.verdict == "fail"}:  # fmt: skip
            failing[key] = failing.get(key, 0) + 1
    return {
        "quantities": numbers,
        "units": len(latest),
        "attempts": len(units),
        "passed": sum(u.outcome == "pass" for u in latest.values()),
        "first_pass": sum(u.outcome == "pass" for u in first.values()),
        "bins": bins,
        "failing": failing,
    }


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
@pytest.mark.parametrize("seed", [1, 2])
def test_lot_statistics_agree_with_an_independent_computation(engine, seed, tmp_path):
    units = random_lot(seed, 240)
    with store_location(engine, tmp_path) as (url, schema), open_store(url, schema=schema) as s:
        for unit in units[:100]:
            assert s.save_unit(unit)  # the station's path
        assert s.save_units(units[100:], batch=50) == 140  # the import path
        s.save_unit(UnitRecord(serial="other", lot="S", outcome="pass",
                               measurements=(MeasurementRecord("Ls", 1.0, "H", 1e3),)))  # fmt: skip
        stats = lot_statistics(s, LotFilter(lot="R"))
    want = expected(units)
    assert (stats.units, stats.attempts) == (want["units"], want["attempts"])
    assert (stats.passed, stats.first_pass) == (want["passed"], want["first_pass"])
    assert stats.yield_ == want["passed"] / want["units"]
    assert stats.bins == want["bins"]
    assert stats.failing == want["failing"] and want["failing"]  # the latest attempts' failures
    got = {q.key: q for q in stats.quantities}
    assert set(got) == set(want["quantities"])
    for key, numbers in want["quantities"].items():
        for name, value in numbers.items():
            actual = getattr(got[key], name)
            if value is None:
                assert actual is None, (key, name)
            else:
                assert actual == pytest.approx(value, rel=1e-11), (key, name)


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_units_tested_at_the_same_time_keep_the_order_they_were_stored_in(engine, tmp_path):
    """Three units finished at the same instant, stored as 5, 1, 9 (then one finished earlier):
    the moving ranges are |1 - 5|, |9 - 1| after the earlier unit's |5 - 0|, so MR-bar = 17/3."""
    values = [(5.0, T0), (1.0, T0), (9.0, T0), (0.0, T0 - timedelta(seconds=1))]
    with store_location(engine, tmp_path) as (url, schema), open_store(url, schema=schema) as s:
        for i, (value, when) in enumerate(values):
            m = MeasurementRecord("Rs", value, "ohm", 1e3, 0.0, 10.0, "pass")
            s.save_unit(UnitRecord(serial=f"T{i}", lot="T", outcome="pass", finished_at=when,
                                   measurements=(m,)))  # fmt: skip
        (q,) = lot_statistics(s, LotFilter(lot="T")).quantities
    # computed: ranges 5, 4, 8 -> mean 17/3; sigma = (17/3) / 1.128 (NIST/SEMATECH 6.3.2)
    assert q.sigma_within == pytest.approx((17 / 3) / 1.128)
