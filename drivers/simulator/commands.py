"""The simulated meter's command table (documented in ``COMMANDS.md``) and message execution.

Each handler takes the client's :class:`~drivers.simulator.instrument.Session` and the raw
parameters, and returns the query's reply (``str`` or block ``bytes``) or ``None``.
"""

from __future__ import annotations

import asyncio

import numpy as np

from drivers.renamed import NEW_SPEED, OLD_PAIRS
from drivers.simulator import state
from drivers.simulator.bias_commands import BiasCommands
from drivers.simulator.drift import DriftCommands
from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.measurement import Reading, ascii_values, encode, reading_values
from drivers.simulator.scpi_parser import (
    CommandTree,
    ScpiError,
    expect,
    format_number,
    integer,
    keyword,
    number,
    parse_command,
    quote,
    split_message,
)
from drivers.simulator.seating import SeatingCommands
from drivers.simulator.simulate import SimulateCommands


async def execute_message(tree: CommandTree, session: Session, text: str) -> bytes | None:
    """Run every command of one message; the queries' replies joined by ``;``, or None.

    A failing command puts its error on the client's queue and the next command runs.
    """
    replies: list[bytes] = []
    try:
        commands = split_message(text)
    except ScpiError as exc:
        session.status.push(exc.code, exc.text)
        return None
    for item in commands:
        try:
            command = parse_command(item)
            handler = tree.find(command)
            reply = await handler(session, command.params)
        except ScpiError as exc:
            session.status.push(exc.code, exc.text)
            continue
        if reply is not None:
            replies.append(reply if isinstance(reply, bytes) else reply.encode("ascii"))
    return b";".join(replies) if replies else None


