"""The machinery under every DC bias supply: a dialect's operations sent over a session.

:class:`DialectSupply` implements :class:`drivers.bias.BiasSupply` for any instrument whose
dialect names an operation for each action (:class:`Words`): the meter's own bias
(``set_bias``, ...) or a current source's output (``set_current``, ...). Every value is checked
against the limit before it is sent, the error queue is read after every command, and the ramp
down to zero keeps going past a failed step, switches off, and raises only at the end.
:mod:`drivers.bias` holds the public classes.
"""

from __future__ import annotations

import logging
import math
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Protocol, TypeVar

from drivers import scpi
from drivers.dialect import Operation
from drivers.errors import BiasError, ConnectionLost, DialectError, InstrumentError, OutOfRange
from drivers.settings import number_text

log = logging.getLogger(__name__)
T = TypeVar("T")


class Link(Protocol):
    """What a supply needs of a :class:`~drivers.session.Session`."""

    resource_name: str
    on_reopen: Callable[[], None] | None

    def write(self, message: str) -> None: ...

    def query(self, message: str, timeout: float | None = None) -> str: ...

    def call(self, what: str, action: Callable[[], T], idempotent: bool = True) -> T: ...

    def close(self) -> None: ...


@dataclass(frozen=True)
class Words:
    """The dialect operations of each action, and what the current is called in messages."""

    set: str
    on: str
    off: str
    read: str
    limit: str
    what: str


METER = Words("set_bias", "bias_on", "bias_off", "read_bias", "bias_limit", "DC bias")
SOURCE = Words(
    "set_current", "output_on", "output_off", "read_current", "current_limit", "source current"
)


