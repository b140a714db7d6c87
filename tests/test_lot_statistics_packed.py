"""``acquire lot``'s statistics (lot_statistics, read from the units' packed readings) on awkward
lots and every selection, against a plain computation on the units as written: numpy (mean,
var with ddof=1, min, max, absolute differences for the moving ranges) and Python's
``statistics.median``; on SQLite and PostgreSQL. And the same numbers, bit for bit, when some
units have no packed copy and the measurement rows are read instead.

The lot: two stations whose test times interleave (all of one station's units stored first),
ties broken by the order stored, units with only a start time and with no time at all (their
save time counts), two plans measuring different sets of quantities in other orders (one
measures Q twice), units with no measurement, NaN and +-inf readings, a DC value, a 1e-4 H
inductance spread by 1e-9 H, retests, every verdict spelling. Sample standard deviation (n - 1)
and the mean moving range / d2 (d2 = 1.128) are from the NIST/SEMATECH e-Handbook of
Statistical Methods, 1.3.5.6 and 6.3.2; the counting of yields, bins and failing checks (each
serial's latest attempt, first-pass yield its first) is this tool's documented rule. Values are
our own invented examples.
"""

from __future__ import annotations

import math
import statistics
import uuid
from datetime import UTC, datetime, timedelta
from unittest import mock

import numpy as np
import pytest
from lot_reference import serial_counts
from store_support import store_location
from test_store_migration import _change

from acquire.report.statistics import LotFilter, lot_statistics, quantity_key
from acquire.store import MeasurementRecord, UnitRecord, open_store, packed_statistics

T0 = datetime(2020, 4, 6, 6, 0, tzinfo=UTC)  # before any save time
#: (parameter, frequency or None, SI unit, nominal, spread, tolerance) per plan, in its order.
PLAN_A = [
    ("Ls", 1e4, "H", 1e-4, 1e-9, 3e-9),
    ("Q", 1e4, "", 40.0, 2.0, 5.0),
    ("Rdc", None, "ohm", 0.35, 0.004, 0.01),
]
PLAN_B = [
    ("Rdc", None, "ohm", 0.35, 0.004, 0.012),
    ("Ls", 1e4, "H", 1e-4, 1e-9, 4e-9),
    ("Rs", 1e5, "ohm", 2.5, 0.1, 0.3),
    ("Q", 1e4, "", 40.0, 2.0, 6.0),
    ("Q", 1e4, "", 40.0, 2.0, 6.0),
]
VERDICTS = ["pass", "pass", "pass", "fail", "conditional pass", "conditional fail", "", "odd"]
NOT_FAILING = ("pass", "conditional pass", "")


