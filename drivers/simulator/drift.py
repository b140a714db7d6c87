"""A slowly drifting standard: a coil's inductance changes by a fixed fraction per simulated day.

A coil profile's ``drift_per_day`` (a fraction, not negative; default none) makes its inductance
``L(d) = L0 · (1 + drift_per_day · d)`` after ``d`` simulated days. The days are the simulator's
own clock, set by ``SIMulate:DRIFt:DAYS <d>`` (-1000 to 1000, default 0; a negative ``d`` drifts
the other way) and read by ``SIMulate:DRIFt:DAYS?``; wall time does not move them. So a test can
chart a check standard day by day and see its chart catch the drift.

Drift applies to whatever coil is in the fixture, drawn production units included (each keeps
its own ``drift_per_day``); a profile without the key never drifts. The drifted profile is a new
object only when the days or the DUT change, so a warming winding
(:mod:`drivers.simulator.thermal`) keeps its temperature between readings on the same day.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Awaitable, Callable
from typing import Any

from drivers.simulator.profile_types import DutProfile
from drivers.simulator.scpi_parser import expect, format_number, number

#: The range of ``SIMulate:DRIFt:DAYS``.
DAYS_LIMIT = 1000.0


def drifted(dut: DutProfile, days: float) -> DutProfile:
    """``dut`` after ``days`` simulated days (the same object when it does not drift)."""
    rate = dut.values.get("drift_per_day") if dut.kind == "coil" else None
    if not rate or not days:
        return dut
    values = dict(dut.values)
    values["inductance"] = dut.number("inductance") * (1.0 + rate * days)
    return dataclasses.replace(dut, values=values)


class Drift:
    """The simulated days elapsed, and the drifted DUT of the last call (kept while unchanged)."""

    def __init__(self) -> None:
        self.days = 0.0
        self._last: tuple[DutProfile, float, DutProfile] | None = None

    def apply(self, dut: DutProfile) -> DutProfile:
        """``dut`` as it has drifted after :attr:`days`."""
        last = self._last
        if last is not None and last[0] is dut and last[1] == self.days:
            return last[2]
        out = drifted(dut, self.days)
        self._last = (dut, self.days, out)
        return out


Handler = Callable[[Any, Any], Awaitable[Any]]


class DriftCommands:
    """``SIMulate:DRIFt:DAYS``, mixed into the command table (``instrument.drift``)."""

    instrument: Any

    async def sim_drift_days(self, session: Any, params: Any) -> None:
        expect(params, 1)
        self.instrument.drift.days = number(params[0], "", -DAYS_LIMIT, DAYS_LIMIT, 0.0)

    async def sim_drift_days_query(self, session: Any, params: Any) -> str:
        expect(params, 0)
        return format_number(self.instrument.drift.days)

    def drift_table(self) -> tuple[tuple[str, Handler | None, Handler | None], ...]:
        return (("SIMulate:DRIFt:DAYS", self.sim_drift_days, self.sim_drift_days_query),)
