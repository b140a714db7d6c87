"""Individuals and moving-range control charts, and the run rules that read them.

An individuals chart plots each value in test order around the center line (the mean) with
control limits three within-process sigmas away; the within sigma comes from the mean moving
range of two, sigma = MR-bar / d2, and the moving-range chart's upper limit is D4 · MR-bar (its
lower limit D3 · MR-bar = 0). Constants for moving ranges of two: d2 = 1.128, D4 = 3.267,
D3 = 0 (NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2, "What are Variables Control
Charts?", table of control chart constants).

Invalid values (NaN, infinite) stay in the chart's ``values`` at their place but take no part:
the moving ranges join the valid values on either side of them (as the store's SQL does), and
the run rules read the valid values only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: d2, D3, D4 for moving ranges of two (NIST/SEMATECH e-Handbook 6.3.2).
D2, D3, D4 = 1.128, 0.0, 3.267

BEYOND_3 = "beyond 3 sigma"
TWO_OF_THREE = "2 of 3 beyond 2 sigma"
FOUR_OF_FIVE = "4 of 5 beyond 1 sigma"
EIGHT_IN_A_ROW = "8 in a row on one side"
#: The run rules in the order :func:`run_rules` applies them.
RULES = (BEYOND_3, TWO_OF_THREE, FOUR_OF_FIVE, EIGHT_IN_A_ROW)


@dataclass(frozen=True, eq=False)
class ControlChart:
    """An individuals and moving-range chart of ``values`` in test order.

    ``center`` is the mean of the valid values; ``sigma`` the within sigma MR-bar / d2;
    ``ucl`` and ``lcl`` = center ± 3 sigma; ``moving_range`` (n - 1 values) holds at i the range
    from point i + 1 back to the valid value before it (NaN where point i + 1 is invalid or has
    no valid value before it); ``mr_center`` is MR-bar and ``mr_ucl`` = D4 · MR-bar;
    ``broken`` lists (index of a point, rule it breaks) as :func:`run_rules` finds them.
    """

    values: np.ndarray
    center: float
    sigma: float
    ucl: float
    lcl: float
    moving_range: np.ndarray
    mr_center: float
    mr_ucl: float
    broken: tuple[tuple[int, str], ...]


def moving_ranges(values: np.ndarray) -> np.ndarray:
    """|x_i - x_prev| for i = 1 .. n-1, x_prev the valid value before x_i (NaN where none)."""
    x = np.asarray(values, dtype=float)
    out = np.full(max(x.size - 1, 0), np.nan)
    valid = np.flatnonzero(np.isfinite(x))
    if valid.size > 1:
        out[valid[1:] - 1] = np.abs(np.diff(x[valid]))
    return out


def individuals_chart(values: np.ndarray) -> ControlChart:
    """The individuals and moving-range chart of ``values`` (in test order); center, sigma and
    limits are NaN with fewer than two valid values."""
    x = np.asarray(values, dtype=float).ravel()
    good = x[np.isfinite(x)]
    mr = moving_ranges(x)
    ranges = mr[np.isfinite(mr)]
    center = float(good.mean()) if good.size else float("nan")
    mr_bar = float(ranges.mean()) if ranges.size else float("nan")
    sigma = mr_bar / D2
    broken = run_rules(x, center, sigma) if np.isfinite(sigma) and sigma > 0 else ()
    return ControlChart(
        values=x,
        center=center,
        sigma=sigma,
        ucl=center + 3 * sigma,
        lcl=center - 3 * sigma,
        moving_range=mr,
        mr_center=mr_bar,
        mr_ucl=D4 * mr_bar,
        broken=broken,
    )


def _k_of_n(side: np.ndarray, beyond: np.ndarray, k: int, n: int) -> np.ndarray:
    """True at i when, of the n points ending at i, at least k lie beyond on the side of
    point i, and point i is one of them."""
    hit = np.zeros(side.size, dtype=bool)
    for i in range(n - 1, side.size):
        window = slice(i - n + 1, i + 1)
        if beyond[i] and side[i] != 0:
            same = (side[window] == side[i]) & beyond[window]
            hit[i] = int(same.sum()) >= k
    return hit


def run_rules(values: np.ndarray, center: float, sigma: float) -> tuple[tuple[int, str], ...]:
    """The points of ``values`` that break a run rule, as (index, rule), by index then rule.

    A point is flagged when it completes the pattern (and, for the zone rules, is itself one of
    the points beyond); "beyond" is strictly beyond, and a point on the center line belongs to
    neither side. The rules are the zone tests of the Western Electric Statistical Quality
    Control Handbook (1956) and tests 1, 5, 6 and 2 of Nelson, "The Shewhart Control Chart -
    Tests for Special Causes", J. Quality Technology 16(4), 1984 (rule numbers from memory):

    - "beyond 3 sigma": one point beyond 3 sigma on either side (WE rule 1; Nelson test 1);
    - "2 of 3 beyond 2 sigma": two of three successive points beyond 2 sigma on the same side
      (WE rule 2; Nelson test 5);
    - "4 of 5 beyond 1 sigma": four of five successive points beyond 1 sigma on the same side
      (WE rule 3; Nelson test 6);
    - "8 in a row on one side": eight successive points on the same side of the center line
      (WE rule 4, which counts eight; Nelson's test 2 counts nine).

    Invalid values (NaN, infinite) are skipped: the rules read the valid values in order, and
    report indices into ``values``.
    """
    x = np.asarray(values, dtype=float).ravel()
    where = np.flatnonzero(np.isfinite(x))
    z = (x[where] - center) / sigma
    side = np.sign(z)
    distance = np.abs(z)
    hits = {
        BEYOND_3: distance > 3,
        TWO_OF_THREE: _k_of_n(side, distance > 2, 2, 3),
        FOUR_OF_FIVE: _k_of_n(side, distance > 1, 4, 5),
        EIGHT_IN_A_ROW: _k_of_n(side, np.ones(z.size, dtype=bool), 8, 8),
    }
    found = [(int(where[i]), rule) for rule in RULES for i in np.flatnonzero(hits[rule])]
    order = {rule: n for n, rule in enumerate(RULES)}
    return tuple(sorted(found, key=lambda item: (item[0], order[item[1]])))
