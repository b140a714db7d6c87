"""The station loop through the simulated meter: what it records, how it bins, when it refuses.

Acceptance limits are checked against ILAC-G8:09/2019 section 4.2.2 (guarded acceptance:
acceptance limit = tolerance limit moved inwards by w = r·U); everything else is behaviour the
test plan states (serial pattern, retests, error outcome, stale references, the outbox).
"""

from __future__ import annotations

import dataclasses
import os
import subprocess
import sys
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from bench_support import PutsEachStandardIn

from acquire.capture import capture_references
from acquire.errors import StoreError
from acquire.plan import log_plan
from acquire.production.outbox import Outbox, RecordKeeper
from acquire.production.plan import (
    Check,
    Limit,
    RetestPolicy,
    SerialPolicy,
)
from acquire.production.plan_file import example_plan_path, load_plan
from acquire.production.station import Station, StationContext
from acquire.store import open_store, plan_hash
from drivers.meter import ImpedanceMeter

ROOT = Path(__file__).resolve().parents[1]


class Screen:
    """A stand-in screen: feeds ``lines`` to the station and keeps what it was shown."""

    def __init__(self, lines: list[str] | None = None) -> None:
        self.lines = list(lines or [])
        self.shown: list[Any] = []
        self.rings = 0

    def show(self, status: Any) -> None:
        self.shown.append(status)

    def ring(self) -> None:
        self.rings += 1

    def ask(self, prompt: str) -> str | None:
        if not self.lines:
            return None
        line = self.lines.pop(0)
        if line == "^C":
            raise KeyboardInterrupt
        return line


@pytest.fixture(scope="module")
def bench(module_simulator, tmp_path_factory) -> dict[str, Any]:
    """A simulated meter with the demo coil on bench leads, references captured and stored."""
    sim = module_simulator(dut="demo-coil", fixture="bench-leads", noise=True, seed=3)
    folder = tmp_path_factory.mktemp("station")
    url = f"sqlite:///{folder / 'store.db'}"
    plan = load_plan(example_plan_path())
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "1MHz", 41), PutsEachStandardIn(sim),
            load_true=sim.load_true, fixture=plan.fixture, meter_name=str(identity), repeats=2,
        )  # fmt: skip
    sim.insert("demo-coil")
    with open_store(url) as store:
        ref_id = store.save_reference_set(refs, name="station test")
    return {"sim": sim, "url": url, "refs": refs, "ref_id": ref_id, "plan": plan,
            "identity": identity, "folder": folder}  # fmt: skip


def make_station(bench, store, meter, plan=None, refs=None, keeper=None, screen=None, **context):
    plan = plan or bench["plan"]
    refs = bench["refs"] if refs is None else refs
    ctx = StationContext(
        plan=plan, lot=context.pop("lot", "LOT-A"), operator="ana", station="st-1",
        meter_name=str(bench["identity"]), plan_id=store.record_plan(plan.text, plan.title),
        temperature=plan.temperature.value, **context,
    )  # fmt: skip
    store.record_lot(ctx.lot)
    if keeper is None:
        outbox = Outbox(bench["folder"] / f"outbox-{os.urandom(4).hex()}.db")
        keeper = RecordKeeper(store, outbox)
    return Station(
        meter, ctx, keeper, screen or Screen(), (bench["ref_id"], refs),
        lambda: (bench["ref_id"], refs),
        history=lambda s: [u.outcome for u in store.unit_attempts(s)],
    )  # fmt: skip


@pytest.fixture
def rig(bench):
    with (
        open_store(bench["url"]) as store,
        ImpedanceMeter.open(bench["sim"].resource, dialect="simulated") as meter,
    ):
        yield store, meter


def unique_lot() -> str:
    return f"LOT-{os.urandom(3).hex()}"