class DialectSupply:
    """A :class:`~drivers.bias.BiasSupply` whose commands are a dialect's operations, sent
    over ``link``."""

    def __init__(
        self,
        link: Link,
        operations: dict[str, Operation],
        warning_codes: frozenset[int],
        words: Words,
        name: str,
        ramp_step: float | None = None,
        ramp_dwell: float = 0.0,
    ) -> None:
        self._link = link
        self._operations = operations
        self._warning_codes = warning_codes
        self._words = words
        self._name = name
        self._setpoint: float | None = None
        self._on: bool | None = None
        self._limit, self._limit_source = self._find_limit()
        self.ramp_step = self._limit / 10 if ramp_step is None else ramp_step
        self.ramp_dwell = ramp_dwell

    @property
    def limit(self) -> float:
        return self._limit

    @property
    def resource(self) -> str:
        return self._link.resource_name

    def set_current(self, amps: float) -> None:
        value = self._checked(amps)
        op = self._operations[self._words.set]
        self._setpoint = None
        self._send(f"setting the {self._words.what} to {value:g} A", op, number_text(value))
        self._setpoint = value

    def switch(self, on: bool) -> None:
        op = self._operations[self._words.on if on else self._words.off]
        self._on = None
        self._send(f"switching the {self._words.what} {'on' if on else 'off'}", op)
        self._on = on

    def applied(self) -> float:
        op = self._operations[self._words.read]
        return self._link.call(
            f"reading back the {self._words.what}",
            lambda: scpi.parse_number(self._link.query(op.format())),
        )

    def ramp_to(self, amps: float, step: float, dwell: float = 0.0) -> float:
        target = self._checked(amps)
        if not (math.isfinite(step) and step > 0):
            raise OutOfRange(f"the ramp step must be a positive number of ampere, got {step!r}")
        if not (math.isfinite(dwell) and dwell >= 0):
            raise OutOfRange(f"the dwell must be a number of seconds, 0 or more, got {dwell!r}")
        if target == 0:
            return self._ramp_down(step, dwell)
        start = self._start()
        if self._on is not True:
            self.set_current(start)
            self.switch(True)
        last = math.nan
        for value in steps(start, target, step):
            self.set_current(value)
            time.sleep(dwell)
            last = self.applied()
        return last

    def shutdown(self) -> None:
        """Ramp to 0 A in steps of :attr:`ramp_step`, :attr:`ramp_dwell` seconds apart, and
        switch off (what closing the connection does first)."""
        self.ramp_to(0.0, self.ramp_step, self.ramp_dwell)

    # -- private -------------------------------------------------------------------------------

    def _ramp_down(self, step: float, dwell: float) -> float:
        """Down to 0 A and off; a failing step does not stop the rest (a lost connection
        does: nothing more can be sent); the first failure is raised at the end."""
        failures: list[tuple[str, InstrumentError]] = []
        last = math.nan
        try:
            start: float | None = self._start()
        except InstrumentError as exc:
            failures.append(("finding the present current", exc))
            start = None
        for value in steps(start, 0.0, step) if start is not None else []:
            try:
                self.set_current(value)
                time.sleep(dwell)
                last = self.applied()
            except InstrumentError as exc:
                failures.append((f"the step to {value:g} A", exc))
                log.warning(
                    "%s: ramping down, the step to %g A failed: %s", self.resource, value, exc
                )
                if isinstance(exc, ConnectionLost):
                    break
        try:
            self.switch(False)
        except InstrumentError as exc:
            failures.append(("switching off", exc))
        if failures:
            where, first = failures[0]
            off = "not switched off" if failures[-1][0] == "switching off" else "switched off"
            raise BiasError(
                f"ramping the {self._words.what} on {self.resource} down to 0 A: "
                f"{len(failures)} failure(s), first {where}: {first}; the output was {off}. "
                "Check at the instrument that no current flows before touching the part"
            ) from first
        return last

    def _start(self) -> float:
        """The current flowing now: 0 when switched off, the setpoint when known to be on,
        else as read back (a fresh connection may find the current already flowing)."""
        if self._on is False:
            return 0.0
        if self._on is True and self._setpoint is not None:
            return self._setpoint
        reading = self.applied()
        if not math.isfinite(reading):
            raise BiasError(
                f"{self.resource}: the {self._words.what} read back as {reading} A; "
                "check the instrument and its connection to the part"
            )
        return min(max(reading, 0.0), self._limit)

    def _checked(self, amps: float) -> float:
        try:
            value = float(amps)
        except (TypeError, ValueError):
            value = math.nan
        if not math.isfinite(value) or value < 0:
            raise OutOfRange(
                f"the {self._words.what} must be a finite number of ampere, 0 or more, got "
                f"{amps!r}; nothing was sent"
            )
        if value > self._limit:
            raise OutOfRange(
                f"the {self._words.what} of {value:g} A is above the limit of {self._limit:g} A "
                f"({self._limit_source}); nothing was sent. Ask for at most {self._limit:g} A"
            )
        return value

    def _send(self, what: str, op: Operation, current: str | None = None) -> None:
        """Send ``op`` and read the error queue: what the instrument refused is raised."""
        text = op.format() if current is None else op.format(current=current)
        ask = self._operations["next_error"].format()

        def action() -> None:
            self._link.write(text)
            entries = scpi.drain_errors(lambda: self._link.query(ask), self._warning_codes)
            scpi.raise_for_errors(entries, f"{self.resource}: {what}")

        self._link.call(what, action, op.idempotent)

    def _find_limit(self) -> tuple[float, str]:
        """The smaller of the dialect's ``max`` and the instrument's own report, if it has one."""
        most = self._operations[self._words.set].maximum
        if most is None:  # the dialect check requires it
            raise DialectError(f"dialect {self._name!r}: operations.{self._words.set} has no max")
        source = f"the max of operations.{self._words.set} in dialect {self._name!r}"
        op = self._operations.get(self._words.limit)
        if op is None:
            return most, source
        told = self._link.call(
            f"asking the {self._words.what} limit",
            lambda: scpi.parse_number(self._link.query(op.format())),
        )
        if not (math.isfinite(told) and told >= 0):
            raise BiasError(
                f"{self.resource}: the instrument reported a {self._words.what} limit of "
                f"{told} A; check the dialect's {self._words.limit} command"
            )
        if told < most:
            return told, f"as {self.resource} reports it"
        return most, source

    #: The connection the commands go through (the meter's own for :class:`MeterBias`).
    _link: Link
    #: The dialect's operations, by name (bias or source operations, and ``next_error``).
    _operations: dict[str, Operation]
    #: Positive error codes the instrument uses for notices, not failures.
    _warning_codes: frozenset[int]
    #: Which operations do what.
    _words: Words
    #: The dialect's name, for messages.
    _name: str
    #: The current last set (A), None until set (or after a set that may have failed).
    _setpoint: float | None
    #: Whether the output is on, None until switched (or after a switch that may have failed).
    _on: bool | None
    #: The largest current sent (A), and where that limit comes from, for messages.
    _limit: float
    _limit_source: str
    #: The steps of :meth:`shutdown`: at most this many ampere, this many seconds apart.
    ramp_step: float
    ramp_dwell: float


def steps(start: float, target: float, step: float) -> list[float]:
    """The currents from ``start`` (excluded) to ``target`` (included), evenly spaced, none
    more than ``step`` apart; ``[target]`` when they are equal."""
    count = max(1, math.ceil(abs(target - start) / step - 1e-9))
    values = [start + (target - start) * k / count for k in range(1, count)]
    return values + [target]
