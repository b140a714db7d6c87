"""The simulated meter writes a reading's ASCII reply within the measurement's time, as a real
meter's reply is ready when its measurement ends, and sends the same bytes as writing it at the
end would (the reference: :func:`format_number` applied to :func:`reading_values`, joined by
commas, as IEEE 488.2 8.7 lists response data elements).

Checked as a mechanism, never by the wall clock: the instrument's sleep is replaced by one that
notes how many numbers had been written when the measurement began its wait.
"""

from __future__ import annotations

import asyncio

import pytest

from drivers.simulator import measurement
from drivers.simulator.commands import Commands
from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.scpi_parser import format_number

FREQUENCIES = (1e3, 1e4, 1e5, 1e6, 9.87654321e6)
LIST = "FREQ:MODE LIST;LIST:FREQ " + ",".join(map(repr, FREQUENCIES))


def _meter(written: list[int], counted: list[int]) -> tuple[Commands, Session]:
    meter = Instrument(dut="air-core-coil", measure_time=0.001, seed=5)

    async def record(seconds: float) -> None:
        written.append(counted[0])

    meter.sleep = record
    return Commands(meter), Session()


@pytest.fixture
def counted(monkeypatch) -> list[int]:
    count = [0]

    def counting(value: float) -> str:
        count[0] += 1
        return format_number(value)

    monkeypatch.setattr(measurement, "format_number", counting)
    return count


def _expected(reading, pair: tuple[str, str], circuit: str = "SER") -> bytes:
    values = measurement.reading_values(reading, pair, circuit, "DEG")
    return ",".join(format_number(float(v)) for v in values).encode("ascii")


def test_the_ascii_reply_is_written_before_the_measurement_waits(counted):
    written: list[int] = []
    commands, session = _meter(written, counted)
    reply = asyncio.run(commands.execute(session, f"{LIST};READ?"))
    # Both values of every point were written when the wait began; none after it.
    assert written == [2 * len(FREQUENCIES)]
    assert counted[0] == 2 * len(FREQUENCIES)
    reading = commands.instrument.last
    assert reading is not None
    assert reply == _expected(reading, commands.instrument.settings.pair)


def test_a_pair_chosen_after_the_measurement_gets_its_own_reply(counted):
    written: list[int] = []
    commands, session = _meter(written, counted)

    async def run() -> tuple[bytes | None, bytes | None]:
        first = await commands.execute(session, f"{LIST};READ?")
        changed = await commands.execute(session, "FORM:PAIR MAGN,PHAS;CIRC PAR;FETC?")
        return first, changed

    first, changed = asyncio.run(run())
    reading = commands.instrument.last
    assert reading is not None
    assert first == _expected(reading, ("REAL", "IMAG"))
    assert changed == _expected(reading, ("MAGN", "PHAS"), "PAR")
    assert changed != first
