"""Judging a unit: conformance probability, GUM combination, guard bands, statements, bins.

Sources: ILAC-G8:09/2019 "Guidelines on Decision Rules and Statements of Conformity" (guarded
acceptance w = U, 4.2.2; the four zones of non-binary statements, 4.2.3); JCGM 106:2012 "The
role of measurement uncertainty in conformity assessment" (7.3, conformance probability for a
normal PDF); JCGM 100:2008 (GUM) 4.2.3, 4.3.7, 5.1.2 and 6.2.1. Reference values come from
scipy.stats.norm and numpy, or are worked by hand in the comments.
"""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.stats import norm

from acquire.errors import InputError
from acquire.production.judgement import (
    acceptance_limits,
    combined_standard,
    conformance_probability,
    error_judgement,
    expanded,
    judge_unit,
    statement,
)
from acquire.production.plan import (
    CONDITIONAL_FAIL,
    CONDITIONAL_PASS,
    ERROR,
    FAIL,
    PASS,
    REJECT_BIN,
    BinRule,
    Check,
    DecisionRule,
    Limit,
    TestPlan,
)

GUARDED = DecisionRule(guarded=True, guard_factor=1.0, binary=True)
GUARDED_FOUR = DecisionRule(guarded=True, guard_factor=1.0, binary=False)
SIMPLE = DecisionRule(guarded=False, binary=True)
SIMPLE_FOUR = DecisionRule(guarded=False, binary=False)

#: 344 µH ± 3 % as tolerance limits (an invented part).
LS = Limit(low=333.68e-6, high=354.32e-6, nominal=344e-6, text="344 µH ± 3 %")


def plan_of(checks, rule=GUARDED, bins=(), otherwise="pass") -> TestPlan:
    return TestPlan(
        name="demo coil final test",
        version="1",
        part="DC-344",
        checks=tuple(checks),
        bins=tuple(bins),
        otherwise_bin=otherwise,
        decision=rule,
    )


# --- ILAC-G8:09/2019 guarded acceptance --------------------------------------------------------


def test_ilac_g8_value_at_the_acceptance_limit_is_outside_tolerance_with_2_3_percent():
    # ILAC-G8:09/2019 4.2.2: with w = U (k = 2, normal distribution) a result exactly at the
    # acceptance limit has a 2.3 % probability of lying outside the tolerance limit; the exact
    # figure is the normal upper tail at 2 standard deviations, scipy.stats.norm.sf(2) = 2.275 %.
    tu, U = 10.0, 0.4
    _, au = acceptance_limits(Limit(None, tu), U, GUARDED)
    assert au == pytest.approx(tu - U)
    outside = 1.0 - conformance_probability(au, U / 2, None, tu)
    assert outside == pytest.approx(norm.sf(2.0), rel=1e-12)
    assert outside == pytest.approx(0.02275, abs=5e-6)  # the 2.275 % of ILAC-G8's w = U rule
    tl = 3.0
    al, _ = acceptance_limits(Limit(tl, None), U, GUARDED)
    assert 1.0 - conformance_probability(al, U / 2, tl, None) == pytest.approx(norm.sf(2.0))


def test_ilac_g8_judged_probability_and_statement_at_the_acceptance_limit():
    # ILAC-G8:09/2019 4.2.2: the acceptance limit belongs to the acceptance zone; 2.275 % as above.
    U = 2e-6
    check = Check("Ls", 10e3, LS)
    plan = plan_of([check])
    au = LS.high - U
    judged = judge_unit(plan, {check.key: (au, U)}).judged[0]
    assert judged.verdict == PASS
    assert judged.high == pytest.approx(au)
    assert judged.low == pytest.approx(LS.low + U)
    assert 1.0 - judged.probability == pytest.approx(norm.sf(2.0), rel=1e-9)
    beyond = judge_unit(plan, {check.key: (np.nextafter(au, 1.0), U)})
    assert beyond.outcome == FAIL and beyond.bin == REJECT_BIN