class Commands(SimulateCommands, BiasCommands, SeatingCommands, DriftCommands):
    """Binds the command table to one :class:`Instrument`."""

    def __init__(self, instrument: Instrument) -> None:
        self.instrument = instrument
        self.tree = CommandTree()
        s = self
        for pattern, write, read in (
            ("*IDN", None, s.idn),
            ("*RST", s.rst, None),
            ("*CLS", s.cls, None),
            ("*OPC", s.opc, s.opc_query),
            ("*WAI", s.wai, None),
            ("*ESR", None, s.esr),
            ("*ESE", s.ese, s.ese_query),
            ("*STB", None, s.stb),
            ("*TST", None, s.tst),
            ("*TRG", s.trg, None),
            ("[SOURce:]FREQuency[:CW]", s.frequency, s.frequency_query),
            ("[SOURce:]FREQuency:MODE", s.mode, s.mode_query),
            ("[SOURce:]LIST:FREQuency", s.list_set, s.list_query),
            ("[SOURce:]LIST:FREQuency:POINts", None, s.list_points),
            ("[SOURce:]LIST:FREQuency:LOG", s.list_log, None),
            ("[SOURce:]VOLTage[:LEVel]", s.level, s.level_query),
            ("[SENSe:]PERiods", s.periods, s.periods_query),
            ("[SENSe:]SPEed", s.old_speed, s.old_speed),
            ("[SENSe:]AVERage:COUNt", s.averaging, s.averaging_query),
            ("[SENSe:]CIRCuit", s.circuit, s.circuit_query),
            ("TRIGger:SOURce", s.trigger_source, s.trigger_source_query),
            ("INITiate[:IMMediate]", s.initiate, None),
            ("FETCh", None, s.fetch),
            ("READ", None, s.read),
            ("MEASure:RDC", None, s.rdc),
            ("FORMat[:DATA]", s.data_format, s.data_format_query),
            ("FORMat:BORDer", s.byte_order, s.byte_order_query),
            ("FORMat:PAIR", s.pair, s.pair_query),
            ("UNIT:ANGLe", s.angle_unit, s.angle_unit_query),
            ("SYSTem:ERRor[:NEXT]", None, s.error_next),
            ("SYSTem:ERRor:COUNt", None, s.error_count),
            ("SYSTem:VERSion", None, s.version),
            ("SIMulate:DUT", s.sim_dut, s.sim_dut_query),
            ("SIMulate:UNIT:NEXT", s.sim_unit_next, None),
            ("SIMulate:UNIT", None, s.sim_unit_query),
            ("SIMulate:FIXTure", s.sim_fixture, s.sim_fixture_query),
            ("SIMulate:NOISe", s.sim_noise, s.sim_noise_query),
            ("SIMulate:TIME", s.sim_time, s.sim_time_query),
            ("SIMulate:SEED", s.sim_seed, s.sim_seed_query),
            ("SIMulate:FAULt", s.sim_fault, None),
            ("SIMulate:FAULt:RATE", s.sim_fault_rate, None),
            ("SIMulate:FAULt:CLEar", s.sim_fault_clear, None),
            *s.bias_table(),
            *s.seating_table(),
            *s.drift_table(),
        ):
            self.tree.add(pattern, write, read)

    async def execute(self, session: Session, text: str) -> bytes | None:
        """Run every command of one message (:func:`execute_message`)."""
        return await execute_message(self.tree, session, text)

    # IEEE 488.2 common commands

    async def idn(self, session: Session, params) -> str:
        expect(params, 0)
        m = self.instrument.meter
        return f"{m.manufacturer},{m.model},{m.serial},{m.firmware}"

    async def rst(self, session: Session, params) -> None:
        expect(params, 0)
        self.instrument.reset()

    async def cls(self, session: Session, params) -> None:
        expect(params, 0)
        session.status.clear()

    async def opc(self, session: Session, params) -> None:
        expect(params, 0)
        status, task = session.status, self.instrument.task
        if task is None or task.done():
            status.event_status |= state.ESR_OPC
        else:
            task.add_done_callback(
                lambda _: setattr(status, "event_status", status.event_status | state.ESR_OPC)
            )

    async def opc_query(self, session: Session, params) -> str:
        expect(params, 0)
        if self.instrument.task is not None:
            await session.wait_for(self.instrument.task)
        return "1"

    async def wai(self, session: Session, params) -> None:
        expect(params, 0)
        task = self.instrument.task
        if task is not None and not task.done():
            await asyncio.wait({task})

    async def esr(self, session: Session, params) -> str:
        expect(params, 0)
        return str(session.status.read_event_status())

    async def ese(self, session: Session, params) -> None:
        expect(params, 1)
        session.status.event_enable = integer(params[0], 0, 255)

    async def ese_query(self, session: Session, params) -> str:
        expect(params, 0)
        return str(session.status.event_enable)

    async def stb(self, session: Session, params) -> str:
        expect(params, 0)
        return str(session.status.status_byte)

    async def tst(self, session: Session, params) -> str:
        expect(params, 0)
        return "0"

    async def trg(self, session: Session, params) -> None:
        expect(params, 0)
        self.instrument.trigger()

    # Source: frequency, list, level

    def _frequency(self, text: str) -> float:
        return number(text, "HZ", state.FREQUENCY_MIN, state.FREQUENCY_MAX, state.FREQUENCY_DEFAULT)

    def _limit_query(
        self, params, low: float, high: float, default: float, value: float, fmt=format_number
    ) -> str:
        """The setting's ``value``, or its MINimum, MAXimum or DEFault, as ``fmt`` writes it."""
        expect(params, 0, 1)
        if params:
            value = {"MIN": low, "MAX": high, "DEF": default}[
                keyword(params[0], ("MINimum", "MAXimum", "DEFault"))
            ]
        return fmt(value)

    async def frequency(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.frequency = self._frequency(params[0])

    async def frequency_query(self, session: Session, params) -> str:
        s = self.instrument.settings
        low, high, default = state.FREQUENCY_MIN, state.FREQUENCY_MAX, state.FREQUENCY_DEFAULT
        return self._limit_query(params, low, high, default, s.frequency)

    async def mode(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.mode = keyword(params[0], ("FIXed", "LIST"))

    async def mode_query(self, session: Session, params) -> str:
        expect(params, 0)
        return self.instrument.settings.mode

    async def list_set(self, session: Session, params) -> None:
        expect(params, 1, state.LIST_MAX)
        self.instrument.settings.frequency_list = tuple(self._frequency(p) for p in params)

    async def list_query(self, session: Session, params) -> str:
        expect(params, 0)
        return ",".join(format_number(f) for f in self.instrument.settings.frequency_list)

    async def list_points(self, session: Session, params) -> str:
        expect(params, 0)
        return str(len(self.instrument.settings.frequency_list))

    async def list_log(self, session: Session, params) -> None:
        expect(params, 3)
        start, stop = self._frequency(params[0]), self._frequency(params[1])
        points = integer(params[2], 2, state.LIST_MAX)
        if start == stop:
            raise ScpiError(-222, "start and stop must differ")
        self.instrument.settings.frequency_list = tuple(np.geomspace(start, stop, points).tolist())

    async def level(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.level = number(
            params[0], "V", state.LEVEL_MIN, state.LEVEL_MAX, state.LEVEL_DEFAULT
        )

    async def level_query(self, session: Session, params) -> str:
        return self._limit_query(params, state.LEVEL_MIN, state.LEVEL_MAX, state.LEVEL_DEFAULT,
                                 self.instrument.settings.level)  # fmt: skip

    # Sense: periods per reading, averaging, circuit

    async def periods(self, session: Session, params) -> None:
        expect(params, 1)
        low, high = state.PERIODS_MIN, state.PERIODS_MAX
        self.instrument.settings.periods = integer(params[0], low, high, state.PERIODS_DEFAULT)

    async def periods_query(self, session: Session, params) -> str:
        low, high, default = state.PERIODS_MIN, state.PERIODS_MAX, state.PERIODS_DEFAULT
        now = self.instrument.settings.periods
        return self._limit_query(params, low, high, default, now, fmt=str)

    async def old_speed(self, session: Session, params) -> None:
        raise ScpiError(-113, f"the speed header was renamed: use {NEW_SPEED}")

    async def circuit(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.circuit = keyword(params[0], state.CIRCUITS)

    async def circuit_query(self, session: Session, params) -> str:
        expect(params, 0)
        return self.instrument.settings.circuit

    async def averaging(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.averaging = integer(params[0], 1, state.AVERAGING_MAX, 1)

    async def averaging_query(self, session: Session, params) -> str:
        now = self.instrument.settings.averaging
        return self._limit_query(params, 1, state.AVERAGING_MAX, 1, now, fmt=str)

    # Trigger and measurement

    async def trigger_source(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.trigger_source = keyword(params[0], ("IMMediate", "BUS"))

    async def trigger_source_query(self, session: Session, params) -> str:
        expect(params, 0)
        return self.instrument.settings.trigger_source

    async def initiate(self, session: Session, params) -> None:
        expect(params, 0)
        self.instrument.initiate()

    def _reply(self, reading: Reading) -> bytes:
        s = self.instrument.settings
        if s.data_format == "ASC":
            texts = ascii_values(reading, s.pair, s.circuit, s.angle_unit)
            if self.instrument.faults.short_reading():
                texts = texts[:-1]
            return ",".join(texts).encode("ascii")
        values = reading_values(reading, s.pair, s.circuit, s.angle_unit)
        if self.instrument.faults.short_reading():
            values = values[:-1]
        return encode(values, s.data_format, s.byte_order)

    async def fetch(self, session: Session, params) -> bytes:
        expect(params, 0)
        instrument = self.instrument
        if instrument.armed:
            raise ScpiError(-230, "measurement armed, waiting for *TRG")
        if instrument.busy:
            await session.wait_for(instrument.task)  # type: ignore[arg-type]
        if instrument.last is None:
            raise ScpiError(-230, "no completed measurement")
        return self._reply(instrument.last)

    async def _own_task(self, session: Session, start) -> object:
        instrument = self.instrument
        while instrument.busy:
            await session.wait_for(instrument.task)  # type: ignore[arg-type]
        task = start()
        await session.wait_for(task)
        if task.cancelled():
            raise ScpiError(-230, "measurement aborted")
        return task.result()

    async def read(self, session: Session, params) -> bytes:
        expect(params, 0)
        if self.instrument.settings.trigger_source == "BUS":
            raise ScpiError(
                -221, "READ? needs TRIGger:SOURce IMMediate; use INITiate, *TRG, FETCh?"
            )
        reading = await self._own_task(session, self.instrument.initiate)
        return self._reply(reading)  # type: ignore[arg-type]

    async def rdc(self, session: Session, params) -> str:
        expect(params, 0)
        if self.instrument.armed:
            raise ScpiError(-213, "a measurement is armed, waiting for *TRG")
        value = await self._own_task(session, self.instrument.start_dc)
        return format_number(value)  # type: ignore[arg-type]

    # Format

    async def data_format(self, session: Session, params) -> None:
        expect(params, 1, 2)
        kind = keyword(params[0], ("ASCii", "REAL"))
        if kind == "ASC" and len(params) == 2:
            raise ScpiError(-108, "ASCii takes no length")
        if kind == "REAL" and len(params) == 2 and integer(params[1], 0, 1000) != 64:
            raise ScpiError(-222, "only REAL,64 is supported")
        self.instrument.settings.data_format = kind

    async def data_format_query(self, session: Session, params) -> str:
        expect(params, 0)
        return "REAL,64" if self.instrument.settings.data_format == "REAL" else "ASC"

    async def byte_order(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.byte_order = keyword(params[0], ("NORMal", "SWAPped"))

    async def byte_order_query(self, session: Session, params) -> str:
        expect(params, 0)
        return self.instrument.settings.byte_order

    async def pair(self, session: Session, params) -> None:
        if len(params) == 1 and params[0].strip().upper() in OLD_PAIRS:
            old = params[0].strip().upper()
            raise ScpiError(-224, f"{old} is a retired reading-pair name; say {OLD_PAIRS[old]}")
        expect(params, 2)
        first, second = (keyword(p, state.PAIR_WORDS) for p in params)
        if frozenset({first, second}) not in state.PAIRS:
            raise ScpiError(
                -224,
                f"{first},{second} is not a pair; use REAL,IMAG, MAGN,PHAS, COND,SUSC, or IND "
                "or CAP with RES, QUAL or DISS",
            )
        self.instrument.settings.pair = (first, second)

    async def pair_query(self, session: Session, params) -> str:
        expect(params, 0)
        return ",".join(self.instrument.settings.pair)

    async def angle_unit(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.settings.angle_unit = keyword(params[0], state.ANGLE_UNITS)

    async def angle_unit_query(self, session: Session, params) -> str:
        expect(params, 0)
        return self.instrument.settings.angle_unit

    # System

    async def error_next(self, session: Session, params) -> str:
        expect(params, 0)
        code, message = session.status.pop()
        return f"{code},{quote(message)}"

    async def error_count(self, session: Session, params) -> str:
        expect(params, 0)
        return str(len(session.status.errors))

    async def version(self, session: Session, params) -> str:
        expect(params, 0)
        return "1999.0"
