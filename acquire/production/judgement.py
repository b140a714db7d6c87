"""Judging a unit: decision rules with guard bands, statements of conformity, and bins.

The decision rule follows ILAC-G8:09/2019. The acceptance limits are the tolerance limits moved
inwards by the guard band ``w = guard_factor × U`` (U the expanded uncertainty, k = 2):
``AL = TL + w``, ``AU = TU − w`` (guarded acceptance, 4.2.2); ``guard_factor`` 0 is simple
acceptance (4.2.1), where the acceptance limits are the tolerance limits. With w = U and a
normal distribution, a value exactly at an acceptance limit lies outside the tolerance with a
probability of 2.3 % (ILAC-G8:09/2019, 4.2.2).

Statements (4.2.3 and its figure of four zones):

- binary: "pass" inside the acceptance limits (inclusive), else "fail";
- non-binary: "pass" inside the acceptance limits; "conditional pass" inside the tolerance but
  in the guard band; "conditional fail" outside the tolerance by no more than w; "fail" beyond.
  With simple acceptance (w = 0) the two conditional zones are empty.

A value that is not a number (an invalid reading) or infinite (overrange) always fails. An
unknown U (NaN or inf) with a guard band makes the band infinite: nothing can be accepted.

A unit's outcome is the worst statement of its checks; a unit that fails or conditionally
fails goes to the reject bin, any other to the first bin rule of the plan whose checks all
accept it, else to the plan's ``otherwise`` bin.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from acquire.display import UNITS
from acquire.errors import InputError
from acquire.production.conformance import (
    combined_standard,
    conformance_probability,
    expanded,
)
from acquire.production.plan import (
    CONDITIONAL_FAIL,
    CONDITIONAL_PASS,
    DC_RESISTANCE,
    ERROR,
    FAIL,
    PASS,
    REFERENCE_TEMPERATURE,
    REJECT_BIN,
    Check,
    DecisionRule,
    Limit,
    TestPlan,
)
from acquire.units import format_si

__all__ = [
    "Judged",
    "UnitJudgement",
    "acceptance_limits",
    "combined_standard",
    "conformance_probability",
    "error_judgement",
    "expanded",
    "judge_unit",
    "statement",
]

#: Statements from best to worst; a unit's outcome is the worst of its checks'.
_SEVERITY = {PASS: 0, CONDITIONAL_PASS: 1, CONDITIONAL_FAIL: 2, FAIL: 3}


def _band(U: float, rule: DecisionRule) -> float:
    """The guard band w = factor × U; infinite when U is unknown and a band is asked for."""
    factor = rule.factor
    if factor == 0:
        return 0.0
    if U < 0:
        raise InputError(f"an expanded uncertainty cannot be negative ({U})")
    if not math.isfinite(U):
        return math.inf
    return factor * U


def acceptance_limits(
    limit: Limit, U: float, rule: DecisionRule
) -> tuple[float | None, float | None]:
    """The acceptance limits ``(AL, AU)`` of ``limit`` under ``rule`` (ILAC-G8:09/2019, 4.2).

    ``AL = TL + w`` and ``AU = TU − w`` with ``w = rule.factor × U``; None stays None (an open
    side). Simple acceptance gives the tolerance limits whatever U is; an unknown U (NaN or inf)
    with a guard band gives ``AL = +inf`` and ``AU = −inf``. ``AL > AU`` means the acceptance
    zone is empty. A negative U raises :class:`InputError`.
    """
    w = _band(U, rule)
    low = None if limit.low is None else limit.low + w
    high = None if limit.high is None else limit.high - w
    return low, high


def _zone(value: float, U: float, limit: Limit, rule: DecisionRule) -> tuple[str, float, float]:
    """The statement, and the acceptance limits applied as floats (±inf for an open side)."""
    w = _band(U, rule)
    tl = -math.inf if limit.low is None else limit.low
    tu = math.inf if limit.high is None else limit.high
    al = tl + w if limit.low is not None else tl
    au = tu - w if limit.high is not None else tu
    if not math.isfinite(value):
        return FAIL, al, au
    if al <= value <= au:
        return PASS, al, au
    if rule.binary:
        return FAIL, al, au
    if tl <= value <= tu:
        return CONDITIONAL_PASS, al, au
    beyond = tl - value if value < tl else value - tu
    return (CONDITIONAL_FAIL if beyond <= w else FAIL), al, au


def statement(value: float, U: float, limit: Limit, rule: DecisionRule) -> str:
    """The statement of conformity of ``value`` (expanded uncertainty ``U``, k = 2).

    One of "pass" and "fail" for a binary rule; for a non-binary rule also "conditional pass"
    and "conditional fail" (the four zones of ILAC-G8:09/2019, 4.2.3). Bounds are inclusive.
    """
    return _zone(value, U, limit, rule)[0]


def _unit_of(check: Check) -> str:
    if check.unit:
        return check.unit
    return "Ω" if check.quantity == DC_RESISTANCE else UNITS.get(check.quantity, "")


def _short(value: float, unit: str) -> str:
    """An SI-prefixed value without trailing zeros: ``10 kHz``, ``1.5 kHz``."""
    text = format_si(value, unit)
    number, _, rest = text.partition(" ")
    if "." in number:
        number = number.rstrip("0").rstrip(".")
    return f"{number} {rest}".rstrip()


@dataclass(frozen=True)
class Judged:
    """One check's judgement: the value and its U (k = 2, NaN unknown), the acceptance limits
    actually applied (None an open side), the statement, and the conformance probability
    (JCGM 106:2012; NaN when U is unknown or the value is not a finite number)."""

    check: Check
    value: float
    uncertainty: float
    low: float | None
    high: float | None
    verdict: str
    probability: float

    @property
    def name(self) -> str:
        """The check as people read it: ``"Ls @ 10 kHz"``, ``"Rdc (20 °C)"``,
        ``"Ls @ 100 kHz, 3 A bias"``, ``"Isat20% @ 100 kHz"``."""
        c = self.check
        if c.frequency is None:
            if c.quantity == DC_RESISTANCE:
                return f"{c.quantity} ({REFERENCE_TEMPERATURE:g} °C)"
            return c.quantity
        name = f"{c.name} @ {_short(c.frequency, 'Hz')}"
        return name if c.bias is None else f"{name}, {c.bias:g} A bias"

    def describe(self) -> str:
        """One plain line: ``"Ls @ 10 kHz 338.2 µH below 339.5 µH (low limit)"``."""
        unit = _unit_of(self.check)
        v = self.value
        if math.isnan(v):
            return f"{self.name}: no valid reading"
        if math.isinf(v) and self.check.saturation:
            return f"{self.name}: the drop was not reached up to the plan's largest bias"
        if math.isinf(v):
            return f"{self.name}: overrange"

        def si(x: float) -> str:
            return format_si(x, unit)

        tol = self.check.limit
        head = f"{self.name} {si(v)}"
        side = self._side()
        if side is None:
            return f"{head} {self._within(si)}"
        tl_or_tu = tol.low if side == "low" else tol.high
        applied = self.low if side == "low" else self.high
        assert tl_or_tu is not None and applied is not None
        w = abs(applied - tl_or_tu)
        if math.isinf(w):
            return f"{head} not accepted: its uncertainty is unknown, so no guard band can be set"
        where = "below" if side == "low" else "above"
        if self.verdict == CONDITIONAL_PASS:
            return (
                f"{head} inside the {side} limit {si(tl_or_tu)} but in its guard band "
                f"{si(w)} (conditional pass)"
            )
        if self.verdict == CONDITIONAL_FAIL:
            return (
                f"{head} {where} the {side} limit {si(tl_or_tu)} by less than the guard band "
                f"{si(w)} (conditional fail)"
            )
        if w == 0:
            return f"{head} {where} {si(applied)} ({side} limit)"
        return f"{head} {where} {si(applied)} ({side} limit {si(tl_or_tu)} with guard band {si(w)})"

    def _side(self) -> str | None:
        """Which acceptance limit the value is beyond ("low", "high"), None when inside both."""
        if self.low is not None and self.value < self.low:
            return "low"
        if self.high is not None and self.value > self.high:
            return "high"
        return None

    def _within(self, si: Callable[[float], str]) -> str:
        if self.low is not None and self.high is not None:
            return f"within {si(self.low)} to {si(self.high)}"
        if self.low is not None:
            return f"at or above {si(self.low)} (low limit)"
        if self.high is not None:
            return f"at or below {si(self.high)} (high limit)"
        return "(no limits)"


@dataclass(frozen=True)
class UnitJudgement:
    """A unit's outcome ("pass", "conditional pass", "conditional fail", "fail" or "error"),
    its bin ("" for an error), and the judgement of every check of the plan, in plan order."""

    outcome: str
    bin: str
    judged: tuple[Judged, ...]

    @property
    def failing(self) -> tuple[Judged, ...]:
        """The checks whose statement is neither "pass" nor "conditional pass"."""
        return tuple(j for j in self.judged if j.verdict not in (PASS, CONDITIONAL_PASS))


def _reading(values: Mapping[str, tuple[float, float]], check: Check) -> tuple[float, float]:
    try:
        value, U = values[check.key]
    except KeyError:
        raise InputError(
            f"no measured value for check {check.key}; measure every check of the plan"
        ) from None
    return float(value), (math.nan if U is None else float(U))


def _judge(check: Check, value: float, U: float, rule: DecisionRule) -> Judged:
    verdict, al, au = _zone(value, U, check.limit, rule)
    lim = check.limit
    if math.isfinite(value) and math.isfinite(U):
        probability = float(conformance_probability(value, U / 2.0, lim.low, lim.high))
    else:
        probability = math.nan
    return Judged(
        check=check,
        value=value,
        uncertainty=U,
        low=None if lim.low is None else al,
        high=None if lim.high is None else au,
        verdict=verdict,
        probability=probability,
    )


def judge_unit(plan: TestPlan, values: Mapping[str, tuple[float, float]]) -> UnitJudgement:
    """Judge one unit: ``values`` maps each :attr:`Check.key` to (value SI, U with k = 2).

    A check without a value raises :class:`InputError`. The outcome is the worst statement; the
    bin is :data:`REJECT_BIN` for a fail or conditional fail, else the first of ``plan.bins``
    whose checks all pass (or conditionally pass, under a non-binary rule), judged with the
    plan's decision rule on the value and U of the plan check with the same key, else
    ``plan.otherwise_bin``.
    """
    rule = plan.decision
    judged = tuple(_judge(c, *_reading(values, c), rule) for c in plan.checks)
    worst = max((_SEVERITY[j.verdict] for j in judged), default=0)
    outcome = (PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL)[worst]
    if outcome in (FAIL, CONDITIONAL_FAIL):
        return UnitJudgement(outcome, REJECT_BIN, judged)
    return UnitJudgement(outcome, _bin(plan, values), judged)


def _bin(plan: TestPlan, values: Mapping[str, tuple[float, float]]) -> str:
    rule = plan.decision
    accepted = (PASS,) if rule.binary else (PASS, CONDITIONAL_PASS)
    for bin_rule in plan.bins:
        if all(_zone(*_reading(values, c), c.limit, rule)[0] in accepted for c in bin_rule.checks):
            return bin_rule.name
    return plan.otherwise_bin


def error_judgement(plan: TestPlan) -> UnitJudgement:
    """The judgement of a unit whose measurement failed on the meter: outcome "error", no bin."""
    return UnitJudgement(ERROR, "", ())
