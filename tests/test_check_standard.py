"""A check standard's chart: limits held from a baseline, run rules after it, the establishing
phase, the station's stop reasons (age, rules, acknowledgement) and the plan's section.

Sources beside each check value: NIST/SEMATECH e-Handbook of Statistical Methods 6.3.2 (moving
ranges of two: d2 = 1.128, D4 = 3.267, limits x-bar ± 3·MR-bar/d2 = x-bar ± 2.66·MR-bar); the
run rules of the Western Electric Statistical Quality Control Handbook (1956). The baseline of 20
results is common practice, no published source.
"""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import numpy as np
import pytest

from acquire.msa.check_standard import (
    BASELINE,
    establishing_text,
    held_chart,
    position_strip,
    rules_of_last,
)
from acquire.production.check_guard import check_blocks, in_force, standing_blocks
from acquire.production.plan_file import PlanError, example_plan_path, parse_plan
from acquire.report.control import run_rules
from acquire.store.check_results import Acknowledgement, CheckSummary

T0 = datetime(2026, 5, 4, 6, 0, tzinfo=UTC)


def test_limits_from_the_baseline_equal_the_hand_worked_numbers():
    """Computed by hand from NIST/SEMATECH 6.3.2's formulas, baseline of 5 values:
    x = 10, 12, 11, 13, 12 -> x-bar = 58/5 = 11.6; moving ranges 2, 1, 2, 1 -> MR-bar = 1.5;
    sigma = 1.5/1.128 = 1.32979; UCL = 11.6 + 3·1.32979 = 15.58936 (2.66·1.5 = 3.99 gives
    15.59); LCL = 7.61064; MR UCL = 3.267·1.5 = 4.9005. The later values do not move them."""
    values = np.array([10, 12, 11, 13, 12, 30, 11], dtype=float)
    chart = held_chart(values, baseline=5)
    assert chart is not None
    assert chart.center == pytest.approx(11.6, abs=1e-12)
    assert chart.mr_center == pytest.approx(1.5, abs=1e-12)
    assert chart.sigma == pytest.approx(1.329787, abs=1e-6)
    assert chart.ucl == pytest.approx(15.58936, abs=1e-5)
    assert chart.ucl == pytest.approx(11.6 + 2.66 * 1.5, abs=0.002)  # the rounded 2.66
    assert chart.lcl == pytest.approx(7.61064, abs=1e-5)
    assert chart.mr_ucl == pytest.approx(4.9005, abs=1e-9)
    # 30 lies beyond 3 sigma (WE rule 1); 11 after it breaks nothing.
    assert chart.broken == ((5, "beyond 3 sigma"),)


def test_while_establishing_there_are_no_limits_and_no_rules():
    values = np.array([1.0, 1.1, 0.9, 1.05, 0.95, 1.0, 50.0])
    assert held_chart(values) is None
    assert rules_of_last(values) == ()
    assert establishing_text(7) == "limits being established: 7 of 20 results"
    assert establishing_text(BASELINE) == ""
    assert BASELINE == 20
    assert position_strip(1.0, None) == ""


def _baseline() -> np.ndarray:
    """20 values alternating 11 and 9: x-bar = 10, every moving range 2, sigma = 2/1.128 =
    1.773 (computed). The last is below the center, so a run above starts after it."""
    return np.array([11.0, 9.0] * 10)


def test_eight_in_a_row_after_the_baseline_is_caught_on_the_eighth():
    """WE rule 4: eight successive points on one side of the center line. 10.5 is 0.28 sigma
    above the center (computed), inside every zone, so only the run can flag it."""
    series = _baseline()
    for n in range(1, 9):
        series = np.append(series, 10.5)
        rules = rules_of_last(series)
        assert rules == (("8 in a row on one side",) if n == 8 else ()), n


def test_one_point_beyond_three_sigma_is_caught_at_once():
    """WE rule 1: 10 + 3.5·1.773 = 16.2 (computed) is beyond the upper limit 15.32."""
    series = np.append(_baseline(), 16.2)
    assert "beyond 3 sigma" in rules_of_last(series)
    assert rules_of_last(np.append(_baseline(), 15.0)) == ()


def test_a_wild_value_inside_the_baseline_is_never_flagged():
    """Computed: with 40 in place of the 4th value (a 9), x-bar = 231/20 = 11.55, MR-bar =
    (17·2 + 29 + 29)/19 = 4.842, UCL = 11.55 + 3·4.842/1.128 = 24.43: 40 lies beyond it, yet
    it is one of the values that set the limits, so it is not flagged."""
    series = _baseline()
    series[3] = 40.0
    chart = held_chart(series)
    assert chart is not None and chart.ucl == pytest.approx(24.43, abs=0.01)
    assert (3, "beyond 3 sigma") in run_rules(series, chart.center, chart.sigma)
    assert chart.broken == ()


def _summary(last=None, broken=(), ack=None) -> CheckSummary:
    return CheckSummary("CS-1", 0 if last is None else 25, "c" if last else None, last, broken, ack)


def _ack(at: datetime) -> Acknowledgement:
    return Acknowledgement(7, "CS-1", at, "eve", "re-seated", "why", "c")


def test_stop_reasons_age_rules_and_never_checked():
    now = T0 + timedelta(hours=13)
    assert standing_blocks(_summary(), 12 * 3600, now) == [
        "check standard 'CS-1' has never been checked"
    ]
    old = standing_blocks(_summary(last=T0), 12 * 3600, now)
    assert old == ["check standard 'CS-1' was last checked 13.0 h ago; the plan allows 12.0 h"]
    assert standing_blocks(_summary(last=T0), 14 * 3600, now) == []
    assert standing_blocks(_summary(last=T0), None, now) == []
    broke = standing_blocks(_summary(T0, (("Ls@10000", "8 in a row on one side"),)), None, now)
    assert broke == [
        "check standard 'CS-1': its last check broke a run rule (Ls@10000 8 in a row on one side)"
    ]


def test_an_acknowledgement_lifts_the_stop_until_the_next_check_or_max_age():
    broken = (("Ls@10000", "beyond 3 sigma"),)
    ack = _ack(T0 + timedelta(hours=1))
    summary = _summary(T0, broken, ack)
    assert check_blocks(summary, 12 * 3600, T0 + timedelta(hours=2)) == []
    assert in_force(summary, 12 * 3600, T0 + timedelta(hours=2)) is ack
    # older than max_age: no longer in force
    assert check_blocks(summary, 12 * 3600, T0 + timedelta(hours=14)) != []
    # a check after the acknowledgement ends it
    later = _summary(T0 + timedelta(hours=3), broken, ack)
    assert in_force(later, 12 * 3600, T0 + timedelta(hours=4)) is None
    assert check_blocks(later, 12 * 3600, T0 + timedelta(hours=4)) != []


def test_plan_names_its_check_standard_and_its_maximum_age():
    text = example_plan_path().read_text(encoding="utf-8")
    assert parse_plan(text).check_standard is None
    plan = parse_plan(text + '\n[check_standard]\nname = "CS-1"\nmax_age = "12h"\n')
    assert plan.check_standard is not None
    assert (plan.check_standard.name, plan.check_standard.max_age) == ("CS-1", 12 * 3600.0)
    assert parse_plan(text + '\n[check_standard]\nname = "A"\n').check_standard.max_age is None
    with pytest.raises(PlanError, match=r"check_standard\.name"):
        parse_plan(text + "\n[check_standard]\nmax_age = 4\n")
    with pytest.raises(PlanError, match=r"check_standard\.colour"):
        parse_plan(text + '\n[check_standard]\nname = "A"\ncolour = 1\n')