def test_acceptance_limits_simple_guarded_unknown_and_empty():
    # ILAC-G8:09/2019 4.2.1 (simple: AL = TL, AU = TU) and 4.2.2 (AL = TL + w, AU = TU - w).
    limit = Limit(1.0, 2.0)
    assert acceptance_limits(limit, 0.1, SIMPLE) == (1.0, 2.0)
    assert acceptance_limits(limit, math.nan, SIMPLE) == (1.0, 2.0)
    half = DecisionRule(guarded=True, guard_factor=0.5)
    assert acceptance_limits(limit, 0.1, half) == pytest.approx((1.05, 1.95))
    assert acceptance_limits(Limit(None, 2.0), 0.1, GUARDED) == (None, pytest.approx(1.9))
    # Unknown U with a guard band: infinite band, nothing accepted (contract rule).
    for unknown in (math.nan, math.inf):
        low, high = acceptance_limits(limit, unknown, GUARDED)
        assert low == math.inf and high == -math.inf
        assert statement(1.5, unknown, limit, GUARDED) == FAIL
    # 2w wider than the tolerance: empty acceptance zone, even the nominal fails.
    low, high = acceptance_limits(limit, 0.6, GUARDED)
    assert low > high
    assert statement(1.5, 0.6, limit, GUARDED) == FAIL
    assert statement(1.5, 0.6, limit, GUARDED_FOUR) == CONDITIONAL_PASS
    with pytest.raises(InputError):
        acceptance_limits(limit, -0.1, GUARDED)


# --- JCGM 106:2012 conformance probability -----------------------------------------------------


def reference_pc(y, u, tl, tu):
    """JCGM 106:2012 7.3.2 for a normal PDF, with scipy.stats.norm (sf on the upper side)."""
    a = -np.inf if tl is None else (tl - y) / u
    b = np.inf if tu is None else (tu - y) / u
    return norm.sf(a) - norm.sf(b)


def cases():
    rng = np.random.default_rng(106)
    for _ in range(400):
        y = rng.normal(0.0, 3.0)
        u = 10 ** rng.uniform(-2, 1)
        tl = rng.normal(-2.0, 1.0)
        tu = tl + 10 ** rng.uniform(-1, 1)
        tl_or_open = None if rng.random() < 0.2 else tl
        tu_or_open = None if (tl_or_open is not None and rng.random() < 0.25) else tu
        yield y, u, tl_or_open, tu_or_open


def test_conformance_probability_matches_scipy_for_many_cases_including_one_sided():
    # JCGM 106:2012 7.3.2, pc = Φ((TU - y)/u) - Φ((TL - y)/u), against scipy.stats.norm.
    seen_one_sided = 0
    for y, u, tl, tu in cases():
        want = reference_pc(y, u, tl, tu)
        got = conformance_probability(y, u, tl, tu)
        assert isinstance(got, float)
        assert got == pytest.approx(want, rel=1e-9, abs=1e-15), (y, u, tl, tu)
        seen_one_sided += tl is None or tu is None
    assert seen_one_sided > 50


def test_conformance_probability_arrays_match_scipy():
    # JCGM 106:2012 7.3.2 against scipy.stats.norm, array in, array out.
    y = np.linspace(-3.0, 4.0, 57)
    u = np.full_like(y, 0.37)
    for tl, tu in ((-1.0, 2.0), (None, 2.0), (-1.0, None)):
        got = conformance_probability(y, u, tl, tu)
        assert isinstance(got, np.ndarray) and got.shape == y.shape
        np.testing.assert_allclose(got, reference_pc(y, u, tl, tu), rtol=1e-9, atol=1e-15)
    got = conformance_probability(np.array([0.0, np.nan, 5.0]), 0.0, -1.0, 2.0)
    np.testing.assert_array_equal(got[[0, 2]], [1.0, 0.0])
    assert np.isnan(got[1])


def test_conformance_probability_far_tail_keeps_its_digits():
    # Both limits 10 u and 11 u above y: scipy.stats.norm.sf difference (JCGM 106:2012 7.3.2);
    # a naive Φ(b) - Φ(a) would round to 0.
    want = norm.sf(10.0) - norm.sf(11.0)
    assert conformance_probability(0.0, 1.0, 10.0, 11.0) == pytest.approx(want, rel=1e-9, abs=0)
    assert conformance_probability(0.0, 1.0, -11.0, -10.0) == pytest.approx(want, rel=1e-9, abs=0)
    arrays = conformance_probability(np.zeros(2), 1.0, 10.0, 11.0)
    np.testing.assert_allclose(arrays, [want, want], rtol=1e-9, atol=0)


def test_conformance_probability_edges():
    # At a one-sided limit the normal PDF is split in half (JCGM 106:2012 7.3.2, Φ(0) = 1/2).
    assert conformance_probability(5.0, 0.3, None, 5.0) == pytest.approx(0.5)
    assert conformance_probability(5.0, 0.3, 5.0, None) == pytest.approx(0.5)
    assert conformance_probability(1.0, 0.0, 1.0, 2.0) == 1.0
    assert conformance_probability(0.9, 0.0, 1.0, 2.0) == 0.0
    assert math.isnan(conformance_probability(1.5, math.nan, 1.0, 2.0))
    with pytest.raises(InputError):
        conformance_probability(1.5, -1.0, 1.0, 2.0)


