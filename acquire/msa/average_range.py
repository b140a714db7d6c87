"""The crossed gauge R&R study by the average-and-range method, and its range and average charts.

The method of the Automotive Industry Action Group's Measurement Systems Analysis reference
manual (4th edition, 2010; chapter III, section B, from memory), on ``y[part, operator, trial]``
(``n`` parts, ``o`` operators, ``r`` trials)::

    R̿       = mean over operators and parts of the range of each part's r trials
    EV      = R̿ · K1                                   (repeatability)
    X̄_DIFF  = largest operator average − smallest operator average
    AV      = √( (X̄_DIFF · K2)² − EV² / (n·r) )         (reproducibility; 0 if negative)
    R_p     = range of the part averages
    PV      = R_p · K3                                  (part variation)
    GRR     = √(EV² + AV²),    TV = √(GRR² + PV²)

K1, K2 and K3 are 1/d2* for the number of trials, operators and parts, as the manual tabulates
them (from memory); K1 holds only for 2 or 3 trials, K2 for 2 or 3 operators, K3 for 2 to 10
parts: outside them the method is not given (the ANOVA method still is). The method does not
separate the operator-by-part interaction.

The range chart plots each part's range per operator against R̄ with UCL = D4·R̄ and LCL =
D3·R̄; the average chart plots each part's average per operator against the grand mean X̿ with
limits X̿ ± A2·R̄. A2, D3 and D4 by subgroup size (the trials) are the control chart constants
of the NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: K1 by trials, K2 by operators, K3 by parts (AIAG MSA manual, 4th edition; from memory).
K1: dict[int, float] = {2: 0.8862, 3: 0.5908}
K2: dict[int, float] = {2: 0.7071, 3: 0.5231}
K3: dict[int, float] = {
    2: 0.7071, 3: 0.5231, 4: 0.4467, 5: 0.4030, 6: 0.3742, 7: 0.3534, 8: 0.3375, 9: 0.3249,
    10: 0.3146,
}  # fmt: skip

#: Control chart constants by subgroup size (NIST/SEMATECH e-Handbook 6.3.2; from memory).
A2: dict[int, float] = {
    2: 1.880, 3: 1.023, 4: 0.729, 5: 0.577, 6: 0.483, 7: 0.419, 8: 0.373, 9: 0.337, 10: 0.308,
}  # fmt: skip
D3: dict[int, float] = {
    2: 0.0, 3: 0.0, 4: 0.0, 5: 0.0, 6: 0.0, 7: 0.076, 8: 0.136, 9: 0.184, 10: 0.223,
}  # fmt: skip
D4: dict[int, float] = {
    2: 3.267, 3: 2.574, 4: 2.282, 5: 2.114, 6: 2.004, 7: 1.924, 8: 1.864, 9: 1.816, 10: 1.777,
}  # fmt: skip


@dataclass(frozen=True)
class AverageRange:
    """The average-and-range estimates (standard deviations, the values' unit)."""

    repeatability: float
    reproducibility: float
    part_variation: float
    mean_range: float
    operator_difference: float
    part_range: float

    @property
    def grr(self) -> float:
        return math.hypot(self.repeatability, self.reproducibility)

    @property
    def total_variation(self) -> float:
        return math.hypot(self.grr, self.part_variation)

    @property
    def percent_grr_total(self) -> float:
        tv = self.total_variation
        return 100.0 * self.grr / tv if tv > 0 else math.nan


def not_covered(parts: int, operators: int, trials: int) -> str | None:
    """Why the method's constants do not cover this design, or None when they do."""
    for count, table, what in ((trials, K1, "trials"), (operators, K2, "operators")):
        if count not in table:
            return f"K{1 if what == 'trials' else 2} is tabulated for 2 or 3 {what} only"
    if parts not in K3:
        return "K3 is tabulated for 2 to 10 parts only"
    return None


def average_range(y: np.ndarray) -> AverageRange | None:
    """The method on ``y[part, operator, trial]``; None where :func:`not_covered` says why."""
    y = np.asarray(y, dtype=float)
    n, o, r = y.shape
    if not_covered(n, o, r) is not None:
        return None
    ranges = np.ptp(y, axis=2)
    r_bar = float(ranges.mean())
    ev = r_bar * K1[r]
    operator_means = y.mean(axis=(0, 2))
    x_diff = float(operator_means.max() - operator_means.min())
    av2 = (x_diff * K2[o]) ** 2 - ev**2 / (n * r)
    part_means = y.mean(axis=(1, 2))
    rp = float(part_means.max() - part_means.min())
    return AverageRange(
        repeatability=ev,
        reproducibility=math.sqrt(max(0.0, av2)),
        part_variation=rp * K3[n],
        mean_range=r_bar,
        operator_difference=x_diff,
        part_range=rp,
    )


@dataclass(frozen=True)
class ChartLimits:
    """A chart's points (``points[part, operator]``), center line and control limits."""

    points: np.ndarray
    center: float
    lower: float
    upper: float


def range_chart(y: np.ndarray) -> ChartLimits | None:
    """Each part's range per operator, R̄, D3·R̄ and D4·R̄ (None beyond 10 trials)."""
    r = y.shape[2]
    if r not in D4:
        return None
    ranges = np.ptp(y, axis=2)
    r_bar = float(ranges.mean())
    return ChartLimits(ranges, r_bar, D3[r] * r_bar, D4[r] * r_bar)


def average_chart(y: np.ndarray) -> ChartLimits | None:
    """Each part's average per operator, X̿ and X̿ ∓ A2·R̄ (None beyond 10 trials)."""
    r = y.shape[2]
    if r not in A2:
        return None
    r_bar = float(np.ptp(y, axis=2).mean())
    grand = float(y.mean())
    return ChartLimits(y.mean(axis=2), grand, grand - A2[r] * r_bar, grand + A2[r] * r_bar)