def test_acceptance_limits_recorded_are_the_tolerance_moved_in_by_u(bench, rig):
    """ILAC-G8:09/2019 4.2.2: with guard band w = 1·U the acceptance limits are TL + U, TU − U."""
    store, meter = rig
    plan = bench["plan"]
    assert plan.decision.guarded and plan.decision.factor == 1.0
    station = make_station(bench, store, meter, lot=unique_lot())
    shown = station.test("EXAMPLE-0101")
    assert shown is not None and shown.recorded
    unit = store.unit_attempts("EXAMPLE-0101")[-1]
    assert len(unit.measurements) == len(plan.checks)
    for m in unit.measurements:
        assert np.isfinite(m.uncertainty) and m.uncertainty > 0
        if m.tolerance_low is not None:
            assert m.low == pytest.approx(m.tolerance_low + m.uncertainty, rel=1e-12)
        if m.tolerance_high is not None:
            assert m.high == pytest.approx(m.tolerance_high - m.uncertainty, rel=1e-12)
        inside = (m.low is None or m.value >= m.low) and (m.high is None or m.value <= m.high)
        assert m.verdict == ("pass" if inside else "fail")
    passed = all(m.verdict == "pass" for m in unit.measurements)
    assert unit.outcome == ("pass" if passed else "fail")


def test_bins_first_satisfied_wins_and_rejects_name_their_checks(bench, rig):
    """Over a lot of spread units every passing unit is in the first bin whose limits (guarded
    as the plan says) its values meet, and every fail is in the reject bin with its failures."""
    store, meter = rig
    plan = bench["plan"]
    assert plan.bins, "the example plan has bins"
    lot = unique_lot()
    station = make_station(bench, store, meter, lot=lot)
    outcomes = []
    for i in range(25):
        shown = station.test(f"EXAMPLE-{2000 + i}")
        outcomes.append(shown.outcome)
        if shown.outcome == "fail":
            assert shown.bin == "reject" and shown.failing
    assert len(set(outcomes)) >= 1
    for unit in [store.load_unit(a) for a in store.lot_units(lot).attempt_id]:
        if unit.outcome != "pass":
            continue
        by_key = {(m.parameter, m.frequency): m for m in unit.measurements}
        expected = plan.otherwise_bin
        for rule in plan.bins:
            ok = True
            for c in rule.checks:
                m = by_key[(c.quantity, c.frequency)]
                low = None if c.limit.low is None else c.limit.low + m.uncertainty
                high = None if c.limit.high is None else c.limit.high - m.uncertainty
                ok &= (low is None or m.value >= low) and (high is None or m.value <= high)
            if ok:
                expected = rule.name
                break
        assert unit.bin == expected, unit.serial


def test_a_serial_that_passed_is_refused_again_and_a_malformed_one_never_measured(bench, rig):
    store, meter = rig
    lot = unique_lot()
    screen = Screen()
    station = make_station(bench, store, meter, lot=lot, screen=screen)
    first = station.test("EXAMPLE-3001")
    assert first is not None
    if first.outcome == "pass":
        assert station.test("EXAMPLE-3001") is None
        assert "already passed" in station.message
    assert station.test("not-a-serial") is None
    assert "serial pattern" in station.message
    assert station.test("EXAMPLE-30\x0701") is None
    assert len(store.lot_units(lot)) == 1
    assert screen.rings >= 2


def test_retests_after_fail_count_attempts_until_the_plan_allows_no_more(bench, rig):
    store, meter = rig
    plan = bench["plan"]
    impossible = Check("Ls", plan.checks[0].frequency, Limit(1.0, 2.0, text="1 H to 2 H"), "H")
    failing = dataclasses.replace(
        plan, checks=(impossible,), bins=(), retest=RetestPolicy(attempts=2, on_fail=True),
    )  # fmt: skip
    lot = unique_lot()
    station = make_station(bench, store, meter, plan=failing, lot=lot)
    a = station.test("EXAMPLE-4001")
    b = station.test("EXAMPLE-4001")
    assert (a.outcome, a.attempt, b.outcome, b.attempt) == ("fail", 1, "fail", 2)
    assert station.test("EXAMPLE-4001") is None
    assert "2 attempts" in station.message
    attempts = store.unit_attempts("EXAMPLE-4001")
    assert [u.attempt for u in attempts] == [1, 2]
    y = store.lot_yield(lot)
    assert (y.serials, y.attempts, y.first_pass, y.final_pass) == (1, 2, 0, 0)
    no_retest = dataclasses.replace(failing, retest=RetestPolicy(attempts=5, on_fail=False))
    other = make_station(bench, store, meter, plan=no_retest, lot=lot)
    assert other.test("EXAMPLE-4001") is None
    assert "no retest after a fail" in other.message


