"""Guided capture of open, short and load references on a fixture, and the checks on using them.

For each standard the operator is told what to do to the fixture and asked to confirm; the
meter then sweeps the plan ``repeats`` times, the mean reading (with the Type A standard
uncertainty of that mean) is added to the set and the set is judged with
:meth:`ReferenceSet.check`. A reading that brings a new error (a "short" that reads the same as
the open, a load that reads as another value) is refused, with what the readings looked like,
and the operator is offered another try; warnings are shown and the reading is kept. The
operator is an object with three methods, so a terminal (:class:`ConsoleOperator`), a test or
the demo can answer the prompts.

:func:`reference_warnings` says what to beware of when a stored set is used for a sweep: its age,
and whether it was captured on another meter or fixture; :func:`dut_warnings` what the set's
checks say about the part measured through it (whether the readings look like an empty fixture
is :mod:`acquire.open_fixture`'s question).
"""

from __future__ import annotations

import dataclasses
from collections import Counter
from collections.abc import Callable, Sequence
from datetime import UTC, datetime
from typing import Any, Protocol

import numpy as np

from acquire.compensation import STANDARDS, ReferenceSet
from acquire.display import format_duration
from acquire.errors import CompensationError
from acquire.plan import FrequencyPlan, check_range
from acquire.uncertainty.repeats import mean_of_repeats
from acquire.units import format_si

INSTRUCTIONS = {
    "open": (
        "OPEN: leave the fixture empty, its contacts apart by about the width of a part, and "
        "keep hands and tools clear of it."
    ),
    "short": (
        "SHORT: close the fixture with its shorting bar, or clip the contacts together, right "
        "where the part sits."
    ),
    "load": "LOAD: put the load standard{value} in the fixture where the part sits.",
}

SAFETY = (
    "Safety: measure only parts that are discharged and not connected to any supply; a coil that "
    "carried DC bias stores energy and can give a sharp kick when the current is broken. A "
    "mains-powered fixture or bias supply must be installed and checked as local codes, the meter "
    "maker's instructions and licensed practice require."
)


class Operator(Protocol):
    """Whoever handles the fixture during a capture."""

    def tell(self, text: str) -> None:
        """Show a line of information."""

    def ready(self, standard: str, instruction: str) -> bool:
        """Show ``instruction``; True once the fixture is set up, False to stop the capture."""

    def retry(self, standard: str, problems: list[str]) -> bool:
        """Show why the reading was refused; True to measure the standard again."""


class ConsoleOperator:
    """An operator at a terminal: prompts through ``ask`` (default :func:`input`), tells through
    ``say`` (default :func:`print`). Typing ``q`` stops the capture."""

    def __init__(
        self,
        ask: Callable[[str], str] | None = None,
        say: Callable[[str], None] | None = None,
    ) -> None:
        self.ask = ask or (lambda prompt: input(prompt))
        self.say = say or print

    def tell(self, text: str) -> None:
        self.say(text)

    def ready(self, standard: str, instruction: str) -> bool:
        self.say(instruction)
        return self._go(f"Press Enter to measure the {standard}, or type q to stop: ")

    def retry(self, standard: str, problems: list[str]) -> bool:
        self.say(f"The {standard} reading was refused:")
        for p in problems:
            self.say(f"  - {p}")
        return self._go(
            f"Fix the fixture, then press Enter to measure the {standard} again, or q: "
        )

    def _go(self, prompt: str) -> bool:
        try:
            answer = self.ask(prompt)
        except EOFError:
            return False
        return answer.strip().lower() not in ("q", "quit", "stop", "n", "no")


def _new_findings(before: ReferenceSet | None, after: ReferenceSet, severity: str) -> list[str]:
    """Findings of ``severity`` on ``after`` that ``before`` did not have (messages)."""
    old: Counter[tuple[str, str]] = Counter()
    if before is not None:
        old = Counter((f.standard, f.message) for f in before.check() if f.severity == severity)
    out = []
    for f in after.check():
        key = (f.standard, f.message)
        if f.severity != severity:
            continue
        if old[key]:
            old[key] -= 1
            continue
        out.append(f"{f.standard}: {f.message}")
    return out


def _load_values(load_true: Any, f: np.ndarray) -> np.ndarray:
    if load_true is None:
        raise CompensationError(
            "a load reference needs the load standard's true impedance; give its value "
            "(for example --load-value 100ohm)"
        )
    values = load_true(f) if callable(load_true) else load_true
    z = np.broadcast_to(np.asarray(values, dtype=complex), f.shape).copy()
    if not np.all(np.isfinite(z)) or np.any(z == 0):
        raise CompensationError("the load standard's true impedance must be finite and non-zero")
    return z


