"""Holding a DC bias safely: never above a maximum, always back to zero and off at the end.

An inductor carrying a current I stores ½·L·I²; breaking that current arcs at the contact and
can destroy the meter's input and hurt the operator. So every measurement under bias runs inside
:func:`energised`: a bias above the maximum (the command line's or plan's, and never above the
supply's own limit) is refused before anything is sent, the bias moves in steps, and on the way
out, whatever the way (the end, Ctrl-C, SIGTERM, a meter fault, any error), the bias is ramped
down to zero in steps and switched off. Stop signals that come during the ramp-down are held
until it is done (:func:`acquire.signals.held`). :meth:`Energised.before_part_change` ramps down
before any prompt to change the part in the fixture.

Follow the meter and fixture makers' instructions, local codes and licensed practice; this code
is a second line of protection, not the first.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from acquire import signals
from acquire.errors import BiasError


class Energised:
    """A supply held for a measurement under bias (made by :func:`energised`)."""

    def __init__(self, supply: Any, maximum: float, step: float, dwell: float) -> None:
        self.supply = supply
        self.maximum = maximum
        self.step = step
        self.dwell = dwell
        self.present = 0.0

    def go(self, amps: float) -> float:
        """Move the bias to ``amps`` in steps; the current read back. Above the maximum: refused."""
        if not (math.isfinite(amps) and 0 <= amps <= self.maximum):
            raise BiasError(
                f"a bias of {amps:g} A is outside 0 to {self.maximum:g} A (the largest allowed "
                "here); lower the bias or raise the maximum, if the part and fixture are rated"
            )
        applied = float(self.supply.ramp_to(amps, self.step, self.dwell))
        self.present = amps
        return applied

    def before_part_change(self) -> None:
        """Ramp to zero and switch off, before the operator is asked to touch the part."""
        with signals.held():
            self.supply.ramp_to(0.0, self.step, self.dwell)
        self.present = 0.0


def largest_allowed(maximum: float | None, supply_limit: float) -> float:
    """The smaller of the asked maximum (None: none asked) and the supply's own limit (A)."""
    if maximum is None:
        return supply_limit
    if not (math.isfinite(maximum) and maximum >= 0):
        raise BiasError(f"the maximum bias must be a number of ampere, 0 or more, not {maximum}")
    return min(maximum, supply_limit)


@contextmanager
def energised(supply: Any, maximum: float, step: float, dwell: float = 0.0) -> Iterator[Energised]:
    """Hold ``supply`` for a measurement under bias; on leaving, ramp to zero and switch off.

    ``maximum`` (A) must not exceed the supply's limit; ``step`` (A) is the largest change at a
    time, ``dwell`` (s) the wait after each step.
    """
    if maximum > supply.limit:
        raise BiasError(
            f"the maximum bias {maximum:g} A is above the supply's limit of {supply.limit:g} A; "
            "lower it"
        )
    if not (math.isfinite(step) and step > 0):
        raise BiasError(f"the bias step must be a positive number of ampere, not {step}")
    held = Energised(supply, maximum, step, dwell)
    try:
        yield held
    finally:
        with signals.held():
            supply.ramp_to(0.0, step, dwell)
