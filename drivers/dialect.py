"""Dialect files: which commands a meter family understands and what its replies mean.

A dialect is a TOML file (``drivers/dialects/<name>.toml`` for the shipped ones, or any path).
It names, for each abstract operation the driver needs (identify, set the frequency, read a
point, load a frequency list, ...), a command template with named placeholders, whether it is a
query and what its reply means; plus terminations, timeouts, the frequency range, list-mode
limits, ASCII/binary transfer and the order of steps for one point and for one list. Every key
is checked when the file is loaded (:func:`drivers.dialect_file.load_dialect`, which reads the file,
and :mod:`drivers.dialect_check`, which checks it); a malformed dialect raises
:class:`DialectError` naming the file, the key and the reason. This module holds only what a
dialect is: the data classes and the vocabulary of operations, replies and placeholders.
``drivers/dialects/template.toml`` explains every key.

A dialect file is of one of two kinds (``kind`` at the top): a ``"meter"`` (the default) or a
``"current-source"``, the DC source that supplies bias when the meter has none of its own. A
meter dialect may declare the bias operations (:data:`BIAS_OPERATIONS`: all four of
:data:`BIAS_REQUIRED` or none); a source dialect holds only its connection, its error codes and
the :data:`SOURCE_OPERATIONS`, and loads as a :class:`SourceDialect`
(:func:`drivers.dialect_file.load_source_dialect`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from drivers.errors import DialectError

DIRECTORY = Path(__file__).resolve().parent / "dialects"
SCHEMA = 1

#: Every operation a dialect may define, with what it does.
OPERATIONS: dict[str, str] = {
    "identify": "ask the meter who it is (*IDN?)",
    "reset": "return the meter's settings to its defaults",
    "clear_status": "clear the error queue and status registers",
    "setup": "put the meter in the state the dialect assumes (reading pair, byte order, ...)",
    "next_error": "read the oldest entry of the error queue",
    "set_frequency": "set the test frequency for one point: {frequency}",
    "point_mode": "measure at the single frequency rather than the list",
    "list_mode": "measure every frequency of the list",
    "set_list": "load the frequency list: {frequencies} (comma-separated), {count}",
    "trigger": "start a measurement",
    "wait": "wait until the measurement ends (a query answering 1, such as *OPC?)",
    "fetch": "return the readings of the last measurement",
    "read": "trigger, wait and return the readings in one query",
    "ascii": "switch readings to ASCII",
    "binary": "switch readings to binary blocks",
    "set_level": "set the test-signal level in volt: {level}",
    "set_speed": "set the measurement speed: {speed} (a word from choices)",
    "set_averaging": "set how many readings are averaged per point: {averaging}",
    "dc_resistance": "measure the DC resistance in ohm",
    "next_unit": "simulator only: put the next production unit (drawn from its spread) in",
    "set_bias": "set the DC bias current in ampere: {current}; max is the largest allowed",
    "bias_on": "switch the DC bias on",
    "bias_off": "switch the DC bias off",
    "read_bias": "read back the DC bias actually applied, in ampere",
    "bias_limit": "ask the meter the largest DC bias it allows, in ampere",
}
REQUIRED = ("identify", "next_error")
#: The bias operations of a meter dialect; the first four come together or not at all.
BIAS_OPERATIONS = ("set_bias", "bias_on", "bias_off", "read_bias", "bias_limit")
BIAS_REQUIRED = BIAS_OPERATIONS[:4]

#: The kinds of dialect file (the top-level ``kind`` key; ``"meter"`` when it is left out).
KINDS = ("meter", "current-source")
#: The operations a current-source dialect may leave out.
SOURCE_OPTIONAL = ("reset", "clear_status", "setup", "current_limit")
#: Every operation a current-source dialect may define, with what it does.
SOURCE_OPERATIONS: dict[str, str] = {
    "identify": "ask the source who it is (*IDN?)",
    "next_error": "read the oldest entry of the error queue",
    "reset": "return the source's settings to its defaults",
    "clear_status": "clear the error queue and status registers",
    "setup": "put the source in the state the dialect assumes",
    "set_current": "set the output current in ampere: {current}; max is the largest allowed",
    "output_on": "switch the output on",
    "output_off": "switch the output off",
    "read_current": "measure the current actually flowing, in ampere",
    "current_limit": "ask the source the largest current it allows, in ampere",
}
SOURCE_REQUIRED = tuple(name for name in SOURCE_OPERATIONS if name not in SOURCE_OPTIONAL)
OPTIONAL = ("dc_resistance", "set_level", "set_speed", "set_averaging", "reset", "binary")

#: The reply each query operation must declare (others may only be "ack").
REPLIES: dict[str, str] = {
    "identify": "identity",
    "next_error": "error",
    "fetch": "readings",
    "read": "readings",
    "dc_resistance": "number",
    "read_bias": "number",
    "bias_limit": "number",
    "read_current": "number",
    "current_limit": "number",
}
REPLY_KINDS = ("identity", "error", "readings", "number", "ack")

#: Placeholders an operation may always use; sequences add their own (see _check_sequence).
OWN_PLACEHOLDERS: dict[str, frozenset[str]] = {
    "set_frequency": frozenset({"frequency"}),
    "set_list": frozenset({"frequencies", "count"}),
    "set_level": frozenset({"level"}),
    "set_speed": frozenset({"speed"}),
    "set_averaging": frozenset({"averaging"}),
    "set_bias": frozenset({"current"}),
    "set_current": frozenset({"current"}),
}
PLACEHOLDERS = frozenset({"frequency", "frequencies", "count", "level", "speed", "averaging"})
PLACEHOLDERS |= {"current"}
#: Operations whose command must hold ``{current}`` and give ``max``: the largest current, A.
CURRENT_SETTERS = ("set_bias", "set_current")
SEQUENCE_PLACEHOLDERS = {
    "point": frozenset({"frequency"}),
    "list": frozenset({"frequencies", "count"}),
}


@dataclass(frozen=True)
class Operation:
    """One abstract operation: its command template and what its reply means."""

    name: str
    command: str
    query: bool = False
    reply: str | None = None
    placeholders: frozenset[str] = frozenset()
    minimum: float | None = None
    maximum: float | None = None
    choices: dict[str, str] = field(default_factory=dict)
    idempotent: bool = True

    def format(self, **values: Any) -> str:
        """The command with its placeholders filled in."""
        return self.command.format(**values)


@dataclass(frozen=True)
class MeterAccuracy:
    """What the meter's maker states about the error of one reading (the ``[accuracy]`` table).

    Our own form (``drivers/dialects/template.toml`` documents each key). For a reading of
    magnitude ``|Z|`` (ohm) at ``f`` (Hz) and test level ``V`` (V rms), with
    ``k_f = 1 + f/frequency_corner`` and ``r = reference_level/V`` (1 at the reference level):

    - the half-width of the error of R and of X, each (ohm; the bound the error stays within)::

          a = relative · k_f · (|Z| + r·(low_impedance + |Z|²/high_impedance))

    - the standard deviation of one reading of R and of X, each (ohm; its repeatability) at speed
      word ``s`` with ``n`` readings averaged::

          σ = repeatability · k_f · (speed_factors[s]/√n)
              · (√r·|Z| + r·(low_impedance + |Z|²/high_impedance))

    So the relative error is ``relative`` in the middle of the range and grows at low ``|Z|``
    (an impedance floor), at high ``|Z|`` (an admittance floor), at high frequency and at low
    test levels.
    """

    relative: float
    low_impedance: float
    high_impedance: float
    frequency_corner: float
    reference_level: float = 1.0
    repeatability: float = 0.0
    speed_factors: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class Dialect:
    """A loaded, validated dialect. Times are seconds, frequencies hertz."""

    name: str
    path: Path
    description: str
    operations: dict[str, Operation] = field(repr=False)
    pair: tuple[str, str]
    qd_sign: str
    frequency_min: float
    frequency_max: float
    point_sequence: tuple[str, ...]
    list_sequence: tuple[str, ...] = ()
    list_max_points: int = 0
    list_min_points: int = 1
    settle: float = 0.0
    transfer: str = "ascii"
    datatype: Literal["d", "f"] = "d"
    big_endian: bool = True
    write_termination: str = "\n"
    read_termination: str = "\n"
    encoding: str = "ascii"
    timeout: float = 5.0
    per_point_timeout: float = 0.1
    open_timeout: float = 5.0
    compound: bool = True
    separator: str = ";"
    reply_separator: str = ";"
    retries: int = 2
    retry_wait: float = 0.2
    warning_codes: frozenset[int] = frozenset()
    accuracy: MeterAccuracy | None = None

    @property
    def has_bias(self) -> bool:
        """True if the meter can supply DC bias itself (the dialect's bias operations)."""
        return "set_bias" in self.operations

    @property
    def has_list(self) -> bool:
        """True if the meter has a list mode the driver can use."""
        return bool(self.list_sequence)

    def has(self, operation: str) -> bool:
        """True if the dialect defines ``operation``."""
        return operation in self.operations

    def operation(self, name: str, purpose: str = "") -> Operation:
        """The operation ``name``, or a :class:`DialectError` saying the meter lacks it."""
        try:
            return self.operations[name]
        except KeyError:
            why = f" needed to {purpose}" if purpose else ""
            raise DialectError(
                f"dialect {self.name!r} ({self.path}) has no operation {name!r}{why}; "
                f"add [operations.{name}] to the dialect if the meter can do it, "
                "or remove that step from the plan"
            ) from None


@dataclass(frozen=True)
class SourceDialect:
    """A loaded, validated current-source dialect (``kind = "current-source"``): how to reach a
    DC current source and its :data:`SOURCE_OPERATIONS`. Times are seconds, currents ampere."""

    name: str
    path: Path
    description: str
    operations: dict[str, Operation] = field(repr=False)
    write_termination: str = "\n"
    read_termination: str = "\n"
    encoding: str = "ascii"
    timeout: float = 5.0
    open_timeout: float = 5.0
    retries: int = 2
    retry_wait: float = 0.2
    warning_codes: frozenset[int] = frozenset()

    def has(self, operation: str) -> bool:
        """True if the dialect defines ``operation``."""
        return operation in self.operations