# --- JCGM 100:2008 (GUM) combination -----------------------------------------------------------


def test_gum_type_a_and_type_b_in_quadrature_hand_worked():
    # Worked by hand (JCGM 100:2008 4.2.3, 4.3.7, 5.1.2, 6.2.1): readings 10.01, 10.03, 9.98,
    # 10.02, 10.00; mean 10.008; squared deviations sum to 1480e-6, s² = 370e-6, s²/n = 74e-6.
    # Type B half-width a = 0.03: a²/3 = 300e-6. u² = 374e-6, u = 0.0193391..., U = 2u.
    readings = np.array([10.01, 10.03, 9.98, 10.02, 10.00])
    s = float(np.std(readings, ddof=1))
    assert s**2 == pytest.approx(370e-6, rel=1e-9)
    u = combined_standard(s, len(readings), 0.03)
    assert u**2 == pytest.approx(374e-6, rel=1e-9)
    assert u == pytest.approx(0.019339079605813716, rel=1e-12)  # sqrt(374e-6), by hand
    assert expanded(u) == pytest.approx(2 * 0.019339079605813716)
    assert expanded(u, k=3.0) == pytest.approx(3 * 0.019339079605813716)


def test_gum_parts_alone_and_against_numpy():
    # JCGM 100:2008 4.2.3 (s/√n, checked against numpy.std(ddof=1)) and 4.3.7 (a/√3).
    rng = np.random.default_rng(100)
    readings = rng.normal(4.95, 0.02, size=12)
    s = np.std(readings, ddof=1)
    assert combined_standard(s, 12, None) == pytest.approx(s / math.sqrt(12))
    assert combined_standard(None, 1, 0.5) == pytest.approx(0.5 / math.sqrt(3))
    assert math.isnan(combined_standard(math.nan, 3, 0.1))
    for bad in ((None, 1, None), (0.1, 0, None), (-0.1, 3, None), (None, 1, -0.2)):
        with pytest.raises(InputError):
            combined_standard(*bad)


# --- the four zones of ILAC-G8:09/2019 4.2.3 ---------------------------------------------------


@pytest.mark.parametrize(
    ("value", "binary_guarded", "four_guarded", "four_simple"),
    [
        (5.0, PASS, PASS, PASS),  # mid tolerance
        (6.5, PASS, PASS, PASS),  # exactly at AU = TU - w (inclusive)
        (6.75, FAIL, CONDITIONAL_PASS, PASS),  # inside tolerance, in the guard band
        (7.0, FAIL, CONDITIONAL_PASS, PASS),  # exactly at TU
        (7.25, FAIL, CONDITIONAL_FAIL, FAIL),  # outside tolerance, within w of it
        (7.5, FAIL, CONDITIONAL_FAIL, FAIL),  # exactly TU + w
        (7.75, FAIL, FAIL, FAIL),  # beyond TU + w
        (2.75, FAIL, CONDITIONAL_FAIL, FAIL),  # the same on the low side
        (3.25, FAIL, CONDITIONAL_PASS, PASS),
        (3.5, PASS, PASS, PASS),  # exactly at AL = TL + w
        (2.25, FAIL, FAIL, FAIL),
        (math.nan, FAIL, FAIL, FAIL),  # invalid reading
        (math.inf, FAIL, FAIL, FAIL),  # overrange
    ],
)
def test_statements_in_each_zone(value, binary_guarded, four_guarded, four_simple):
    # ILAC-G8:09/2019 4.2.3 and its four-zone figure; TL = 3, TU = 7, U = w = 0.5 (factor 1).
    # Every number here is a sum of powers of two, so the boundaries are exact in binary.
    limit = Limit(3.0, 7.0)
    assert statement(value, 0.5, limit, GUARDED) == binary_guarded
    assert statement(value, 0.5, limit, GUARDED_FOUR) == four_guarded
    assert statement(value, 0.5, limit, SIMPLE_FOUR) == four_simple
    assert statement(value, 0.5, limit, SIMPLE) == (PASS if four_simple == PASS else FAIL)


