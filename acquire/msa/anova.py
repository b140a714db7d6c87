"""The crossed gauge R&R study by the ANOVA method.

Every part is measured by every operator the same number of times (``r`` trials): a balanced,
crossed design of ``p`` parts, ``o`` operators and ``r ≥ 2`` trials, given as an array
``y[part, operator, trial]``. The method is the one the Automotive Industry Action Group's
Measurement Systems Analysis reference manual (4th edition, 2010; chapter III, section B, from
memory) sets out: a two-way analysis of variance with the operator-by-part interaction, in which
parts and operators are random effects.

Sums of squares (ȳ the grand mean, ȳᵢ.. a part's mean, ȳ.ⱼ. an operator's, ȳᵢⱼ. a cell's)::

    SS_part      = o·r · Σᵢ (ȳᵢ.. − ȳ)²                        df = p − 1
    SS_operator  = p·r · Σⱼ (ȳ.ⱼ. − ȳ)²                        df = o − 1
    SS_part×op   = r · Σᵢⱼ (ȳᵢⱼ. − ȳᵢ.. − ȳ.ⱼ. + ȳ)²           df = (p − 1)(o − 1)
    SS_error     = Σᵢⱼₖ (yᵢⱼₖ − ȳᵢⱼ.)²                         df = p·o·(r − 1)

and MS = SS / df. With parts and operators random, the interaction is tested against the
error (F = MS_part×op / MS_error) and parts and operators against the interaction
(F = MS_part / MS_part×op, F = MS_operator / MS_part×op), as the manual's ANOVA table does.
p-values are the upper tail of Snedecor's F (:func:`scipy.stats.f.sf`).

Variance components (expected mean squares of the random model), each truncated at zero::

    repeatability   σ²_e   = MS_error
    interaction     σ²_po  = max(0, (MS_part×op − MS_error) / r)
    operator        σ²_o   = max(0, (MS_operator − MS_part×op) / (p·r))
    part            σ²_p   = max(0, (MS_part − MS_part×op) / (o·r))

**Pooling.** When the interaction is not significant its sum of squares and degrees of freedom
are pooled into the error (MS_error' = (SS_part×op + SS_error) / (df_part×op + df_error)), the
interaction component is zero, parts and operators are tested against the pooled error, and
σ²_o = max(0, (MS_operator − MS_error') / (p·r)), σ²_p = max(0, (MS_part − MS_error') / (o·r)).
The rule used here pools when the interaction's p-value exceeds 0.25: common practice, no
published source (the manual leaves the level to the analyst).

Standard deviations: EV (repeatability) = σ_e; AV (reproducibility) = √(σ²_o + σ²_po);
GRR = √(EV² + AV²); PV (part variation) = σ_p; TV (total variation) = √(GRR² + PV²).
%GRR of the total variation = 100·GRR/TV (a ratio of standard deviations); %GRR of the tolerance
= 100·k·GRR / (USL − LSL) with k = 6 (six standard deviations span the measurement spread: the
manual's 4th edition, from memory; 5.15 was used before, and may be chosen); %contribution =
100·σ²/σ²_TV. The number of distinct categories ndc = ⌊1.41·PV/GRR⌋ (the manual; 1.41 ≈ √2).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from acquire.errors import InputError

#: Pool the interaction into the error when its p-value is above this (common practice, no
#: published source).
POOL_ABOVE = 0.25
#: Standard deviations the measurement spread spans for %tolerance (the manual, 4th edition,
#: from memory); 5.15 (99 % of a normal distribution) was the earlier convention.
SPREAD_SIGMAS = 6.0
#: ndc = floor(NDC_FACTOR · PV / GRR) (the manual; √2 rounded as it prints it).
NDC_FACTOR = 1.41

PART, OPERATOR, INTERACTION, ERROR, TOTAL = (
    "part", "operator", "part x operator", "repeatability", "total",
)  # fmt: skip


@dataclass(frozen=True)
class AnovaRow:
    """One line of an ANOVA table; ``f`` and ``p`` are NaN where no test is made."""

    source: str
    ss: float
    df: int
    ms: float
    f: float
    p: float


@dataclass(frozen=True)
class Components:
    """Variance components (unit²) and what follows from them (standard deviations, unit)."""

    repeatability_var: float
    operator_var: float
    interaction_var: float
    part_var: float

    @property
    def reproducibility_var(self) -> float:
        return self.operator_var + self.interaction_var

    @property
    def grr_var(self) -> float:
        return self.repeatability_var + self.reproducibility_var

    @property
    def total_var(self) -> float:
        return self.grr_var + self.part_var

    @property
    def repeatability(self) -> float:
        return math.sqrt(self.repeatability_var)

    @property
    def reproducibility(self) -> float:
        return math.sqrt(self.reproducibility_var)

    @property
    def operator(self) -> float:
        return math.sqrt(self.operator_var)

    @property
    def interaction(self) -> float:
        return math.sqrt(self.interaction_var)

    @property
    def grr(self) -> float:
        return math.sqrt(self.grr_var)

    @property
    def part_variation(self) -> float:
        return math.sqrt(self.part_var)

    @property
    def total_variation(self) -> float:
        return math.sqrt(self.total_var)


@dataclass(frozen=True)
class AnovaStudy:
    """The ANOVA method's result for one crossed study.

    ``full`` is the table with the interaction; ``pooled`` the table with the interaction pooled
    into the error (None when it was kept); ``components`` come from the table used.
    """

    parts: int
    operators: int
    trials: int
    full: tuple[AnovaRow, ...]
    pooled: tuple[AnovaRow, ...] | None
    pool_above: float
    components: Components

    @property
    def interaction_p(self) -> float:
        return self.full[2].p

    @property
    def table(self) -> tuple[AnovaRow, ...]:
        """The table the components come from."""
        return self.pooled if self.pooled is not None else self.full

    def percent_total(self, sigma: float) -> float:
        """100·σ/TV (NaN when TV is 0)."""
        tv = self.components.total_variation
        return 100.0 * sigma / tv if tv > 0 else math.nan

    def percent_contribution(self, variance: float) -> float:
        """100·σ²/σ²_TV (NaN when TV is 0)."""
        total = self.components.total_var
        return 100.0 * variance / total if total > 0 else math.nan

    @property
    def percent_grr_total(self) -> float:
        return self.percent_total(self.components.grr)

    @property
    def ndc(self) -> int | None:
        """⌊1.41·PV/GRR⌋, or None when GRR is 0 (no measurement spread to divide by)."""
        c = self.components
        return math.floor(NDC_FACTOR * c.part_variation / c.grr) if c.grr > 0 else None


def percent_tolerance(sigma: float, tolerance: float | None, k: float = SPREAD_SIGMAS) -> float:
    """100·k·σ / tolerance (the tolerance is the width USL − LSL); NaN without a tolerance."""
    if tolerance is None:
        return math.nan
    return 100.0 * k * sigma / tolerance


def check_design(y: np.ndarray) -> None:
    """Refuse an array that is not a usable crossed design: (parts, operators, trials), at least
    2 of each, every value finite."""
    if y.ndim != 3:
        raise InputError("a crossed study needs values by part, operator and trial")
    p, o, r = y.shape
    for count, need in ((p, "parts"), (o, "operators"), (r, "trials")):
        if count < 2:
            raise InputError(f"a gauge R&R study needs at least 2 {need} (it has {count})")
    if not np.all(np.isfinite(y)):
        raise InputError("every value of a gauge R&R study must be a finite number")


def _row(source: str, ss: float, df: int, over: tuple[float, int] | None) -> AnovaRow:
    from scipy.stats import f as f_dist

    ms = ss / df
    if over is None:
        return AnovaRow(source, ss, df, ms, math.nan, math.nan)
    ms_over, df_over = over
    # with no scatter to test against, any effect is certain and none is undefined
    ratio = ms / ms_over if ms_over > 0 else (math.inf if ms > 0 else math.nan)
    return AnovaRow(source, ss, df, ms, ratio, float(f_dist.sf(ratio, df, df_over)))


def sums_of_squares(y: np.ndarray) -> dict[str, float]:
    """SS of part, operator, interaction, error and total of ``y[part, operator, trial]``."""
    p, o, r = y.shape
    grand = y.mean()
    part = y.mean(axis=(1, 2))
    oper = y.mean(axis=(0, 2))
    cell = y.mean(axis=2)
    inter = cell - part[:, None] - oper[None, :] + grand
    return {
        PART: float(o * r * np.sum((part - grand) ** 2)),
        OPERATOR: float(p * r * np.sum((oper - grand) ** 2)),
        INTERACTION: float(r * np.sum(inter**2)),
        ERROR: float(np.sum((y - cell[:, :, None]) ** 2)),
        TOTAL: float(np.sum((y - grand) ** 2)),
    }


def crossed_anova(y: np.ndarray, pool_above: float = POOL_ABOVE) -> AnovaStudy:
    """The ANOVA method on ``y[part, operator, trial]`` (see the module's description).

    ``pool_above``: pool the interaction into the error when its p-value is above it (0.25,
    common practice); 1 never pools, 0 pools unless the interaction's p-value is 0.
    """
    y = np.asarray(y, dtype=float)
    check_design(y)
    p, o, r = y.shape
    ss = sums_of_squares(y)
    df = {PART: p - 1, OPERATOR: o - 1, INTERACTION: (p - 1) * (o - 1), ERROR: p * o * (r - 1)}
    df[TOTAL] = p * o * r - 1
    ms_e = ss[ERROR] / df[ERROR]
    ms_po = ss[INTERACTION] / df[INTERACTION]
    over_po = (ms_po, df[INTERACTION])
    full = (
        _row(PART, ss[PART], df[PART], over_po),
        _row(OPERATOR, ss[OPERATOR], df[OPERATOR], over_po),
        _row(INTERACTION, ss[INTERACTION], df[INTERACTION], (ms_e, df[ERROR])),
        _row(ERROR, ss[ERROR], df[ERROR], None),
        _row(TOTAL, ss[TOTAL], df[TOTAL], None),
    )
    interaction_p = full[2].p
    pool = math.isfinite(interaction_p) and interaction_p > pool_above
    if not pool:
        components = Components(
            repeatability_var=ms_e,
            operator_var=max(0.0, (full[1].ms - ms_po) / (p * r)),
            interaction_var=max(0.0, (ms_po - ms_e) / r),
            part_var=max(0.0, (full[0].ms - ms_po) / (o * r)),
        )
        return AnovaStudy(p, o, r, full, None, pool_above, components)
    ss_e = ss[INTERACTION] + ss[ERROR]
    df_e = df[INTERACTION] + df[ERROR]
    ms_pooled = ss_e / df_e
    over = (ms_pooled, df_e)
    pooled = (
        _row(PART, ss[PART], df[PART], over),
        _row(OPERATOR, ss[OPERATOR], df[OPERATOR], over),
        _row(ERROR, ss_e, df_e, None),
        _row(TOTAL, ss[TOTAL], df[TOTAL], None),
    )
    components = Components(
        repeatability_var=ms_pooled,
        operator_var=max(0.0, (full[1].ms - ms_pooled) / (p * r)),
        interaction_var=0.0,
        part_var=max(0.0, (full[0].ms - ms_pooled) / (o * r)),
    )
    return AnovaStudy(p, o, r, full, pooled, pool_above, components)


def pooling_text(study: AnovaStudy) -> str:
    """One sentence: was the interaction pooled, and by what rule."""
    p = study.interaction_p
    rule = (
        f"the interaction is pooled into repeatability when its p-value is above "
        f"{study.pool_above:g} (common practice, no published source)"
    )
    shown = "undefined" if math.isnan(p) else f"{p:.3g}"
    if study.pooled is not None:
        return f"interaction p = {shown}: pooled; {rule}"
    return f"interaction p = {shown}: kept; {rule}"