def test_seen_before_retest_makes_a_new_attempt_of_a_passed_unit(bench, rig):
    store, meter = rig
    plan = bench["plan"]
    easy = dataclasses.replace(
        plan, checks=(Check("Ls", plan.checks[0].frequency, Limit(0.0, 1.0), "H"),), bins=(),
        serial=SerialPolicy(plan.serial.pattern, "retest"),
    )  # fmt: skip
    station = make_station(bench, store, meter, plan=easy, lot=unique_lot())
    assert station.test("EXAMPLE-5001").outcome == "pass"
    again = station.test("EXAMPLE-5001")
    assert again is not None and again.attempt == 2


def test_a_meter_fault_is_an_error_outcome_recorded_and_the_serial_can_be_retried(bench, rig):
    store, meter = rig
    sim = bench["sim"]
    lot = unique_lot()
    station = make_station(bench, store, meter, lot=lot)
    sim.inject("error", -350)
    try:
        shown = station.test("EXAMPLE-6001")
    finally:
        sim.clear_faults()
    assert shown.outcome == "error" and shown.bin == "" and shown.recorded
    assert "meter fault" in shown.failing[0]
    stored = store.unit_attempts("EXAMPLE-6001")
    assert [u.outcome for u in stored] == ["error"]
    assert "meter fault" in stored[0].notes and stored[0].measurements == ()
    retry = station.test("EXAMPLE-6001")
    assert retry.attempt == 2 and retry.outcome in ("pass", "fail")


def test_stale_references_stop_the_station_until_an_override_is_given(bench, rig):
    store, meter = rig
    old = dataclasses.replace(bench["refs"], captured_at=datetime.now(UTC) - timedelta(hours=9))
    lot = unique_lot()
    station = make_station(bench, store, meter, refs=old, lot=lot)
    assert "old" in station.blocked
    assert station.test("EXAMPLE-7001") is None
    assert "not measured" in station.message
    assert store.unit_attempts("EXAMPLE-7001") == []
    other = dataclasses.replace(bench["refs"], fixture="other-jig")
    assert "other-jig" in make_station(bench, store, meter, refs=other, lot=lot).blocked
    reason = "line down, fixture unchanged"
    go_on = make_station(bench, store, meter, refs=old, lot=lot, override=reason)
    assert go_on.blocked == ""
    go_on.test("EXAMPLE-7002")
    assert store.unit_attempts("EXAMPLE-7002")[0].reference_override == reason


class FlakyStore:
    """A store that refuses writes while ``down`` (as a lost database connection does)."""

    def __init__(self, store) -> None:
        self.store = store
        self.down = True

    def save_unit(self, unit) -> bool:
        if self.down:
            raise StoreError("saving a unit failed in store test: connection refused (check it)")
        return self.store.save_unit(unit)

    def __getattr__(self, name):
        return getattr(self.store, name)


def test_units_wait_in_the_outbox_while_the_store_is_away_and_are_written_once(
    bench, rig, tmp_path
):
    store, meter = rig
    flaky = FlakyStore(store)
    lot = unique_lot()
    with Outbox(tmp_path / "outbox.db") as outbox:
        keeper = RecordKeeper(flaky, outbox)
        screen = Screen()
        station = make_station(bench, store, meter, keeper=keeper, screen=screen, lot=lot)
        shown = [station.test(f"EXAMPLE-{8000 + i}") for i in range(4)]
        assert not any(s.recorded for s in shown)
        assert screen.shown[-1].waiting == 4 and len(store.lot_units(lot)) == 0
        flaky.down = False
        assert keeper.flush() == 4 and keeper.flush() == 0
    units = store.lot_units(lot)
    assert sorted(units.serial) == [f"EXAMPLE-{8000 + i}" for i in range(4)]
    assert units.attempt_id.is_unique


def test_ctrl_c_ends_the_session_with_its_counts(bench, rig):
    store, meter = rig
    screen = Screen(["EXAMPLE-9001", "EXAMPLE-9002", "^C", "EXAMPLE-9003"])
    station = make_station(bench, store, meter, screen=screen, lot=unique_lot())
    final = station.run(interactive=True)
    assert final.tested == 2 and "Ctrl-C" in final.message
    assert screen.lines == ["EXAMPLE-9003"]