def test_unknown_uncertainty_non_binary_is_conditional():
    # An infinite band (U unknown, contract rule): inside tolerance nothing is accepted outright,
    # and outside it nothing is rejected outright (ILAC-G8:09/2019 4.2.3 zones with w = ∞).
    limit = Limit(3.0, 7.0)
    assert statement(5.0, math.nan, limit, GUARDED_FOUR) == CONDITIONAL_PASS
    assert statement(9.0, math.nan, limit, GUARDED_FOUR) == CONDITIONAL_FAIL


# --- a unit: outcome, bins, description --------------------------------------------------------

LS10 = Check("Ls", 10e3, LS)
RS100 = Check("Rs", 100e3, Limit(None, 9.0, text="≤ 9 Ω"))
Q1 = Check("Q", 1e3, Limit(0.3, None))
RDC = Check("Rdc", None, Limit(4.653, 5.247, nominal=4.95))
ONE = BinRule("1%", (Check("Ls", 10e3, Limit(340.56e-6, 347.44e-6)),))
TWO = BinRule("2%", (Check("Ls", 10e3, Limit(337.12e-6, 350.88e-6)),))


def values(ls=344e-6, u_ls=0.5e-6, rs=7.0, q=0.5, rdc=4.95):
    return {"Ls@10000": (ls, u_ls), "Rs@100000": (rs, 0.1), "Q@1000": (q, 0.01), "Rdc": (rdc, 0.02)}


def test_bins_first_rule_wins_then_otherwise_then_reject():
    # Binning order is the plan's: the first satisfied rule wins (common practice, no published
    # source); a failing unit is rejected whatever its Ls.
    plan = plan_of([LS10, RS100, Q1, RDC], bins=[ONE, TWO], otherwise="3%")
    assert judge_unit(plan, values(ls=344e-6)).bin == "1%"  # satisfies both 1% and 2%
    assert judge_unit(plan, values(ls=339e-6)).bin == "2%"
    assert judge_unit(plan, values(ls=335e-6)).bin == "3%"
    swapped = plan_of([LS10, RS100, Q1, RDC], bins=[TWO, ONE], otherwise="3%")
    assert judge_unit(swapped, values(ls=344e-6)).bin == "2%"
    failed = judge_unit(plan, values(ls=344e-6, rs=9.5))
    assert (failed.outcome, failed.bin) == (FAIL, REJECT_BIN)
    assert [j.check.key for j in failed.failing] == ["Rs@100000"]


def test_bin_checks_use_the_guard_band_of_the_plan_rule():
    # ILAC-G8:09/2019 4.2.2 applies to the bin's limits too: 340.7 µH with U = 0.5 µH is inside
    # the 1% limits but within w of the low one, so binary guarded refuses the 1% bin and the
    # non-binary rule (conditional pass) takes it.
    plan = plan_of([LS10, RS100, Q1, RDC], bins=[ONE, TWO], otherwise="3%")
    assert judge_unit(plan, values(ls=340.7e-6)).bin == "2%"
    four = plan_of([LS10, RS100, Q1, RDC], rule=GUARDED_FOUR, bins=[ONE, TWO], otherwise="3%")
    unit = judge_unit(four, values(ls=340.7e-6))
    assert (unit.outcome, unit.bin) == (PASS, "1%")


def test_outcome_is_the_worst_statement():
    # ILAC-G8:09/2019 4.2.3 zones, ordered fail > conditional fail > conditional pass > pass.
    plan = plan_of([LS10, RS100, Q1, RDC], rule=GUARDED_FOUR, bins=[ONE], otherwise="other")
    cond_pass = judge_unit(plan, values(rs=8.95))  # Rs inside 9 Ω but within U = 0.1 Ω of it
    assert (cond_pass.outcome, cond_pass.bin) == (CONDITIONAL_PASS, "1%")
    assert cond_pass.failing == ()
    cond_fail = judge_unit(plan, values(rs=9.05))
    assert (cond_fail.outcome, cond_fail.bin) == (CONDITIONAL_FAIL, REJECT_BIN)
    worst = judge_unit(plan, values(rs=9.05, q=0.1))
    assert worst.outcome == FAIL
    assert [j.verdict for j in worst.failing] == [CONDITIONAL_FAIL, FAIL]
    binary = judge_unit(plan_of([LS10, RS100, Q1, RDC]), values(rs=8.95))
    assert binary.outcome == FAIL


def test_missing_value_is_an_input_error_and_error_judgement():
    plan = plan_of([LS10, RDC])
    with pytest.raises(InputError, match="Rdc"):
        judge_unit(plan, {"Ls@10000": (344e-6, 1e-6)})
    err = error_judgement(plan)
    assert (err.outcome, err.bin, err.judged, err.failing) == (ERROR, "", (), ())


