"""Guided reference capture on the simulated fixture: accepted, refused, retried, stopped."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from acquire.capture import ConsoleOperator, capture_references, dut_warnings, reference_warnings
from acquire.compensation import ReferenceSet
from acquire.errors import CompensationError
from acquire.plan import log_plan
from drivers.meter import ImpedanceMeter
from drivers.simulator import running

PLAN = log_plan("1kHz", "1MHz", 16)


class ScriptedHand:
    """Puts in the fixture what ``script`` says for each request (by default what was asked)."""

    def __init__(self, sim, script=None, retry=True):
        self.sim = sim
        self.script = dict(script or {})
        self.retry_answer = retry
        self.refused: list[tuple[str, list[str]]] = []
        self.told: list[str] = []

    def tell(self, text):
        self.told.append(text)

    def ready(self, standard, instruction):
        self._insert(standard)
        return True

    def retry(self, standard, problems):
        self.refused.append((standard, problems))
        if self.retry_answer:
            self._insert(standard)
        return self.retry_answer

    def _insert(self, standard):
        queue = self.script.get(standard)
        self.sim.insert(queue.pop(0) if queue else standard)


@pytest.fixture
def bench():
    with (
        running(dut="open", fixture="bench-leads", seed=11, measure_time=0) as sim,
        ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
    ):
        yield sim, meter


def test_open_short_load_capture_is_accepted_with_its_metadata(bench):
    sim, meter = bench
    hand = ScriptedHand(sim)
    before = datetime.now(UTC)
    refs = capture_references(
        meter,
        PLAN,
        hand,
        load_true=sim.load_true,
        fixture="bench-leads",
        meter_name="sim meter",
        temperature=23.0,
    )
    assert refs.method == "open-short-load"
    assert np.array_equal(refs.frequency, PLAN.frequencies)
    assert refs.fixture == "bench-leads" and refs.meter == "sim meter" and refs.temperature == 23.0
    assert before <= refs.captured_at <= datetime.now(UTC)
    assert not [f for f in refs.check() if f.severity == "error"]
    assert np.allclose(refs.load_true, sim.load_true(PLAN.frequencies))
    # The short reading is the fixture's series residual; the simulator knows it exactly.
    sim.insert("short")
    exact_short = sim.seen_impedance(PLAN.frequencies)
    assert np.allclose(refs.short, exact_short, rtol=0.05, atol=2e-3)
    assert hand.refused == []
    assert any("short accepted" in line for line in hand.told)


def test_a_short_that_reads_like_an_open_is_refused_then_retried(bench):
    sim, meter = bench
    hand = ScriptedHand(sim, script={"short": ["open", "short"]})  # the bar was forgotten once
    refs = capture_references(meter, PLAN, hand, standards=("open", "short"))
    assert refs.method == "open-short"
    assert len(hand.refused) == 1
    standard, problems = hand.refused[0]
    assert standard == "short"
    assert any("looks like an open fixture" in p for p in problems)
    assert np.all(np.abs(refs.short) < 10)  # the accepted short is the real one


def test_a_bad_short_is_refused_for_good_after_the_attempts(bench):
    sim, meter = bench
    hand = ScriptedHand(sim, script={"short": ["open"] * 5})
    with pytest.raises(CompensationError, match="short reference was refused.*nothing was saved"):
        capture_references(meter, PLAN, hand, standards=("open", "short"), attempts=3)
    assert len(hand.refused) == 2  # a retry is offered after the first and second readings


def test_a_wrong_load_standard_is_refused(bench):
    sim, meter = bench
    hand = ScriptedHand(sim, script={"load": ["short"]}, retry=False)
    with pytest.raises(CompensationError, match="load reference was refused"):
        capture_references(meter, PLAN, hand, load_true=sim.load_true)
    assert hand.refused[0][0] == "load"


def test_console_operator_stops_on_q_and_on_end_of_input(bench):
    sim, meter = bench
    said: list[str] = []
    answers = iter(["", "q"])

    def ask(prompt):
        sim.insert("open")
        return next(answers)

    with pytest.raises(CompensationError, match="stopped before the short"):
        capture_references(
            meter, PLAN, ConsoleOperator(ask, said.append), standards=("open", "short")
        )
    assert any(line.startswith("OPEN:") for line in said)
    assert any(line.startswith("SHORT:") for line in said)

    def eof(prompt):
        raise EOFError

    assert ConsoleOperator(eof, said.append).ready("open", "OPEN") is False
    assert ConsoleOperator(lambda p: "q", said.append).retry("short", ["bad"]) is False
    assert ConsoleOperator(lambda p: "", said.append).retry("short", ["bad"]) is True


def test_capture_refuses_bad_requests_before_measuring(bench):
    sim, meter = bench
    hand = ScriptedHand(sim)
    with pytest.raises(CompensationError, match="true impedance"):
        capture_references(meter, PLAN, hand, standards=("load",))
    with pytest.raises(CompensationError, match="unknown standard 'thru'"):
        capture_references(meter, PLAN, hand, standards=("open", "thru"))
    from acquire.errors import InputError

    with pytest.raises(InputError, match="narrow the plan"):
        capture_references(meter, log_plan("1Hz", "1kHz", 3), hand, standards=("open",))
    assert hand.told == []


def test_reference_warnings_name_age_meter_and_fixture():
    f = np.array([1e3, 1e4])
    refs = ReferenceSet(
        frequency=f,
        open=np.array([-1e6j, -1e5j]),
        short=np.array([0.02 + 0.002j, 0.02 + 0.02j]),
        captured_at=datetime(2031, 1, 1, tzinfo=UTC),
        fixture="clips A",
        meter="meter one",
    )
    now = datetime(2031, 1, 1, tzinfo=UTC) + timedelta(hours=9)
    found = reference_warnings(refs, "meter two", "clips B", max_age=8 * 3600, now=now)
    assert found[0].startswith("the reference set is 9.0 h old (limit 8.0 h)")
    assert "captured on another meter (meter one)" in found[1]
    assert "captured on another fixture (clips A)" in found[2]
    assert reference_warnings(refs, "meter one", "clips A", max_age=None, now=now) == []


def test_dut_warnings_apply_the_ten_times_rule_to_the_part():
    # The 10x rule of thumb (common practice, no published source): a DUT within 10x of the
    # short residual is measured with reduced accuracy.
    f = np.array([1e3, 1e4, 1e5])
    refs = ReferenceSet(
        frequency=f,
        open=-1j / (2 * np.pi * f * 5e-12),
        short=0.05 + 2j * np.pi * f * 1e-6,
    )
    small = np.full(3, 0.2 + 0.0j)  # 0.2 ohm against a 0.05 ohm short
    found = dut_warnings(refs, f, small)
    assert len(found) == 1 and "within 10x of the short residual" in found[0]
    assert dut_warnings(refs, f, np.full(3, 100.0 + 0j)) == []
    assert dut_warnings(refs, f[:0], small[:0]) == []
