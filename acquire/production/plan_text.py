"""A checked plan in words: what a station will do with it, step by step, and the same as data.

:func:`describe_plan` gives plain lines (no markup: names are shown as written), with every
quantity in its unit via :func:`acquire.units.format_si`; :func:`plan_summary` gives plain data
in SI units for ``acquire plan check --json``.
"""

from __future__ import annotations

import math
from typing import Any

from acquire.bias.energy import CONFIRM_ABOVE, stored_energy
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
        at_zero = " at zero bias" if plan.needs_bias else ""
        lines.append(f"{step}. one list sweep{at_zero} of {count}: {listed}")
        for check in plan.checks:
            if check.frequency is not None and check.bias is None and not check.saturation:
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
    if plan.needs_bias:
        lines += bias_lines(plan, step)
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


def planned_energy(plan: TestPlan) -> float | None:
    """½·L·I² at the plan's largest bias with L the largest zero-bias Ls or Lp its limits allow
    (the high limit, else the nominal); None when no such limit gives one. Under bias a core's
    inductance falls, so this over-estimates what a conforming part stores."""
    if plan.bias.maximum is None:
        return None
    found = [
        c.limit.high if c.limit.high is not None else c.limit.nominal
        for c in plan.checks
        if c.quantity in ("Ls", "Lp") and c.bias is None and c.frequency is not None
    ]
    known = [x for x in found if x is not None and x > 0]
    if not known:
        return None
    return float(stored_energy(max(known), plan.bias.maximum))


def bias_lines(plan: TestPlan, step: int) -> list[str]:
    """The step under DC bias: levels, saturation checks, and the safety note."""
    ramp = plan.bias
    top = show(ramp.maximum or 0.0, "A")
    levels = plan.bias_levels
    lines = [
        f"{step}. under DC bias (never above {top}; ramped in steps of at most "
        f"{show(ramp.step, 'A')}, {show(ramp.dwell, 's')} after each): {len(levels)} bias "
        f"level{'s' * (len(levels) != 1)} from {show(levels[0], 'A')} up to "
        f"{show(levels[-1], 'A')}, ascending, one list sweep at each",
    ]
    for check in plan.checks:
        if check.bias is not None:
            lines.append(f"   check {_limit_line(check)}")
    for check in plan.checks:
        if check.saturation:
            assert check.frequency is not None and check.points is not None
            lines.append(
                f"   check {_limit_line(check)}: the current where Ls at "
                f"{show(check.frequency, 'Hz')} has dropped by {(check.drop or 0.0) * 100:g} % "
                f"from zero bias, on {check.points} points from 0 A to {top} (interpolated "
                f"between points; not reached: above {top})"
            )
    planned = planned_energy(plan)
    estimate = (
        "the plan's zero-bias Ls limits give no estimate" if planned is None
        else f"at most about {show(planned, 'J')} from the plan's zero-bias Ls limits"
    )  # fmt: skip
    lines += [
        "   references: open/short/load were captured at zero bias and correct the readings "
        "under bias as they are",
        "   safety: a choke carrying DC stores ½·L·I², and a current broken while it flows "
        "arcs and can harm the meter and the operator; the bias is ramped to 0 A and switched "
        "off after each unit, before every prompt for a part, and on any stop or fault. The "
        f"energy stored at {top} is known only once a unit is measured ({estimate}): the "
        "station shows it from the first unit and asks for confirmation above "
        f"{CONFIRM_ABOVE:g} J. Follow the meter and fixture makers' instructions, local codes "
        "and licensed practice",
    ]
    return lines


def _check_data(check: Check) -> dict[str, Any]:
    return {
        "key": check.key, "quantity": check.quantity, "frequency": check.frequency,
        "bias": check.bias, "drop": check.drop, "points": check.points,
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
        "bias": {"max_bias": plan.bias.maximum, "ramp_step": plan.bias.step,
                 "ramp_dwell": plan.bias.dwell, "levels": list(plan.bias_levels)},
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