def test_describe_lines_are_plain_text():
    # Wording is our own; numbers as acquire.units.format_si prints them (4 significant digits).
    check = Check("Ls", 10e3, Limit(339.5e-6, 350e-6))
    simple = plan_of([check], rule=SIMPLE)
    low = judge_unit(simple, {check.key: (338.2e-6, 1e-6)}).judged[0]
    assert low.describe() == "Ls @ 10 kHz 338.2 µH below 339.5 µH (low limit)"
    guarded = plan_of([check], rule=GUARDED)
    high = judge_unit(guarded, {check.key: (349.5e-6, 1e-6)}).judged[0]
    assert high.describe() == (
        "Ls @ 10 kHz 349.5 µH above 349.0 µH (high limit 350.0 µH with guard band 1.000 µH)"
    )
    four = plan_of([check], rule=GUARDED_FOUR)
    line = judge_unit(four, {check.key: (350.5e-6, 1e-6)}).judged[0].describe()
    assert line.endswith("(conditional fail)") and "350.0 µH" in line
    rdc = judge_unit(plan_of([RDC], rule=SIMPLE), {"Rdc": (4.95, 0.02)}).judged[0]
    assert rdc.describe() == "Rdc (20 °C) 4.950 Ω within 4.653 Ω to 5.247 Ω"
    q = Check("Q", 1.5e3, Limit(30.0, None))
    got = judge_unit(plan_of([q], rule=SIMPLE), {q.key: (math.inf, math.nan)}).judged[0]
    assert got.describe() == "Q @ 1.5 kHz: overrange"
    assert math.isnan(got.probability)


def test_judgement_imports_no_scipy():
    # Importing scipy.special costs about half a second; the station judges without it.
    code = "import sys, acquire.production.judgement; print('scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


# --- properties (hypothesis) -------------------------------------------------------------------

finite = st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False)
positive = st.floats(1e-9, 1e6, allow_nan=False, allow_infinity=False)
factor = st.floats(0.0, 5.0, allow_nan=False)


@given(finite, positive, finite, positive, factor, st.booleans())
def test_guarded_acceptance_never_accepts_what_simple_rejects(tl, width, y, U, g, binary):
    # ILAC-G8:09/2019 4.2.2: the acceptance zone of a guarded rule lies inside the tolerance.
    limit = Limit(tl, tl + width)
    guarded = DecisionRule(guarded=True, guard_factor=g, binary=binary)
    if statement(y, U, limit, guarded) == PASS:
        assert statement(y, U, limit, DecisionRule(guarded=False, binary=binary)) == PASS


@given(finite, positive, finite, positive, factor, factor, st.booleans())
def test_widening_the_guard_band_never_turns_fail_to_pass(tl, width, y, U, g1, g2, binary):
    # ILAC-G8:09/2019 4.2.2: a wider band (w = factor × U) shrinks the acceptance zone.
    limit = Limit(tl, tl + width)
    narrow, wide = sorted((g1, g2))
    narrow_rule = DecisionRule(guard_factor=narrow, binary=binary)
    wide_rule = DecisionRule(guard_factor=wide, binary=binary)
    if statement(y, U, limit, narrow_rule) == FAIL:
        assert statement(y, U, limit, wide_rule) != PASS
    if statement(y, U, limit, wide_rule) == PASS:
        assert statement(y, U, limit, narrow_rule) == PASS


@given(finite, positive, finite, positive)
def test_probability_is_a_probability_and_drops_outside(tl, width, y, u):
    # JCGM 106:2012 7.3.2: 0 <= pc <= 1, and pc <= 1/2 for a value outside a limit.
    p = conformance_probability(y, u, tl, tl + width)
    assert 0.0 <= p <= 1.0
    if y < tl or y > tl + width:
        assert p <= 0.5 + 1e-12


@given(finite, positive, finite, positive, factor)
def test_binary_and_non_binary_agree_on_pass(tl, width, y, U, g):
    # ILAC-G8:09/2019 4.2.3: the non-binary "pass" zone is the binary acceptance zone.
    limit = Limit(tl, tl + width)
    binary = statement(y, U, limit, DecisionRule(guard_factor=g, binary=True))
    four = statement(y, U, limit, DecisionRule(guard_factor=g, binary=False))
    assert (binary == PASS) == (four == PASS)
    assert four in (PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL)
