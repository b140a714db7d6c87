"""The DC current through the DUT and the winding's temperature, on a clock that may run fast.

Two things can drive DC current through what is in the fixture: the meter's own bias
(``BIAS:``) and a separate simulated DC current source (:mod:`.source_commands`) wired to the
same DUT. The current through the DUT is their sum, and flows only where the DUT has a DC path
(not through an open, a capacitor or an empty fixture). A saturating coil's inductance follows
that current (:mod:`.saturation`); a coil with a thermal model warms (:mod:`.thermal`) and its
resistance follows its temperature. Coils without those keys behave exactly as without bias.

The thermal clock runs ``warp`` times faster than wall time (``SIMulate:WARP``), so tests
watch a winding settle in a fraction of a second. Each connection that closes (to the meter or
to the source) logs the current flowing at that moment (``SIMulate:BIAS:LOG?``).
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable

from drivers.simulator import thermal
from drivers.simulator.profile_types import DutProfile, MeterProfile
from drivers.simulator.saturation import inductance_factor

#: Default reference temperature of a coil's ``dc_resistance``, °C.
REFERENCE_TEMPERATURE = 20.0


class BiasState:
    """Setpoints of the meter's bias and of the source, the winding's temperature, the log."""

    def __init__(self, meter: MeterProfile, clock: Callable[[], float] = time.monotonic) -> None:
        self.meter_limit = meter.bias_limit
        self.source_limit = meter.source_limit
        self.ambient = meter.ambient_temperature
        self.bias_setpoint = 0.0
        self.bias_on = False
        self.source_setpoint = 0.0
        self.source_on = False
        #: Current flowing (A) when each earlier connection closed, oldest first.
        self.log: list[float] = []
        self._clock = clock
        self._warp = 1.0
        self._wall = clock()
        self._elapsed = 0.0
        self._dut: DutProfile | None = None
        self.temperature = self.ambient

    @property
    def warp(self) -> float:
        """How many times faster than wall time the thermal clock runs."""
        return self._warp

    @warp.setter
    def warp(self, factor: float) -> None:
        self._tick()
        self._warp = factor

    def _tick(self) -> float:
        """Thermal seconds since the last tick (wall time × warp)."""
        now = self._clock()
        seconds = (now - self._wall) * self._warp
        self._wall = now
        return seconds

    def follow(self, dut: DutProfile) -> DutProfile:
        """Bring the winding's temperature up to now, for ``dut`` (a new part starts cold)."""
        seconds = self._tick()
        if dut is not self._dut:
            self._dut = dut
            self.temperature = self.ambient
            return dut
        v = dut.values
        r_th, tau = v.get("thermal_resistance"), v.get("thermal_time_constant")
        if dut.kind == "coil" and r_th is not None and tau is not None:
            self.temperature = thermal.advance(
                self.temperature,
                seconds,
                self.current(dut),
                dut.number("dc_resistance"),
                _reference(dut),
                self.ambient,
                r_th,
                tau,
            )
        return dut

    def set_ambient(self, dut: DutProfile, celsius: float) -> None:
        """A new ambient; a winding without a thermal model takes it at once."""
        self.follow(dut)
        self.ambient = celsius
        if dut.values.get("thermal_resistance") is None:
            self.temperature = celsius

    def meter_bias(self, dut: DutProfile) -> float:
        """The meter's bias actually applied now (A)."""
        return self.bias_setpoint if self.bias_on and _conducts(dut) else 0.0

    def source_output(self, dut: DutProfile) -> float:
        """The source's current actually flowing now (A)."""
        return self.source_setpoint if self.source_on and _conducts(dut) else 0.0

    def current(self, dut: DutProfile) -> float:
        """DC current through ``dut`` (A): the meter's bias plus the source's output."""
        return self.meter_bias(dut) + self.source_output(dut)

    def change(self, dut: DutProfile, **setpoints: float | bool) -> None:
        """Change setpoints (``bias_setpoint=2.0``, ``source_on=True``) after warming up to now."""
        self.follow(dut)
        for key, value in setpoints.items():
            setattr(self, key, value)

    def connection_closed(self, dut: DutProfile) -> None:
        """Log the current flowing as a connection closes."""
        self.log.append(self.current(dut))

    def biased(self, dut: DutProfile) -> DutProfile:
        """``dut`` as the meter sees it now: L at the present current, R at the present
        temperature (the same object when neither applies)."""
        self.follow(dut)
        if dut.kind != "coil":
            return dut
        v = dut.values
        values = dict(v)
        if v.get("saturation_current") is not None:
            factor = float(
                inductance_factor(
                    self.current(dut), v["saturation_current"], v.get("saturation_sharpness")
                )
            )
            if factor != 1.0:
                values["inductance"] = dut.number("inductance") * factor
        if v.get("thermal_resistance") is not None:
            ratio = (thermal.COPPER_ZERO + self.temperature) / (
                thermal.COPPER_ZERO + _reference(dut)
            )
            values["dc_resistance"] = dut.number("dc_resistance") * ratio
            if v.get("resistivity") is not None and v.get("wire_diameter") is not None:
                values["resistivity"] = dut.number("resistivity") * ratio
        if values == v:
            return dut
        return dataclasses.replace(dut, values=values)


def _reference(dut: DutProfile) -> float:
    value = dut.values.get("reference_temperature")
    return REFERENCE_TEMPERATURE if value is None else value


def _conducts(dut: DutProfile) -> bool:
    """The DUT has a DC path for a bias current."""
    return math.isfinite(dut.dc_value)
