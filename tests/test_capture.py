"""Guided reference capture on the simulated fixture: accepted, refused, retried, stopped.

Sources: the simulated meter's physics (drivers.simulator.physics: the fixture as a two-port,
the noise model) is the outside reference: corrected readings are compared with the simulator's
own noiseless ``dut_impedance``, and the Type A uncertainty of the mean with the simulator's
stated noise deviation over sqrt(n) (JCGM 100:2008, 4.2.3, the standard deviation of the mean).
"""

from __future__ import annotations

import re
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from acquire.capture import (
    ConsoleOperator,
    capture_references,
    dut_warnings,
    mean_reading,
    reference_warnings,
)
from acquire.compensation import ReferenceSet
from acquire.errors import CompensationError
from acquire.open_fixture import open_fixture
from acquire.plan import log_plan
from drivers.meter import ImpedanceMeter
from drivers.simulator import running
from drivers.simulator.reading_error import noise_deviation

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
    assert any("short: reads the same as the open" in p for p in problems)
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


@pytest.fixture
def cable():
    with (
        running(dut="open", fixture="cable-leads", seed=23, measure_time=0) as sim,
        ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
    ):
        yield sim, meter


@pytest.mark.parametrize("top", ["20MHz", "30MHz"])
def test_cable_leads_capture_is_accepted_and_corrects_the_coil(cable, top):
    # Before: the load was refused at 20 MHz ("681.6 %") and the short at 30 MHz, above the
    # leads' own resonance, so nothing could be captured. The fixture is passive and linear,
    # so the three standards fix it exactly (formulas module): the coil corrected with them
    # must agree with the simulator's noiseless coil.
    sim, meter = cable
    plan = log_plan("1kHz", top, 41)
    hand = ScriptedHand(sim, retry=False)
    refs = capture_references(meter, plan, hand, load_true=sim.load_true, repeats=2)
    assert hand.refused == []
    assert refs.method == "open-short-load" and refs.grid_spacing == "log" and refs.repeats == 2
    f = plan.frequencies
    sim.insert("air-core-coil")
    raw = np.asarray(meter.sweep(f), dtype=complex)
    true = sim.dut_impedance(f)
    corrected = refs.correct(f, raw)
    # Within the noise: each reading's one-sigma noise from the simulator's own model
    # (noise_deviation), the references' divided by sqrt(2) for the mean of two, carried
    # through the correction by its derivatives (computed by finite differences). At 6 sigma.
    m = sim.meter

    def sigma(z):
        return noise_deviation(np.abs(z), f, m.accuracy_class, m.low_impedance_corner,
                               m.high_impedance_corner, m.frequency_corner)  # fmt: skip

    variance = (sigma(raw) * _slope(refs, f, raw, None)) ** 2
    for name in ("open", "short", "load"):
        variance += (sigma(getattr(refs, name)) / np.sqrt(2) * _slope(refs, f, raw, name)) ** 2
    err = np.abs(corrected - true)
    assert np.all(err <= 6 * np.sqrt(2 * variance)), np.max(err / np.sqrt(variance))
    # The raw reading is not (the fixture matters), so the check above can fail.
    assert np.max(np.abs(raw - true) / np.abs(true)) > 0.05


def _slope(refs, f, raw, name):
    """|d corrected / d reading| (name None) or |d corrected / d standard name|, numerically."""
    base = refs.correct(f, raw)
    if name is None:
        step = 1e-6 * np.abs(raw)
        return np.abs(refs.correct(f, raw + step) - base) / step
    z = getattr(refs, name)
    step = 1e-6 * np.abs(z)
    moved = refs.with_standard(name, z + step, getattr(refs, f"{name}_u"))
    return np.abs(moved.correct(f, raw) - base) / step


@pytest.mark.parametrize(
    ("script", "refused", "seen"),
    [
        ({"open": ["short"]}, "short", "reads the same as the open"),
        ({"short": ["open"]}, "short", "reads the same as the open"),
        ({"load": ["open"]}, "load", "reads the same as the open"),
        ({"load": ["air-core-coil"]}, "load", "not a load of the value given"),
    ],
    ids=["short-for-open", "open-for-short", "nothing-for-load", "coil-for-load"],
)
def test_wrong_standards_on_the_cable_are_refused_saying_what_was_seen(
    cable, script, refused, seen
):
    sim, meter = cable
    hand = ScriptedHand(sim, script=script, retry=False)
    with pytest.raises(CompensationError, match=f"{refused} reference was refused"):
        capture_references(meter, log_plan("1kHz", "30MHz", 41), hand, load_true=sim.load_true)
    standard, problems = hand.refused[0]
    assert standard == refused
    assert any(seen in p for p in problems), problems
    assert any(" at " in p and "Ω" in p for p in problems)  # the readings' values are named


