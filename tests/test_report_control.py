"""Individuals and moving-range charts and the run rules (acquire.report.control).

Sources: the chart constants for moving ranges of two, d2 = 1.128, D3 = 0, D4 = 3.267, and the
limits center ± 3·MR-bar/d2, D4·MR-bar, are those of the NIST/SEMATECH e-Handbook of Statistical
Methods, 6.3.2 (individuals control charts); the run rules are the zone tests of the Western
Electric Statistical Quality Control Handbook (1956), which Nelson, J. Quality Technology 16(4),
1984 lists as tests 1, 5, 6 and (with nine points) 2. Each series below is constructed by hand
so that it breaks exactly one rule, with center 0 and sigma 1.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.report.control import (
    BEYOND_3,
    EIGHT_IN_A_ROW,
    FOUR_OF_FIVE,
    TWO_OF_THREE,
    individuals_chart,
    moving_ranges,
    run_rules,
)

#: A small series and its chart worked out by hand (NIST/SEMATECH 6.3.2 formulas):
#: moving ranges |12-10| = 2, |11-12| = 1, |15-11| = 4, |13-15| = 2, MR-bar = 9/4 = 2.25;
#: mean 61/5 = 12.2; sigma = 2.25/1.128 = 1.994680851; UCL = 12.2 + 3·1.994680851 = 18.184042553,
#: LCL = 6.215957447; moving-range UCL = 3.267·2.25 = 7.35075.
SERIES = [10.0, 12.0, 11.0, 15.0, 13.0]


def test_constants_and_limits_of_a_series_worked_by_hand():
    chart = individuals_chart(np.array(SERIES))
    np.testing.assert_array_equal(chart.moving_range, [2.0, 1.0, 4.0, 2.0])
    assert chart.mr_center == pytest.approx(2.25, rel=1e-12)
    assert chart.center == pytest.approx(12.2, rel=1e-12)
    assert chart.sigma == pytest.approx(1.994680851, rel=1e-9)
    assert chart.ucl == pytest.approx(18.184042553, rel=1e-9)
    assert chart.lcl == pytest.approx(6.215957447, rel=1e-9)
    assert chart.mr_ucl == pytest.approx(7.35075, rel=1e-12)
    assert chart.broken == ()


def test_an_invalid_value_keeps_its_place_and_is_bridged():
    # The same series with an invalid reading after the first value: the ranges join 10 and 12
    # across it, so MR-bar, sigma and the limits are those worked by hand above.
    chart = individuals_chart(np.array([10.0, math.nan, 12.0, 11.0, 15.0, 13.0]))
    assert chart.values.size == 6
    np.testing.assert_array_equal(chart.moving_range, [np.nan, 2.0, 1.0, 4.0, 2.0])
    assert chart.ucl == pytest.approx(18.184042553, rel=1e-9)
    np.testing.assert_array_equal(moving_ranges(np.array([1.0, np.inf, 4.0])), [np.nan, 3.0])


def test_too_few_values_give_no_limits():
    chart = individuals_chart(np.array([3.0]))
    assert math.isnan(chart.sigma) and math.isnan(chart.ucl) and chart.broken == ()


# Each series breaks exactly one rule, at the index given (the point that completes it).
CASES = {
    # Western Electric rule 1 / Nelson test 1: one point beyond 3 sigma.
    BEYOND_3: ([0.5, -0.5, 0.5, -0.5, 3.5, -0.5, 0.5], [4]),
    # WE rule 2 / Nelson test 5: two of three successive points beyond 2 sigma, same side.
    TWO_OF_THREE: ([0.5, -0.5, 2.5, 0.5, 2.5, -0.5, 0.5], [4]),
    # WE rule 3 / Nelson test 6: four of five successive points beyond 1 sigma, same side.
    FOUR_OF_FIVE: ([-0.5, 1.5, 1.5, 0.5, 1.5, 1.5, -0.5], [5]),
    # WE rule 4: eight successive points on one side (Nelson's test 2 asks for nine).
    EIGHT_IN_A_ROW: ([-0.5] + [0.5] * 8 + [-0.5], [8]),
}


@pytest.mark.parametrize("rule", list(CASES))
@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_each_rule_on_a_series_that_breaks_only_it(rule, sign):
    values, where = CASES[rule]
    broken = run_rules(sign * np.array(values), 0.0, 1.0)
    assert broken == tuple((i, rule) for i in where)


def test_a_run_one_short_breaks_nothing():
    # Seven on one side, one of three beyond 2 sigma, three of five beyond 1 sigma, 3 sigma
    # exactly (the rules say beyond): nothing.
    assert run_rules(np.array([-0.5] + [0.5] * 7 + [-0.5]), 0.0, 1.0) == ()
    assert run_rules(np.array([2.5, 0.5, -0.5, 2.5]), 0.0, 1.0) == ()
    assert run_rules(np.array([1.5, 1.5, -0.5, 1.5, 0.5]), 0.0, 1.0) == ()
    assert run_rules(np.array([3.0, -3.0]), 0.0, 1.0) == ()


def test_indices_skip_invalid_values_and_the_chart_reports_them():
    values = np.array([0.5, np.nan, -0.5, 0.5, -0.5, 3.5])
    assert run_rules(values, 0.0, 1.0) == ((5, BEYOND_3),)
    # A run of eight with an invalid reading inside still counts eight valid points.
    run = np.array([-0.5, 0.5, 0.5, 0.5, np.nan, 0.5, 0.5, 0.5, 0.5, 0.5])
    assert run_rules(run, 0.0, 1.0) == ((9, EIGHT_IN_A_ROW),)


def test_the_chart_flags_a_shift_with_its_own_limits():
    # Ten points alternating about 0 (MR-bar 1, sigma 1/1.128), then a point at 10: beyond 3
    # sigma of its own chart (center 10/11, MR-bar (9·1 + 10.5)/10 = 1.95, UCL 6.09).
    values = np.array([0.5, -0.5] * 5 + [10.0])
    chart = individuals_chart(values)
    assert chart.mr_center == pytest.approx(1.95, rel=1e-12)
    assert (10, BEYOND_3) in chart.broken