def test_the_command_records_exactly_the_units_scanned_on_standard_input(bench, tmp_path):
    """`acquire station` with serials piped in: one record per measured serial, refused lines
    recorded nowhere, and each record carries who, what, with which rules and references."""
    sim = bench["sim"]
    url = f"sqlite:///{tmp_path / 'line.db'}"
    with open_store(url) as store:
        ref_id = store.save_reference_set(bench["refs"], name="line refs")
    serials = [f"EXAMPLE-{1100 + i}" for i in range(6)]
    lines = serials + ["EXAMPLE-1100", "garbage", "", "EXAMPLE-1106"]
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(
        [sys.executable, "-m", "acquire", "station", "--resource", sim.resource,
         "--store", url, "--plan", str(example_plan_path()), "--lot", "L-77",
         "--operator", "ana", "--station", "bench-2", "--no-bell"],
        input="\n".join(lines) + "\n", capture_output=True, text=True, timeout=120, env=env,
        cwd=tmp_path,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    plan_text = example_plan_path().read_text(encoding="utf-8")
    with open_store(url) as store:
        units = store.lot_units("L-77")
        measured = serials + ["EXAMPLE-1106"]
        retested = [s for s in lines[6:7] if s in serials]
        assert len(units) == len(measured) + sum(
            1 for s in retested if store.unit_attempts(s)[0].outcome != "pass"
        )
        assert set(units.serial) == set(measured)
        for attempt_id in units.attempt_id:
            unit = store.load_unit(attempt_id)
            assert (unit.operator, unit.station, unit.lot) == ("ana", "bench-2", "L-77")
            assert unit.reference_set_id == ref_id
            assert store.plan(unit.plan_id).hash == plan_hash(plan_text)
            meter = store.meter(unit.meter_id)
            ident = bench["identity"]
            assert (meter.manufacturer, meter.model, meter.serial, meter.firmware) == (
                ident.manufacturer, ident.model, ident.serial, ident.firmware,
            )  # fmt: skip
            assert unit.outcome in ("pass", "fail") and unit.attempt >= 1
            assert unit.bin and unit.measurements
            for m in unit.measurements:
                assert m.uncertainty is not None and m.uncertainty > 0
                assert m.low is not None or m.high is not None
    assert "EXAMPLE-1100" in proc.stdout and "garbage" in proc.stdout
    assert "yield" in proc.stdout.lower()


class FaultyChanger:
    """The meter, but putting the next unit in fails as a dropped connection would."""

    def __init__(self, meter) -> None:
        self._meter = meter

    def next_unit(self) -> None:
        from drivers.errors import InstrumentError

        raise InstrumentError("the connection to the meter was lost; check the cable")

    def __getattr__(self, name):
        return getattr(self._meter, name)


def test_a_fault_while_changing_units_is_an_error_outcome_too(bench, rig):
    store, meter = rig
    station = make_station(bench, store, FaultyChanger(meter), lot=unique_lot())
    shown = station.test("EXAMPLE-6101")
    assert shown.outcome == "error" and "connection to the meter was lost" in shown.failing[0]
    assert store.unit_attempts("EXAMPLE-6101")[0].outcome == "error"


def test_references_that_do_not_cover_the_plan_stop_the_station(bench, rig):
    store, meter = rig
    plan = bench["plan"]
    beyond = Check("Ls", 5e6, Limit(None, 1.0), "H")  # the references stop at 1 MHz
    wide = dataclasses.replace(plan, checks=plan.checks + (beyond,))
    station = make_station(bench, store, meter, plan=wide, lot=unique_lot())
    assert "covers" in station.blocked and "1.000 MHz" in station.blocked
    assert station.test("EXAMPLE-6201") is None


def test_a_plan_of_dc_resistance_alone_measures_no_sweep(bench, rig):
    """Rdc at 20 °C of the demo coil: 14.62 m of 0.2546 mm annealed copper, ρ = 1.7241e-8 Ω·m
    (IEC 60028), R = ρ·l/A = 4.95 Ω (the profile's comment), within the unit's spread."""
    store, meter = rig
    plan = bench["plan"]
    rdc = next(c for c in plan.checks if c.quantity == "Rdc")
    dc_only = dataclasses.replace(plan, checks=(rdc,), bins=())
    station = make_station(bench, store, meter, plan=dc_only, lot=unique_lot())
    station.test("EXAMPLE-6301")
    (m,) = store.unit_attempts("EXAMPLE-6301")[0].measurements
    area = np.pi * (0.2546e-3 / 2) ** 2
    assert m.parameter == "Rdc" and m.frequency is None
    assert m.value == pytest.approx(1.7241e-8 * 14.62 / area, rel=0.08)  # 4 sigma of 2 % spread


def test_undecodable_piped_lines_are_refused_serials_not_a_crash(bench, tmp_path):
    sim = bench["sim"]
    url = f"sqlite:///{tmp_path / 'bytes.db'}"
    with open_store(url) as store:
        store.save_reference_set(bench["refs"], name="refs")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(
        [sys.executable, "-m", "acquire", "station", "--resource", sim.resource, "--store", url,
         "--plan", str(example_plan_path()), "--lot", "L-B", "--operator", "ana",
         "--station", "s", "--no-bell"],
        input=b"EXAMPLE-\xff\xfe01\nEXAMPLE-6401\n", capture_output=True, timeout=120, env=env,
        cwd=tmp_path,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr.decode(errors="replace")
    assert b"not tested" in proc.stdout and b"EXAMPLE-6401  attempt 1" in proc.stdout
    with open_store(url) as store:
        assert list(store.lot_units("L-B").serial) == ["EXAMPLE-6401"]


def test_guard_bands_without_a_stated_accuracy_are_refused_before_any_unit(bench, tmp_path):
    """A guarded plan needs U; a dialect that states no accuracy gives none."""
    import drivers

    source = Path(drivers.__file__).parent / "dialects" / "simulated.toml"
    text = source.read_text(encoding="utf-8")
    dialect = tmp_path / "no-accuracy.toml"
    dialect.write_text(text[: text.index("[accuracy]")], encoding="utf-8")
    url = f"sqlite:///{tmp_path / 'acc.db'}"
    with open_store(url) as store:
        store.save_reference_set(bench["refs"], name="refs")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.run(
        [sys.executable, "-m", "acquire", "station", "--resource", bench["sim"].resource,
         "--dialect", str(dialect), "--store", url, "--plan", str(example_plan_path()),
         "--lot", "L-A", "--operator", "ana", "--station", "s"],
        input="EXAMPLE-6501\n", capture_output=True, text=True, timeout=120, env=env,
        cwd=tmp_path,
    )  # fmt: skip
    assert proc.returncode == 2
    assert "states no accuracy" in proc.stderr and len(proc.stderr.strip().splitlines()) == 1
    with open_store(url) as store:
        assert store.unit_attempts("EXAMPLE-6501") == []


def test_units_waiting_when_a_session_ends_are_written_once_the_store_is_back(bench, rig, tmp_path):
    """The end of a session keeps trying (with pauses) while the store is away, for a while."""
    store, meter = rig
    flaky = FlakyStore(store)
    lot = unique_lot()
    pauses: list[float] = []

    def pause(seconds: float) -> None:
        pauses.append(seconds)
        if len(pauses) == 3:
            flaky.down = False  # the store comes back during the third pause

    with Outbox(tmp_path / "outbox.db") as outbox:
        keeper = RecordKeeper(flaky, outbox)
        station = make_station(bench, store, meter, keeper=keeper, lot=lot)
        for i in range(3):
            station.test(f"EXAMPLE-{8100 + i}")
        assert keeper.waiting == 3
        assert keeper.flush_patiently(60.0, sleep=pause) == 3
        assert keeper.waiting == 0 and pauses == [0.2, 0.4, 0.8]
        flaky.down = True
        station.test("EXAMPLE-8103")
        assert keeper.flush_patiently(0.0, sleep=pause) == 0 and keeper.waiting == 1
    assert sorted(store.lot_units(lot).serial) == [f"EXAMPLE-{8100 + i}" for i in range(3)]
