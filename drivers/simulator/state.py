"""The simulated meter's settings (shared by every client) and each client's status registers.

The limits and defaults here are the ones documented in ``COMMANDS.md``.
"""

from __future__ import annotations

from collections import deque
from dataclasses import dataclass, field

from drivers.simulator.scpi_parser import ERROR_MESSAGES

FREQUENCY_MIN = 10.0
FREQUENCY_MAX = 30e6
FREQUENCY_DEFAULT = 1e3
LEVEL_MIN = 0.002
LEVEL_MAX = 3.0
LEVEL_DEFAULT = 0.5
AVERAGING_MAX = 500
PERIODS_MIN = 1
PERIODS_MAX = 1000
PERIODS_DEFAULT = 4
LIST_MAX = 2000
TIME_MAX = 60.0
ERROR_QUEUE_SIZE = 20

#: The words of ``FORMat:PAIR`` (long forms; the capitals are the short form).
PAIR_WORDS = (
    "REAL",
    "IMAGinary",
    "MAGNitude",
    "PHASe",
    "CONDuctance",
    "SUSCeptance",
    "INDuctance",
    "CAPacitance",
    "RESistance",
    "QUALity",
    "DISSipation",
)
#: Which two words make a pair (in either order), by their short forms.
PAIRS = frozenset(
    {frozenset({"REAL", "IMAG"}), frozenset({"MAGN", "PHAS"}), frozenset({"COND", "SUSC"})}
    | {frozenset({a, b}) for a in ("IND", "CAP") for b in ("RES", "QUAL", "DISS")}
)
CIRCUITS = ("SERies", "PARallel")
ANGLE_UNITS = ("DEGree", "RADian")

# IEEE 488.2 standard event status register bits.
ESR_OPC = 1
ESR_QUERY_ERROR = 4
ESR_DEVICE_ERROR = 8
ESR_EXECUTION_ERROR = 16
ESR_COMMAND_ERROR = 32
# Status byte bits (SCPI: bit 2 is the error queue summary, bit 5 the event status summary).
STB_ERROR_QUEUE = 4
STB_EVENT_SUMMARY = 32


@dataclass
class Settings:
    """Measurement settings; a new instance holds the ``*RST`` defaults."""

    frequency: float = FREQUENCY_DEFAULT
    mode: str = "FIX"
    frequency_list: tuple[float, ...] = ()
    level: float = LEVEL_DEFAULT
    periods: int = PERIODS_DEFAULT
    averaging: int = 1
    trigger_source: str = "IMM"
    data_format: str = "ASC"
    byte_order: str = "NORM"
    pair: tuple[str, str] = ("REAL", "IMAG")
    circuit: str = "SER"
    angle_unit: str = "DEG"


def _esr_bit(code: int) -> int:
    if -199 <= code <= -100:
        return ESR_COMMAND_ERROR
    if -299 <= code <= -200:
        return ESR_EXECUTION_ERROR
    if -399 <= code <= -300 or code > 0:
        return ESR_DEVICE_ERROR
    if -499 <= code <= -400:
        return ESR_QUERY_ERROR
    return 0


@dataclass
class ClientStatus:
    """One client's error queue and event status registers (IEEE 488.2 / SCPI-99)."""

    errors: deque[tuple[int, str]] = field(default_factory=deque)
    event_status: int = 0
    event_enable: int = 0

    def push(self, code: int, text: str | None = None) -> None:
        """Queue an error; when the queue is full its newest entry becomes -350 Queue overflow."""
        message = ERROR_MESSAGES.get(code, "Simulated error") if text is None else text
        self.event_status |= _esr_bit(code)
        if len(self.errors) < ERROR_QUEUE_SIZE:
            self.errors.append((code, message))
        else:
            self.errors[-1] = (-350, ERROR_MESSAGES[-350])

    def pop(self) -> tuple[int, str]:
        """The oldest error, or ``(0, "No error")``."""
        return self.errors.popleft() if self.errors else (0, ERROR_MESSAGES[0])

    def clear(self) -> None:
        """``*CLS``: empty the error queue and the event status register."""
        self.errors.clear()
        self.event_status = 0

    def read_event_status(self) -> int:
        """``*ESR?``: the event status register, cleared by reading."""
        value, self.event_status = self.event_status, 0
        return value

    @property
    def status_byte(self) -> int:
        """``*STB?``: error queue summary (bit 2) and event status summary (bit 5)."""
        value = STB_ERROR_QUEUE if self.errors else 0
        if self.event_status & self.event_enable:
            value |= STB_EVENT_SUMMARY
        return value
