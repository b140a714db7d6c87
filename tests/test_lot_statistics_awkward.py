"""``acquire lot``'s statistics (acquire.report.statistics.lot_statistics) on awkward lots,
against a plain computation on the rows as written: numpy (mean, var with ddof=1, min, max,
absolute differences for the moving ranges) and Python's ``statistics.median``, on SQLite and
PostgreSQL.

The lots hold invalid (NaN) and overrange (+inf, -inf) readings, DC values (frequency None),
retests (yields, bins and failing checks count each serial's latest attempt, first-pass yield
its first; NIST/SEMATECH e-Handbook of Statistical Methods has no rule for this, it is this
tool's documented counting), several stations, a quantity with a tiny spread on a large value
(1e-4 H +- 1e-9 H, where a variance from raw sums of squares would lose its digits), a lot with
one unit and a selection with none. Sample standard deviation with n - 1 and the mean moving
range / d2 (d2 = 1.128) are from the e-Handbook, 1.3.5.6 (std) and 6.3.2 (moving ranges).
"""

from __future__ import annotations

import math
import statistics
import uuid
from dataclasses import replace
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from lot_reference import serial_counts
from store_support import store_location

from acquire.report.statistics import LotFilter, lot_statistics, quantity_key
from acquire.store import MeasurementRecord, UnitRecord, open_store

T0 = datetime(2026, 6, 1, 6, 0, tzinfo=UTC)
#: parameter, frequency (None: DC), SI unit, nominal, spread; our own invented coil.
QUANTITIES = [
    ("Ls", 1e4, "H", 1e-4, 1e-9),  # a tiny spread on a large value
    ("Q", 1e4, "", 40.0, 2.0),
    ("Rdc", None, "ohm", 0.35, 0.004),
]


def awkward_lot(seed: int, count: int) -> list[UnitRecord]:
    """``count`` attempts of lot "W" from three stations, in the order they are stored; every
    fifth serial is tested again (its second attempt stored later), with NaN, +inf and -inf
    readings sprinkled in."""
    rng = np.random.default_rng(seed)
    units = []
    serials = [f"W-{i:04d}" for i in range(count)]
    retests = serials[::5]
    for i, serial in enumerate(serials + retests):
        attempt = 1 if i < count else 2
        records = []
        for name, f, unit, nominal, sigma in QUANTITIES:
            value = float(nominal + sigma * rng.standard_normal())
            pick = rng.random()
            if pick < 0.04:
                value = math.nan
            elif pick < 0.07:
                value = math.inf if pick < 0.055 else -math.inf
            low, high = nominal - 2 * sigma, nominal + 2 * sigma
            verdict = "pass" if low <= value <= high else "fail"
            records.append(MeasurementRecord(name, value, unit, f, low, high, verdict,
                                             tolerance_low=nominal - 3 * sigma,
                                             tolerance_high=nominal + 3 * sigma))  # fmt: skip
        good = all(m.verdict == "pass" for m in records)
        finished = T0 + timedelta(seconds=7 * i)
        units.append(
            UnitRecord(
                serial=serial, lot="W", attempt=attempt, station=f"station-{i % 3}",
                outcome="pass" if good else "fail", bin="A" if good else "reject",
                started_at=finished - timedelta(seconds=5),
                finished_at=None if i % 11 == 4 else finished,
                measurements=tuple(records), attempt_id=str(uuid.UUID(int=seed * 10**5 + i)),
            )
        )  # fmt: skip
    return units