def test_a_load_of_the_wrong_value_is_refused(cable):
    sim, meter = cable
    hand = ScriptedHand(sim, retry=False)
    with pytest.raises(CompensationError, match="load reference was refused"):
        capture_references(meter, log_plan("1kHz", "20MHz", 31), hand, load_true=50.0)
    text = hand.refused[0][1][0]
    assert "is more than 50% from its true value at 24 of 31" in text, text
    # It reads the 100 ohm standard the simulator holds: about twice the 50 ohm given.
    assert re.search(r"worst 10\d\.\d% at .*reads 10\d\.\d Ω at -?0\.\d° against 50\.00 Ω", text)


def test_repeats_give_the_mean_and_its_type_a_uncertainty(bench):
    sim, meter = bench
    n = 8
    refs = capture_references(meter, PLAN, ScriptedHand(sim), standards=("open",), repeats=n)
    assert refs.repeats == n and refs.short_u is None
    f = PLAN.frequencies
    sim.insert("open")
    exact = sim.seen_impedance(f)
    from drivers.simulator.measurement import Conditions, error_bound, noise_deviation
    from drivers.simulator.state import LEVEL_DEFAULT, PERIODS_DEFAULT

    conditions = Conditions(
        tuple(f), LEVEL_DEFAULT, PERIODS_DEFAULT, 1, True, sim.dut, sim.fixture, sim.meter, 0
    )
    sigma = noise_deviation(conditions, np.abs(exact), f)
    ratio = refs.open_u / (sigma / np.sqrt(n))
    # 16 estimates of a standard deviation from 2*8 values each: their mean is near 1.
    assert 0.8 < np.mean(ratio) < 1.2, ratio
    # The mean keeps the meter's systematic error (within its bound on each part, which
    # repeats do not average away) and 6 standard deviations of the mean's noise.
    bound = error_bound(conditions, np.abs(exact), f)
    assert np.all(np.abs(refs.open - exact) < np.sqrt(2) * bound + 6 * sigma / np.sqrt(n))
    once = capture_references(meter, PLAN, ScriptedHand(sim), standards=("open",), repeats=1)
    assert once.open_u is None and once.repeats == 1
    with pytest.raises(CompensationError, match="repeats"):
        capture_references(meter, PLAN, ScriptedHand(sim), standards=("open",), repeats=0)


def test_mean_reading_is_the_standard_deviation_of_the_mean():
    # Computed by hand: readings 1+1j, 3+5j -> mean 2+3j; s_R^2 = 2, s_X^2 = 8, pooled 5;
    # u = sqrt(5/2).
    z, u = mean_reading(np.array([[1 + 1j], [3 + 5j]]))
    assert z[0] == 2 + 3j and u[0] == pytest.approx(np.sqrt(2.5))
    assert mean_reading(np.array([[1 + 1j]]))[1] is None


def test_empty_fixture_without_references():
    f = np.logspace(3, 7, 9)
    w = 2 * np.pi * f
    assert "open fixture" in open_fixture(f, 1 / (1e-9 + 1j * w * 8e-12))  # open leads, 8 pF
    nan = np.full(9, complex(np.nan, np.nan))
    assert "open fixture" in open_fixture(f, nan)
    assert open_fixture(f, 0.5 + 1j * w * 10e-6) == ""  # a coil
    assert open_fixture(f, 1 / (1j * w * 100e-9)) == ""  # a 100 nF capacitor
    assert open_fixture(f[:0], nan[:0]) == ""


def test_empty_fixture_through_the_simulator(bench):
    sim, meter = bench
    f = PLAN.frequencies
    sim.insert("open")
    assert open_fixture(f, meter.sweep(f)) != ""
    sim.insert("air-core-coil")
    assert open_fixture(f, meter.sweep(f)) == ""