def awkward_lot(seed: int, count: int, plan_ids: dict[str, int]) -> list[UnitRecord]:
    """``count`` first attempts (then a retest of every seventh serial) of lot "K", in the order
    they are stored, and three units of lot "other"."""
    rng = np.random.default_rng(seed)
    units = []
    firsts = [i for i in range(count) if i % 2 == 0] + [i for i in range(count) if i % 2]
    for n, i in enumerate(firsts + list(range(0, count, 7))):
        plan = "B" if i % 3 == 1 else "A"
        records = []
        for name, f, unit, nominal, sigma, tol in PLAN_B if plan == "B" else PLAN_A:
            value = float(nominal + sigma * rng.standard_normal())
            pick = rng.random()
            if pick < 0.05:
                value = [math.nan, math.inf, -math.inf][int(pick * 60) % 3]
            low = None if name == "Rdc" else nominal - 2 * sigma
            verdict = VERDICTS[int(rng.integers(len(VERDICTS)))]
            tolerance = (None if name == "Q" else nominal - tol, nominal + tol)
            records.append(MeasurementRecord(name, value, unit, f, low, nominal + 2 * sigma,
                                             verdict, tolerance_low=tolerance[0],
                                             tolerance_high=tolerance[1]))  # fmt: skip
        finished = T0 + timedelta(seconds=2 * (i // 2) + i % 2 + (i % 5 == 0))  # ties too
        retest = n >= count
        good = all(m.verdict in NOT_FAILING for m in records)
        units.append(
            UnitRecord(
                serial=f"K-{i:04d}", lot="K", attempt=2 if retest else 1,
                station="east" if i % 2 == 0 else "west", plan_id=plan_ids[plan],
                outcome="pass" if good else "fail", bin="A" if good else "reject",
                started_at=None if i == 9 else finished - timedelta(seconds=1),
                finished_at=None if i % 13 == 4 or i == 9 else
                finished + timedelta(hours=2 * retest),
                measurements=() if i == 17 else tuple(records),
                attempt_id=str(uuid.UUID(int=seed * 10**6 + n)),
            )
        )  # fmt: skip
    for k in range(3):
        q = MeasurementRecord("Q", 1.0 + k, "", 1e4, 0.5, 2.0, "fail")
        key = str(uuid.UUID(int=seed * 10**6 + 90_000 + k))
        units.append(UnitRecord(serial=f"O-{k}", lot="other", outcome="fail", bin="reject",
                                station="east", finished_at=T0 + timedelta(seconds=k),
                                measurements=(q,), attempt_id=key))  # fmt: skip
    return units


def chosen_units(units: list[UnitRecord], chosen: LotFilter, plan_ids: dict[str, int]) -> list:
    """(stored position, unit) of the units ``chosen`` picks, by the filter's documented rule."""
    out = []
    for k, u in enumerate(units):
        finished = u.finished_at or u.started_at
        if chosen.lot is not None and u.lot != chosen.lot:
            continue
        if chosen.since is not None and (finished is None or finished < chosen.since):
            continue
        if chosen.until is not None and (finished is None or finished >= chosen.until):
            continue
        if chosen.station is not None and u.station != chosen.station:
            continue
        if chosen.plan_hash is not None and u.plan_id != plan_ids[chosen.plan_hash[-1]]:
            continue
        out.append((k, u))
    return out


def plain(picked: list) -> dict:
    """The numbers from the units as written. Test order: finish time, else start time, else
    (none here has one before T0) after every timed unit; ties in the order stored."""
    far = datetime(9999, 1, 1, tzinfo=UTC)
    ordered = sorted(picked, key=lambda p: (p[1].finished_at or p[1].started_at or far, p[0]))
    rows: dict[tuple, list[MeasurementRecord]] = {}
    for _, unit in ordered:
        for m in unit.measurements:
            rows.setdefault((m.parameter, m.frequency or 0.0, m.unit), []).append(m)
    quantities = []
    for (p, f, unit), ms in sorted(rows.items()):
        x = np.array([m.value for m in ms])
        x = x[np.isfinite(x)]

        def median(name, ms=ms):
            stated = [getattr(m, name) for m in ms if getattr(m, name) is not None]
            return statistics.median(stated) if stated else None

        quantities.append({
            "key": quantity_key(p, f or None), "unit": unit, "count": len(ms), "valid": x.size,
            "passed": sum(m.verdict == "pass" for m in ms),
            "mean": x.mean() if x.size else math.nan,
            "std": math.sqrt(np.var(x, ddof=1)) if x.size > 1 else math.nan,
            "minimum": x.min() if x.size else math.nan, "maximum": x.max() if x.size else math.nan,
            "sigma_within": np.abs(np.diff(x)).mean() / 1.128 if x.size > 1 else math.nan,
            "acceptance_low": median("low"), "acceptance_high": median("high"),
            "tolerance_low": median("tolerance_low"), "tolerance_high": median("tolerance_high"),
        })  # fmt: skip
    counts = serial_counts([unit for _, unit in picked], lambda m: m.verdict not in NOT_FAILING)
    return counts | {"quantities": quantities}


def same(got, want) -> bool:
    if want is None or got is None or isinstance(want, str | int):
        return got == want if want is not None else got is None
    if math.isnan(want):
        return math.isnan(got)
    return got == pytest.approx(want, rel=1e-12, abs=0.0)


def check(stats, want: dict) -> None:
    assert (stats.units, stats.attempts) == (want["units"], want["attempts"])
    assert (stats.passed, stats.first_pass) == (want["passed"], want["first_pass"])
    assert stats.bins == want["bins"] and stats.failing == want["failing"]
    assert [q.key for q in stats.quantities] == [q["key"] for q in want["quantities"]]
    for q, numbers in zip(stats.quantities, want["quantities"], strict=True):
        for name, value in numbers.items():
            if name != "key":
                assert same(getattr(q, name), value), (q.key, name, getattr(q, name), value)


SELECTIONS = [
    LotFilter(lot="K"),
    LotFilter(lot="K", station="west"),
    LotFilter(station="east"),
    LotFilter(lot="K", since=T0 + timedelta(seconds=20), until=T0 + timedelta(seconds=61)),
    LotFilter(since=T0 + timedelta(hours=1)),
    LotFilter(plan_hash="plan-B"),
    LotFilter(lot="K", plan_hash="plan-A", station="east"),
    LotFilter(lot="K", station="nobody"),
    LotFilter(),
]


@pytest.fixture(params=["sqlite", "postgresql"])
def filled(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as store,
    ):
        plans = {n: store.record_plan(f"plan {n} text", f"plan-{n}") for n in "AB"}
        units = awkward_lot(11, 90, plans)
        for unit in units[:30]:
            assert store.save_unit(unit)
        assert store.save_units(units[30:], batch=40) == len(units) - 30
        yield store, units, plans, url, schema


def test_every_selection_agrees_with_numpy_on_the_units_as_written(filled):
    store, units, plans, _, _ = filled
    rows_path = mock.patch.object(packed_statistics, "quantity_rows", side_effect=AssertionError)
    with rows_path:
        results = [lot_statistics(store, chosen) for chosen in SELECTIONS]
    for chosen, stats in zip(SELECTIONS, results, strict=True):
        want = plain(chosen_units(units, chosen, plans))
        check(stats, want)
    whole = {q.key: q for q in results[0].quantities}
    assert whole["Rdc"].frequency is None and whole["Rdc"].valid < whole["Rdc"].count
    assert 5e-10 < whole[quantity_key("Ls", 1e4)].std < 2e-9  # the spread survives the mean
    assert results[0].units < results[0].attempts and results[0].failing
    assert (results[7].attempts, results[7].quantities) == (0, ())


def test_a_lot_of_one_unit(filled):
    store, units, _, _, _ = filled
    solo = UnitRecord(serial="solo", lot="solo", outcome="pass",
                      measurements=units[1].measurements,
                      attempt_id=str(uuid.UUID(int=1)))  # fmt: skip
    assert store.save_unit(solo)
    stats = lot_statistics(store, LotFilter(lot="solo"))
    check(stats, plain([(0, solo)]))
    assert all(q.count >= 1 and math.isnan(q.sigma_within) for q in stats.quantities)


def test_units_without_a_packed_copy_give_the_same_numbers_from_their_rows(filled):
    store, units, plans, url, schema = filled
    packed = [lot_statistics(store, chosen).to_json() for chosen in SELECTIONS]
    _change(url, schema, "UPDATE units SET readings_layout = NULL, readings = NULL WHERE id = 40")
    with mock.patch.object(
        packed_statistics, "quantity_rows", wraps=packed_statistics.quantity_rows
    ) as rows_path:
        fallen = [lot_statistics(store, chosen).to_json() for chosen in SELECTIONS]
    assert rows_path.call_count >= 2  # the selections holding unit 40 read the rows
    assert fallen == packed
    check(lot_statistics(store, SELECTIONS[0]), plain(chosen_units(units, SELECTIONS[0], plans)))
