"""A checked plan in words: what a station will do with it, step by step, and the same as data.

:func:`describe_plan` gives plain lines (no markup: names are shown as written), with every
quantity in its unit via :func:`acquire.units.format_si`; :func:`plan_summary` gives plain data
in SI units for ``acquire plan check --json``.
"""

from __future__ import annotations

import math
from typing import Any

from acquire.production.plan import REFERENCE_TEMPERATURE, REJECT_BIN, Check, TestPlan
from acquire.production.plan_values import check_name, show


def _limit_line(check: Check) -> str:
    limit, unit = check.limit, check.unit
    if limit.nominal is not None and limit.low is not None and limit.high is not None:
        span = f" (from {show(limit.low, unit)} to {show(limit.high, unit)})"
        return f"{check_name(check)}: {limit.text}{span}"
    return f"{check_name(check)}: {limit.text}"


def _hours(seconds: float) -> str:
    return f"{seconds / 3600:g} h" if seconds >= 3600 else f"{seconds / 60:g} min"


def _normal_cdf(x: float) -> float:
    return 0.5 * (1.0 + math.erf(x / math.sqrt(2.0)))


def decision_words(plan: TestPlan) -> list[str]:
    """The decision rule in the words of ILAC-G8:09/2019."""
    rule = plan.decision
    if rule.factor > 0:
        risk = 1.0 - _normal_cdf(2.0 * rule.factor)  # U = 2u: the edge lies w/u = 2f from TL
        lines = [
            f"guarded acceptance (ILAC-G8:09/2019): guard band w = {rule.factor:g} × U, U the "
            "expanded uncertainty (k = 2); a value is accepted only inside the tolerance "
            "narrowed by w at each end",
            f"a unit accepted at an acceptance limit lies outside the tolerance with probability "
            f"{100 * risk:.2g} % at most (normal distribution)",
        ]
    else:
        lines = [
            "simple acceptance (ILAC-G8:09/2019, w = 0): the tolerance limits are the "
            "acceptance limits; a value at a limit conforms with about 50 % probability"
        ]
    if rule.binary:
        lines.append("binary statement: each check, and the unit, pass or fail")
    elif rule.factor > 0:
        lines.append(
            "non-binary statement: pass (inside the acceptance limits), conditional pass "
            "(inside the tolerance, in the guard band), conditional fail (outside the "
            "tolerance by less than w), fail (beyond); the unit takes its worst"
        )
    else:
        lines.append("non-binary statement, but with no guard band only pass or fail")
    return lines


def describe_plan(plan: TestPlan) -> list[str]:
    """Plain lines, step by step, of what a station will do with ``plan``."""
    lines = [f"plan        {plan.title}" + (f" (part {plan.part})" if plan.part else "")]
    lines.append(f"file        {plan.source or '-'} (SHA-256 {plan.hash[:12]}…)")
    lines += [f"notes       {line}" for line in plan.notes.strip().splitlines()]
    fixture = f'fixture "{plan.fixture}"' if plan.fixture else "the station's fixture"
    age = plan.max_reference_age
    lines.append(
        f"1. references: open/short/load references of {fixture}"
        + (f", none older than {_hours(age)}" if age is not None else "")
    )
    m = plan.meter
    level = show(m.level, "V") if m.level is not None else "as the meter is"
    speed = m.speed or "as the meter is"
    averaging = str(m.averaging) if m.averaging is not None else "as the meter is"
    reads = "1 reading" if m.repeats == 1 else f"{m.repeats} readings"
    lines.append(
        f"2. meter: level {level}, speed {speed}, averaging {averaging}, {reads} per frequency"
    )
    step = 3
    f = plan.frequencies
    if len(f):
        listed = ", ".join(show(x, "Hz") for x in f)
        count = "1 frequency" if len(f) == 1 else f"{len(f)} frequencies"
        lines.append(f"{step}. one list sweep of {count}: {listed}")
        for check in plan.checks:
            if check.frequency is not None:
                lines.append(f"   check {_limit_line(check)}")
        step += 1
    if plan.needs_dc_resistance:
        t = plan.temperature
        source = (
            f"fixed at {show(t.value or 0.0, '°C')}" if t.source == "fixed"
            else "typed when each lot starts"
        )  # fmt: skip
        lines.append(
            f"{step}. DC resistance of the winding, corrected to {REFERENCE_TEMPERATURE:g} °C "
            f"for copper; winding temperature {source} (± {t.half_width:g} K)"
        )
        for check in plan.checks:
            if check.frequency is None:
                lines.append(f"   check {_limit_line(check)}")
        step += 1
    words = decision_words(plan)
    lines.append(f"{step}. decision: {words[0]}")
    lines += [f"   {w}" for w in words[1:]]
    step += 1
    lines.append(f"{step}. bins (the first whose checks all pass wins):")
    for i, rule in enumerate(plan.bins, 1):
        lines.append(f'   bin {i} "{rule.name}": ' + "; ".join(_limit_line(c) for c in rule.checks))
    lines.append(
        f'   otherwise a passing unit goes to "{plan.otherwise_bin}"; a failing one to '
        f'"{REJECT_BIN}"; a meter error gets no bin'
    )
    step += 1
    seen = {"refuse": "is refused (a duplicate label)", "retest": "is measured again"}
    lines.append(
        f"{step}. serial: must match {plan.serial.pattern} in full; a serial whose "
        f"latest attempt passed {seen.get(plan.serial.seen_before, '?')}"
    )
    r = plan.retest
    after = [w for w, on in (("a fail", r.on_fail), ("a meter error", r.on_error)) if on]
    again = f"after {' or '.join(after)} a unit may be tested again" if after else "no retests"
    lines.append(
        f"{step + 1}. retest: at most {r.attempts} attempt{'s' * (r.attempts > 1)} "
        f"per serial; {again}; every attempt is stored"
    )
    return lines


def _check_data(check: Check) -> dict[str, Any]:
    return {
        "key": check.key, "quantity": check.quantity, "frequency": check.frequency,
        "unit": check.unit, "low": check.limit.low, "high": check.limit.high,
        "nominal": check.limit.nominal, "limit": check.limit.text,
    }  # fmt: skip


def plan_summary(plan: TestPlan) -> dict[str, Any]:
    """The checked plan as plain data (SI units), for ``acquire plan check --json``."""
    t, d = plan.temperature, plan.decision
    return {
        "name": plan.name, "version": plan.version, "part": plan.part, "notes": plan.notes,
        "source": plan.source, "hash": plan.hash, "fixture": plan.fixture,
        "max_reference_age_s": plan.max_reference_age,
        "meter": {"level": plan.meter.level, "speed": plan.meter.speed,
                  "averaging": plan.meter.averaging, "repeats": plan.meter.repeats},
        "frequencies": [float(x) for x in plan.frequencies],
        "checks": [_check_data(c) for c in plan.checks],
        "temperature": {"source": t.source, "value": t.value, "half_width": t.half_width},
        "decision": {"guarded": d.guarded, "guard_factor": d.factor, "binary": d.binary},
        "bins": [{"name": b.name, "checks": [_check_data(c) for c in b.checks]}
                 for b in plan.bins],
        "otherwise_bin": plan.otherwise_bin,
        "serial": {"pattern": plan.serial.pattern, "seen_before": plan.serial.seen_before},
        "retest": {"attempts": plan.retest.attempts, "on_fail": plan.retest.on_fail,
                   "on_error": plan.retest.on_error},
        "steps": describe_plan(plan),
    }  # fmt: skip
