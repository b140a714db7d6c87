"""A guided crossed gauge R&R study: every operator measures every part in every trial.

The measuring order (:func:`study_order`) is trial by trial; within a trial each operator in
turn measures all the parts, in an order of their own drawn at random (a numpy Generator seeded
with the study's recorded seed, so the order is reproduced exactly from the seed). Randomising
keeps an operator from remembering a part's last reading and spreads any drift of the station
over the parts instead of onto one of them.

For each turn the operator is asked to seat the part (:func:`turn_prompt`), the part is measured
as the station measures a unit (:func:`acquire.production.measure.measure_unit`, with the plan's
settings and the station's reference set), and the studied check's value and expanded
uncertainty are stored at once, one transaction each, with who measured what and when. A meter
fault shows the fault and asks for the same turn again. Ctrl-C (or a stop signal, or the end of
input) ends the study ``interrupted`` with every measurement completed before it kept; a
measurement being stored is finished first.

A simulated meter is told who seats each part (``seat(part, operator)``), so its seating effect
follows the operators (:mod:`drivers.simulator.seating`).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.display import format_measured
from acquire.errors import InputError
from acquire.production.measure import measure_unit
from acquire.production.plan import Check, TestPlan
from acquire.signals import held, stop_reason


@dataclass(frozen=True)
class Turn:
    """One measurement of the study: ``operator`` measures ``part`` in ``trial``; ``index`` is its
    place in the measuring order, from 0."""

    index: int
    trial: int
    operator: str
    part: int


@dataclass(frozen=True)
class StudyOutcome:
    """How a study ended: ``status`` ``complete`` or ``interrupted``, ``note`` why it stopped
    ('' when complete), ``measured`` how many measurements were stored."""

    status: str
    note: str
    measured: int


def study_order(parts: int, operators: tuple[str, ...], trials: int, seed: int) -> list[Turn]:
    """The whole measuring order; see the module docstring. Parts are numbered 1..parts."""
    if parts < 2 or trials < 2 or not operators:
        raise InputError(
            "a gauge R&R study needs at least 2 parts, 1 operator and 2 trials "
            "(repeatability comes from the trials)"
        )
    rng = np.random.default_rng(seed)
    order: list[Turn] = []
    for trial in range(1, trials + 1):
        for operator in operators:
            for part in rng.permutation(parts) + 1:
                order.append(Turn(len(order), trial, operator, int(part)))
    return order


def new_seed() -> int:
    """A fresh seed for a study's order (recorded with the study)."""
    return int(np.random.SeedSequence().generate_state(1, np.uint64)[0] >> 1)


def turn_prompt(turn: Turn) -> str:
    """What the operator is asked before a measurement."""
    return f"{turn.operator}: seat part {turn.part} in the fixture, then press Enter"


def studied_check(plan: TestPlan, key: str | None) -> Check:
    """The plan's check ``key`` (e.g. ``"Ls@100000"``), or its first check when None."""
    if not plan.checks:
        raise InputError(f"the plan {plan.title!r} has no checks to study")
    if key is None:
        return plan.checks[0]
    for check in plan.checks:
        if check.key == key:
            return check
    keys = ", ".join(c.key for c in plan.checks)
    raise InputError(f"the plan has no check {key!r}: choose one of {keys}")


def operator_names(text: str, count: int | None) -> tuple[str, ...]:
    """Names from a comma-separated list: each printable, different, ``count`` of them."""
    names = tuple(" ".join(part.split()) for part in text.split(","))
    check_names(names, count)
    return names


def check_names(names: tuple[str, ...], count: int | None) -> None:
    """Refuse empty, unprintable or repeated operator names, or the wrong number of them."""
    for name in names:
        if not name or not name.isprintable():
            raise InputError(f"an operator needs a printable name, not {name!r}")
    if len(set(names)) != len(names):
        raise InputError("each operator needs a name of their own (two names are the same)")
    if count is not None and len(names) != count:
        raise InputError(f"{len(names)} operator names given for {count} operators")


class GuidedStudy:
    """Takes the operators through the study's turns; see the module docstring.

    ``ask(prompt)`` returns the operator's line (None at the end of input); ``show(text)`` prints
    a line as plain text; ``writer`` stores measurements (``add``); ``seat(part, operator)``, when
    given, tells a simulated meter who seats which part.
    """

    def __init__(
        self,
        meter: Any,
        plan: TestPlan,
        check: Check,
        references: Any,
        writer: Any,
        ask: Callable[[str], str | None],
        show: Callable[[str], None],
        seat: Callable[[int, str], None] | None = None,
        temperature: float | None = None,
        measure: Callable[..., Any] = measure_unit,
    ) -> None:
        self.meter, self.plan, self.check, self.references = meter, plan, check, references
        self.writer, self.ask, self.show, self.seat = writer, ask, show, seat
        self.temperature = temperature
        self._measure = measure
        self.measured = 0

    def run(self, order: list[Turn]) -> StudyOutcome:
        """Measure every turn of ``order`` in turn; how the study ended."""
        try:
            for turn in order:
                if not self._take(turn):
                    return StudyOutcome("interrupted", "the input ended", self.measured)
        except KeyboardInterrupt as stop:
            return StudyOutcome("interrupted", stop_reason(stop), self.measured)
        return StudyOutcome("complete", "", self.measured)

    def _take(self, turn: Turn) -> bool:
        """Ask for and measure one turn until it is measured; False at the end of input."""
        while True:
            line = self.ask(turn_prompt(turn))
            if line is None:
                return False
            if self.seat is not None:
                self.seat(turn.part, turn.operator)
            measured = self._measure(self.meter, self.plan, self.references, self.temperature)
            if measured.error:
                self.show(f"not measured: {measured.error}; seat part {turn.part} again")
                continue
            key = self.check.key
            value, u = measured.values[key], measured.uncertainty[key]
            with held():  # a stop from here waits until the measurement is stored
                self.writer.add(turn.part, turn.operator, turn.trial, value, u, turn.index)
                self.measured += 1
                shown = format_measured(self.check.quantity, value, u)
                self.show(
                    f"{turn.index + 1}: trial {turn.trial}, {turn.operator}, part {turn.part}: "
                    f"{shown}"
                )
            return True
