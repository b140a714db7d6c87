"""Which serials a station measures: the plan's serial pattern, and its policies for a serial seen
before (a retest of the same unit, or a duplicate label) and for retests after a fail or an error.

:class:`SerialBook` remembers each serial's attempts, from the store the first time the serial is
scanned and from the session after that; :meth:`SerialBook.admit` says whether the serial is
measured now, as which attempt, or why not.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

from acquire.errors import AcquireError
from acquire.production.plan import (
    CONDITIONAL_FAIL,
    CONDITIONAL_PASS,
    ERROR,
    FAIL,
    PASS,
    TestPlan,
)

#: Longest serial accepted (a barcode is far shorter; a longer line is a stuck scanner).
SERIAL_LIMIT = 64


@dataclass(frozen=True)
class Admission:
    """``attempt`` (1 for a first test) when the serial is measured now, else 0 and ``refusal``."""

    serial: str
    attempt: int
    refusal: str = ""

    @property
    def admitted(self) -> bool:
        return self.attempt > 0


def clean_serial(text: str) -> str:
    """A scanned line as a serial: surrounding white space removed (scanners add CR or tabs)."""
    return text.strip()


def _is_printable(text: str) -> bool:
    return all(ch.isprintable() for ch in text)


class SerialBook:
    """Every attempt's outcome per serial, and the plan's rules that admit a serial.

    ``history(serial)`` returns the outcomes of the serial's stored attempts, oldest first; it is
    asked once per serial (the session keeps count after that). When it raises an
    :class:`AcquireError` (the store is away), the session's own attempts are all that is known,
    and the admission says so.
    """

    def __init__(self, plan: TestPlan, history: Callable[[str], list[str]]) -> None:
        self._plan = plan
        self._pattern = re.compile(plan.serial.pattern)
        self._history = history
        self._outcomes: dict[str, list[str]] = {}
        self._unsure: set[str] = set()

    def outcomes(self, serial: str) -> list[str]:
        """The outcomes of the serial's attempts known so far, oldest first."""
        if serial not in self._outcomes:
            try:
                self._outcomes[serial] = list(self._history(serial))
            except AcquireError:
                self._outcomes[serial] = []
                self._unsure.add(serial)
        return self._outcomes[serial]

    def check_form(self, serial: str) -> str:
        """Why ``serial`` is not a serial of this plan ('' when it is)."""
        if not serial:
            return "an empty line is not a serial"
        if len(serial) > SERIAL_LIMIT:
            return f"a serial has at most {SERIAL_LIMIT} characters; this line has {len(serial)}"
        if not _is_printable(serial):
            return f"{serial!r} holds control characters: scan the label again"
        if self._pattern.fullmatch(serial) is None:
            return (
                f"{serial!r} does not match the plan's serial pattern {self._plan.serial.pattern}"
                ": check the label, or the plan"
            )
        return ""

    def admit(self, serial: str) -> Admission:
        """Whether ``serial`` is measured now and as which attempt, or why it is refused."""
        problem = self.check_form(serial)
        if problem:
            return Admission(serial, 0, problem)
        done = self.outcomes(serial)
        attempt = len(done) + 1
        if not done:
            return Admission(serial, attempt)
        latest, retest = done[-1], self._plan.retest
        if latest in (PASS, CONDITIONAL_PASS) and self._plan.serial.seen_before == "refuse":
            return Admission(
                serial, 0, f"{serial} already passed (attempt {len(done)}): the plan refuses a "
                "serial seen before; check for a duplicate label"
            )  # fmt: skip
        if latest in (FAIL, CONDITIONAL_FAIL) and not retest.on_fail:
            refusal = f"{serial} failed and the plan allows no retest after a fail"
            return Admission(serial, 0, refusal)
        if latest == ERROR and not retest.on_error:
            refusal = f"{serial} ended in a meter error and the plan allows no retest after one"
            return Admission(serial, 0, refusal)
        if attempt > retest.attempts:
            return Admission(
                serial, 0, f"{serial} has had {len(done)} attempts, the most the plan allows "
                f"({retest.attempts}); set it aside for the engineer"
            )  # fmt: skip
        return Admission(serial, attempt)

    def record(self, serial: str, outcome: str) -> None:
        """Count an attempt just made on ``serial``."""
        self.outcomes(serial).append(outcome)

    def unsure(self, serial: str) -> bool:
        """True when the store could not say what ``serial`` had before (it was away)."""
        return serial in self._unsure
