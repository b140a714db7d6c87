"""The simulated DC current source: a second instrument wired to the same DUT as the meter.

Served by its own :class:`~drivers.simulator.server.SimulatorServer` (``source=True``) on its
own port (``acquire sim --source-port``), with a small SCPI-99 command set: ``*IDN?``,
``*RST``, ``*CLS``, ``SYSTem:ERRor[:NEXT]?``, ``[SOURce:]CURRent[:LEVel] <A>`` / ``?``
(``? MAX`` is its limit), ``OUTPut[:STATe] ON|OFF`` / ``?`` and ``MEASure:CURRent?``. Its
current adds to the meter's bias in the DUT (:class:`~drivers.simulator.bias.BiasState`).
Each client has its own error queue, as on the meter.
"""

from __future__ import annotations

from drivers.simulator.bias_commands import limit_reply
from drivers.simulator.commands import execute_message
from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.scpi_parser import CommandTree, boolean, expect, format_number, number, quote

#: The source's model name in its ``*IDN?`` reply.
SOURCE_MODEL = "Simulated DC Current Source"


class SourceCommands:
    """The source's command table, bound to the :class:`Instrument` whose DUT it drives."""

    def __init__(self, instrument: Instrument) -> None:
        self.instrument = instrument
        self.tree = CommandTree()
        s = self
        for pattern, write, read in (
            ("*IDN", None, s.idn),
            ("*RST", s.rst, None),
            ("*CLS", s.cls, None),
            ("SYSTem:ERRor[:NEXT]", None, s.error_next),
            ("[SOURce:]CURRent[:LEVel]", s.current, s.current_query),
            ("OUTPut[:STATe]", s.output, s.output_query),
            ("MEASure:CURRent", None, s.measure),
        ):
            self.tree.add(pattern, write, read)

    async def execute(self, session: Session, text: str) -> bytes | None:
        """Run every command of one message, as the meter does."""
        return await execute_message(self.tree, session, text)

    async def idn(self, session: Session, params) -> str:
        expect(params, 0)
        m = self.instrument.meter
        return f"{m.manufacturer},{SOURCE_MODEL},{m.serial}-S,{m.firmware}"

    async def rst(self, session: Session, params) -> None:
        expect(params, 0)
        self.instrument.bias.change(self.instrument.dut, source_on=False, source_setpoint=0.0)

    async def cls(self, session: Session, params) -> None:
        expect(params, 0)
        session.status.clear()

    async def error_next(self, session: Session, params) -> str:
        expect(params, 0)
        code, message = session.status.pop()
        return f"{code},{quote(message)}"

    async def current(self, session: Session, params) -> None:
        expect(params, 1)
        bias = self.instrument.bias
        amps = number(params[0], "A", 0.0, bias.source_limit, 0.0)
        bias.change(self.instrument.dut, source_setpoint=amps)

    async def current_query(self, session: Session, params) -> str:
        bias = self.instrument.bias
        return limit_reply(params, bias.source_setpoint, bias.source_limit)

    async def output(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.bias.change(self.instrument.dut, source_on=boolean(params[0]))

    async def output_query(self, session: Session, params) -> str:
        expect(params, 0)
        return "1" if self.instrument.bias.source_on else "0"

    async def measure(self, session: Session, params) -> str:
        expect(params, 0)
        return format_number(self.instrument.bias.source_output(self.instrument.dut))