def capture_references(
    meter: Any,
    plan: FrequencyPlan,
    operator: Operator,
    standards: Sequence[str] = STANDARDS,
    load_true: Any = None,
    fixture: str = "",
    meter_name: str = "",
    temperature: float | None = None,
    notes: str = "",
    attempts: int = 3,
    on_points: Callable | None = None,
    repeats: int = 3,
) -> ReferenceSet:
    """Capture ``standards`` over ``plan`` with the operator's help; returns the reference set.

    ``load_true`` is the load standard's true impedance: one complex number, an array on the
    plan, or a function of frequency. Each standard gets at most ``attempts`` readings; after
    that, or when the operator stops, :class:`CompensationError` is raised and nothing is kept.
    Meter faults propagate as the driver's errors. The plan is checked against the meter's range
    before anything is sent.

    Each standard is swept ``repeats`` times in a row without touching the fixture; the set
    keeps the mean reading and, for ``repeats`` of 2 or more, the Type A standard uncertainty of
    that mean in ``open_u``, ``short_u``, ``load_u`` (see :func:`mean_reading`). The set records
    the plan's spacing in ``grid_spacing``, so a gap appearing later in a log or linear grid is
    found by its check.
    """
    if type(repeats) is not int or repeats < 1:
        raise CompensationError(f"repeats must be a whole number of 1 or more, not {repeats!r}")
    order = [s for s in STANDARDS if s in standards]
    unknown = [s for s in standards if s not in STANDARDS]
    if unknown or not order:
        raise CompensationError(
            f"unknown standard {(unknown or [''])[0]!r}; choose from {', '.join(STANDARDS)}"
        )
    check_range(plan, tuple(meter.frequency_range))
    f = np.array(plan.frequencies)
    truth = _load_values(load_true, f) if "load" in order else None
    refs: ReferenceSet | None = None
    operator.tell(
        f"Capturing {', '.join(order)} on fixture {fixture or '(unnamed)'} over {plan.describe()}."
    )
    for standard in order:
        refs = _capture_one(meter, f, operator, standard, refs, truth, attempts, on_points, repeats)
    assert refs is not None
    return dataclasses.replace(
        refs,
        captured_at=datetime.now(UTC),
        fixture=fixture,
        meter=meter_name,
        temperature=temperature,
        notes=notes,
        repeats=repeats,
        grid_spacing=plan.spacing,
    )


def mean_reading(readings: np.ndarray) -> tuple[np.ndarray, np.ndarray | None]:
    """Mean of ``n`` sweeps (array of shape ``(n, points)``, complex ohm) and its Type A standard
    uncertainty per component, or None for one sweep.

    The uncertainty is the experimental standard deviation of the mean (JCGM 100:2008, 4.2.3),
    ``s/sqrt(n)``, with the variances of the real and imaginary parts pooled,
    ``s**2 = (s_R**2 + s_X**2)/2``: one number per frequency that holds for R and X alike.
    """
    with np.errstate(invalid="ignore"):
        mean, u = mean_of_repeats(np.atleast_2d(np.asarray(readings, dtype=complex)))
    if u is None:
        return mean, None
    return mean, np.sqrt((u**2).mean(axis=1))


def _capture_one(
    meter: Any,
    f: np.ndarray,
    operator: Operator,
    standard: str,
    before: ReferenceSet | None,
    truth: np.ndarray | None,
    attempts: int,
    on_points: Callable | None,
    repeats: int,
) -> ReferenceSet:
    value = ""
    if standard == "load" and truth is not None:
        value = f" ({format_si(float(np.median(truth.real)), 'Ω')})"
    if not operator.ready(standard, INSTRUCTIONS[standard].format(value=value)):
        raise CompensationError(f"capture stopped before the {standard}; nothing was saved")
    for attempt in range(1, attempts + 1):
        sweeps = [meter.sweep(f, on_points=on_points) for _ in range(repeats)]
        z, u = mean_reading(np.array(sweeps, dtype=complex).reshape(repeats, f.size))
        base = before if before is not None else ReferenceSet(frequency=f)
        after = base.with_standard(standard, z, u)
        if standard == "load":
            after = after.with_standard("load_true", truth)
        problems = _new_findings(before, after, "error") if before else _first_errors(after)
        if not problems:
            for w in _new_findings(before, after, "warning"):
                operator.tell(f"warning: {w}")
            operator.tell(f"{standard} accepted ({f.size} points).")
            return after
        if attempt == attempts or not operator.retry(standard, problems):
            raise CompensationError(
                f"the {standard} reference was refused ({problems[0]}); nothing was saved"
            )
    raise AssertionError("unreachable")


def _first_errors(refs: ReferenceSet) -> list[str]:
    return [f"{f.standard}: {f.message}" for f in refs.check() if f.severity == "error"]


def reference_warnings(
    refs: ReferenceSet,
    meter_name: str = "",
    fixture: str = "",
    max_age: float | None = 8 * 3600.0,
    now: datetime | None = None,
) -> list[str]:
    """What to beware of when ``refs`` corrects a sweep on ``meter_name`` and ``fixture``.

    ``max_age`` is in seconds (None: no limit). The set's own check findings are included.
    """
    out = []
    if refs.captured_at is not None and max_age is not None:
        age = ((now or datetime.now(UTC)) - refs.captured_at).total_seconds()
        if age > max_age:
            out.append(
                f"the reference set is {format_duration(age)} old (limit "
                f"{format_duration(max_age)}); capture a fresh one if the fixture may have moved"
            )
    if meter_name and refs.meter and refs.meter != meter_name:
        out.append(f"the reference set was captured on another meter ({refs.meter})")
    if fixture and refs.fixture and refs.fixture != fixture:
        out.append(f"the reference set was captured on another fixture ({refs.fixture})")
    out += [f"reference {f.standard}: {f.message}" for f in refs.check()]
    return out


def dut_warnings(refs: ReferenceSet, f: np.ndarray, z: np.ndarray) -> list[str]:
    """What :meth:`ReferenceSet.check` says about a DUT measured through ``refs`` (readings
    ``z`` at ``f``), beyond what it says about the references alone: where the fixture limits
    accuracy (the DUT within 10x of the short residual, or the open within 10x of the DUT)."""
    if np.asarray(f).size == 0:
        return []
    known = Counter((x.standard, x.message) for x in refs.check())
    out = []
    for finding in refs.check(dut=z, f=f):
        key = (finding.standard, finding.message)
        if known[key]:
            known[key] -= 1
            continue
        out.append(finding.message)
    return out