def plain(units: list[UnitRecord]) -> dict:
    """The numbers from the units as written (test order: finish time, else start time)."""
    ordered = sorted(units, key=lambda u: u.finished_at or u.started_at)
    per: dict[str, list[MeasurementRecord]] = {}
    for unit in ordered:
        for m in unit.measurements:
            per.setdefault(quantity_key(m.parameter, m.frequency), []).append(m)
    quantities = {}
    for key, rows in per.items():
        x = np.array([m.value for m in rows])
        x = x[np.isfinite(x)]
        quantities[key] = {
            "count": len(rows), "valid": x.size,
            "passed": sum(m.verdict == "pass" for m in rows),
            "mean": x.mean(), "std": math.sqrt(np.var(x, ddof=1)),
            "minimum": x.min(), "maximum": x.max(),
            "sigma_within": np.abs(np.diff(x)).mean() / 1.128,
            "tolerance_low": statistics.median(m.tolerance_low for m in rows),
            "acceptance_high": statistics.median(m.high for m in rows),
        }  # fmt: skip
    counts = serial_counts(units, lambda m: m.verdict == "fail")
    return counts | {"quantities": quantities}


def check(stats, want: dict) -> None:
    assert (stats.units, stats.attempts) == (want["units"], want["attempts"])
    assert (stats.passed, stats.first_pass) == (want["passed"], want["first_pass"])
    assert stats.bins == want["bins"] and stats.failing == want["failing"]
    got = {q.key: q for q in stats.quantities}
    assert set(got) == set(want["quantities"])
    for key, numbers in want["quantities"].items():
        for name, value in numbers.items():
            assert getattr(got[key], name) == pytest.approx(value, rel=1e-12), (key, name)


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_awkward_lot_agrees_with_numpy_on_the_rows(engine, tmp_path):
    units = awkward_lot(3, 60)
    with store_location(engine, tmp_path) as (url, schema), open_store(url, schema=schema) as s:
        assert s.save_units(units, batch=25) == len(units)
        s.save_unit(UnitRecord(serial="W-0001", lot="other", outcome="fail",
                               measurements=(MeasurementRecord("Q", 1.0, "", 1e4),)))  # fmt: skip
        stats = lot_statistics(s, LotFilter(lot="W"))
        one_station = lot_statistics(s, LotFilter(lot="W", station="station-1"))
        nobody = lot_statistics(s, LotFilter(lot="W", station="nobody"))
    want = plain(units)
    assert want["units"] < want["attempts"] and want["failing"]  # retests and failures present
    check(stats, want)
    rdc = {q.key: q for q in stats.quantities}["Rdc"]
    assert rdc.frequency is None and rdc.valid < rdc.count  # a DC value, invalid ones left out
    tiny = {q.key: q for q in stats.quantities}[quantity_key("Ls", 1e4)]
    assert 5e-10 < tiny.std < 2e-9  # the spread survives the large mean
    check(one_station, plain([u for u in units if u.station == "station-1"]))
    assert (nobody.units, nobody.attempts, nobody.quantities) == (0, 0, ())
    assert math.isnan(nobody.yield_) and nobody.bins == {} and nobody.failing == {}


@pytest.mark.parametrize("engine", ["sqlite", "postgresql"])
def test_a_lot_of_one_unit(engine, tmp_path):
    """One reading per quantity: mean, min and max are that reading; the standard deviation
    and the within sigma (no moving range) are undefined, so NaN, and so are the indices."""
    unit = awkward_lot(5, 1)[0]
    unit = replace(unit, measurements=tuple(
        MeasurementRecord(m.parameter, float(k + 1) * 1e-3, m.unit, m.frequency, 0.0, 1.0, "pass",
                          tolerance_low=0.0, tolerance_high=1.0)
        for k, m in enumerate(unit.measurements)))  # fmt: skip
    with store_location(engine, tmp_path) as (url, schema), open_store(url, schema=schema) as s:
        s.save_unit(unit)
        stats = lot_statistics(s, LotFilter(lot="W"))
    assert (stats.units, stats.attempts, stats.passed, stats.first_pass) == (1, 1, 1, 1)
    for q in stats.quantities:
        value = {"Ls": 1e-3, "Q": 2e-3, "Rdc": 3e-3}[q.parameter]
        assert (q.count, q.valid, q.mean, q.minimum, q.maximum) == (1, 1, value, value, value)
        assert all(math.isnan(v) for v in (q.std, q.sigma_within, q.cp, q.cpk, q.pp, q.ppk))
