"""A choke's rated current: the lower of its saturation current and its temperature-rise current.

A choke is rated for the DC current it can carry both without its inductance dropping by more
than the stated fraction (the saturation current) and without its winding warming by more than
the stated rise (the temperature-rise current); the rated current is the lower of the two, and a
datasheet says which one limits it (the framing of IEC 62024-2 for the rated current of
inductors; from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

from acquire.bias.saturation import DropCurrent
from acquire.errors import BiasError

SATURATION = "saturation"
TEMPERATURE_RISE = "temperature rise"


@dataclass(frozen=True)
class RatedCurrent:
    """The rated current (A) and which limit sets it.

    ``current`` is None, and ``at_least`` is set, when the limiting current is only known to be
    above the largest current measured.
    """

    current: float | None
    limited_by: str
    saturation: DropCurrent
    temperature_rise: float | None
    at_least: float | None = None

    def text(self) -> str:
        value = f"above {self.at_least:.3g} A" if self.current is None else f"{self.current:.3g} A"
        return f"{value}, limited by {self.limited_by}"


def rated_current(saturation: DropCurrent, temperature_rise: float | None) -> RatedCurrent:
    """The lower of the two currents, naming the limit; the saturation alone if no rise given."""
    if temperature_rise is not None and not temperature_rise > 0:
        raise BiasError("the temperature-rise current must be a positive number of ampere")
    sat = saturation.current
    if temperature_rise is None:
        if sat is None:
            return RatedCurrent(None, SATURATION, saturation, None, saturation.highest)
        return RatedCurrent(sat, SATURATION, saturation, None)
    if sat is not None and sat <= temperature_rise:
        return RatedCurrent(sat, SATURATION, saturation, temperature_rise)
    if sat is None and temperature_rise > saturation.highest:
        # Both are above what was measured for saturation: only a lower bound is known.
        return RatedCurrent(None, SATURATION, saturation, temperature_rise, saturation.highest)
    return RatedCurrent(temperature_rise, TEMPERATURE_RISE, saturation, temperature_rise)
