"""The meter's DC bias (``BIAS:``) and the simulator-only bias and thermal commands.

``BIAS:CURRent``, ``BIAS:STATe``, ``BIAS:MEASure?`` and ``BIAS:LIMit?`` are the meter's own;
``SIMulate:WARP``, ``SIMulate:TEMPerature?``, ``SIMulate:BIAS:LOG?`` and ``SIMulate:AMBient``
steer and watch the simulation (see ``COMMANDS.md``). The state is
:class:`~drivers.simulator.bias.BiasState`.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.scpi_parser import (
    ScpiError,
    boolean,
    expect,
    format_number,
    keyword,
    number,
)

#: Largest thermal clock speed-up ``SIMulate:WARP`` accepts.
WARP_MAX = 1e6
#: Ambient temperatures ``SIMulate:AMBient`` accepts, °C.
AMBIENT_RANGE = (-40.0, 100.0)


def limit_reply(params, value: float, limit: float) -> str:
    """``value``, or with ``MINimum``/``MAXimum``/``DEFault`` 0, ``limit`` or 0."""
    expect(params, 0, 1)
    if params:
        value = {"MIN": 0.0, "MAX": limit, "DEF": 0.0}[
            keyword(params[0], ("MINimum", "MAXimum", "DEFault"))
        ]
    return format_number(value)


Handler = Callable[..., Any]


class BiasCommands:
    """Handlers of the bias subsystem (mixed into the full command table)."""

    instrument: Instrument

    def bias_table(self) -> tuple[tuple[str, Handler | None, Handler | None], ...]:
        """``(pattern, command, query)`` of each bias and thermal header."""
        s = self
        return (
            ("BIAS:CURRent", s.bias_current, s.bias_current_query),
            ("BIAS:STATe", s.bias_state, s.bias_state_query),
            ("BIAS:MEASure", None, s.bias_measure),
            ("BIAS:LIMit", None, s.bias_limit),
            ("SIMulate:WARP", s.sim_warp, s.sim_warp_query),
            ("SIMulate:TEMPerature", None, s.sim_temperature),
            ("SIMulate:BIAS:LOG", None, s.sim_bias_log),
            ("SIMulate:AMBient", s.sim_ambient, s.sim_ambient_query),
        )

    async def bias_current(self, session: Session, params) -> None:
        expect(params, 1)
        bias = self.instrument.bias
        amps = number(params[0], "A", 0.0, bias.meter_limit, 0.0)
        bias.change(self.instrument.dut, bias_setpoint=amps)

    async def bias_current_query(self, session: Session, params) -> str:
        bias = self.instrument.bias
        return limit_reply(params, bias.bias_setpoint, bias.meter_limit)

    async def bias_state(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.bias.change(self.instrument.dut, bias_on=boolean(params[0]))

    async def bias_state_query(self, session: Session, params) -> str:
        expect(params, 0)
        return "1" if self.instrument.bias.bias_on else "0"

    async def bias_measure(self, session: Session, params) -> str:
        expect(params, 0)
        return format_number(self.instrument.bias.meter_bias(self.instrument.dut))

    async def bias_limit(self, session: Session, params) -> str:
        expect(params, 0)
        return format_number(self.instrument.bias.meter_limit)

    async def sim_warp(self, session: Session, params) -> None:
        expect(params, 1)
        factor = number(params[0], "", 0.0, WARP_MAX, 1.0)
        self.instrument.bias.follow(self.instrument.dut)
        self.instrument.bias.warp = factor

    async def sim_warp_query(self, session: Session, params) -> str:
        expect(params, 0)
        return format_number(self.instrument.bias.warp)

    async def sim_temperature(self, session: Session, params) -> str:
        expect(params, 0)
        bias = self.instrument.bias
        bias.follow(self.instrument.dut)
        return format_number(bias.temperature)

    async def sim_bias_log(self, session: Session, params) -> str:
        expect(params, 0)
        return ",".join(format_number(amps) for amps in self.instrument.bias.log)

    async def sim_ambient(self, session: Session, params) -> None:
        expect(params, 1)
        low, high = AMBIENT_RANGE
        celsius = number(params[0], "CEL", None, None, self.instrument.meter.ambient_temperature)
        if not low <= celsius <= high:
            raise ScpiError(-222, f"{params[0].strip()} outside {low:g} to {high:g}")
        self.instrument.bias.set_ambient(self.instrument.dut, celsius)

    async def sim_ambient_query(self, session: Session, params) -> str:
        expect(params, 0)
        return format_number(self.instrument.bias.ambient)
