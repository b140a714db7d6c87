"""A point-by-point sweep: the message made once per sweep, the pair read fast, failures named.

The driver makes each point sequence's message once per sweep and fills in only the frequency,
reads the two numbers of a reading without numpy, and names the point ("measuring at ... Hz")
only when a failure needs it. These tests hold that to the slow way it replaced:

- every message is byte for byte what filling in every command with Python's ``str.format``
  and joining them with the dialect's separator gives (the rule the dialect file documents),
  for every shipped meter dialect and shapes a dialect may take;
- the fast reader takes and refuses exactly what :func:`drivers.scpi.parse_numbers` does
  (the IEEE 488.2 number rules those tests check), with the same numbers to the last bit, and
  refuses with the same message;
- a point that fails is still named by its frequency, written with Python's ``g`` format
  (Python's format-specification mini-language: 6 significant digits, so 12345.678 is
  ``12345.7``).
"""

from __future__ import annotations

import dataclasses
import math
import random
from collections.abc import Callable

import numpy as np
import pytest

from drivers import point_message, retry, scpi
from drivers.dialect import DIRECTORY, Dialect, Operation
from drivers.dialect_file import list_dialects, load_dialect
from drivers.errors import ConnectionLost, ReplyError, SettingRefused
from drivers.meter import ImpedanceMeter
from drivers.settings import number_text

READING = "1.25E+01,-6.2831853E+02"


class FakeSession:
    """A session in memory speaking ``dialect``: records every message, answers each query of
    a compound message by what its operation's reply is (``readings`` through ``reading``)."""

    resource_name = "fake"
    timeout = 1.0
    suspect = False

    def __init__(self, dialect: Dialect, reading: Callable[[str], str] = lambda m: READING):
        self.dialect = dialect
        self.reading = reading
        self.sent: list[str] = []
        self.queue: list[str] = []
        self.retries = dialect.retries
        self.on_reopen: Callable[[], None] | None = None
        self.reopen_fails = False
        self._queries = {op.command: op for op in dialect.operations.values() if op.query}

    def write(self, message: str) -> None:
        self.sent.append(message)

    def query(self, message: str, timeout: float | None = None) -> str:
        self.sent.append(message)
        replies = []
        for part in message.split(self.dialect.separator):
            op = self._queries.get(part.strip())
            if op is None:
                continue
            if op.reply == "readings":
                replies.append(self.reading(message))
            elif op.reply == "error":
                replies.append(self.queue.pop(0) if self.queue else '0,"No error"')
            elif op.reply == "identity":
                replies.append("Fake,Meter,0,1")
            else:
                replies.append("1")
        return self.dialect.reply_separator.join(replies)

    def call(self, what, action, idempotent=True):
        return retry.call(self, what, action, idempotent)

    def reconnect(self, attempt: int = 1) -> None:
        if self.reopen_fails:
            raise ConnectionLost("fake: the connection was refused")
        self.sent.append("(reconnect)")
        if self.on_reopen is not None:
            self.on_reopen()


def formatted(dialect: Dialect, steps: list[Operation], frequency: np.float64) -> str:
    """The message of ``steps`` at ``frequency`` made the slow way: every command filled in
    with ``str.format`` and the settings' number text, joined with the separator."""
    text = number_text(frequency)
    return dialect.separator.join(op.command.format(frequency=text) for op in steps)


def with_commands(dialect: Dialect, **commands: str) -> Dialect:
    ops = dict(dialect.operations)
    for name, command in commands.items():
        placeholders = frozenset({"frequency"}) if "{frequency}" in command else frozenset()
        ops[name] = dataclasses.replace(ops[name], command=command, placeholders=placeholders)
    return dataclasses.replace(dialect, operations=ops)


def shipped() -> list[Dialect]:
    names = list_dialects("meter")
    assert names, "no shipped meter dialect found"
    return [load_dialect(n) for n in names] + [load_dialect(DIRECTORY / "template.toml")]


def shapes() -> list[tuple[str, Dialect]]:
    base = load_dialect("simulated")
    fetch = ("point_mode", "set_frequency", "trigger", "wait", "fetch", "wait")
    return [(d.name, d) for d in shipped()] + [
        ("trigger-fetch", dataclasses.replace(base, point_sequence=fetch)),
        ("no point_mode", dataclasses.replace(base, point_sequence=("set_frequency", "read"))),
        (
            "frequency twice",
            with_commands(base, set_frequency="SOUR:FREQ {frequency};FR {frequency}"),
        ),
        ("literal braces", with_commands(base, set_frequency="FREQ {{{frequency}}}{{hz}}")),
        ("other separator", dataclasses.replace(base, separator=" ; ")),
        (
            "frequency last",
            dataclasses.replace(
                with_commands(base, set_frequency="F{frequency}"),
                point_sequence=("point_mode", "read", "wait", "set_frequency"),
            ),
        ),
    ]


def frequencies(dialect: Dialect) -> np.ndarray:
    lo, hi = dialect.frequency_min, dialect.frequency_max
    rng = np.random.default_rng(7)
    awkward = [lo, hi, 1e3, 12345.678, 100.30000000000001, 1000.0000000000001, 2.0**20]
    awkward += [np.nextafter(lo, hi), np.nextafter(hi, lo), 1 / 3 * 1e4, 999999.9999999999]
    f = np.concatenate([np.geomspace(lo, hi, 151), rng.uniform(lo, hi, 150), awkward])
    return f[(f >= lo) & (f <= hi)]


@pytest.mark.parametrize(("name", "dialect"), shapes(), ids=[n for n, _ in shapes()])
def test_each_point_sends_what_formatting_every_command_gives(name, dialect):
    session = FakeSession(dialect)
    meter = ImpedanceMeter(session, dialect)  # type: ignore[arg-type]
    f = frequencies(dialect)
    z = meter.sweep(f, mode="points")
    full = [dialect.operations[n] for n in dialect.point_sequence]
    lean = [op for op in full if op.name != "point_mode"]
    expected = [formatted(dialect, full if i == 0 else lean, fi) for i, fi in enumerate(f)]
    assert session.sent[: f.size] == expected
    assert session.sent[f.size :] == ["SYST:ERR?"]  # the sweep's error-queue check
    np.testing.assert_array_equal(z, np.full(f.size, 12.5 - 628.31853j))


@pytest.mark.parametrize(
    "command",
    ["FREQ {frequency:g}", "FREQ {frequency!r}", "FREQ {count}", "FREQ {frequency.real}"],
)
def test_a_command_with_another_field_is_formatted_the_slow_way(command):
    base = load_dialect("simulated")
    op = dataclasses.replace(base.operations["set_frequency"], command=command)
    assert point_message.message_parts([op], ";") is None


def test_after_a_reply_cut_short_the_point_is_measured_again_from_point_mode():
    dialect = load_dialect("simulated")
    session = FakeSession(dialect)
    answer = session.query
    cut: list[str] = []

    def cut_once(message: str, timeout: float | None = None) -> str:
        reply = answer(message, timeout)
        if message.endswith("FREQ 1000.0;READ?;*OPC?") and not cut:
            cut.append(reply)
            return reply[: len("1.25E+01,-6.28")]  # cut short: a shorter number, no ";1"
        return reply

    session.query = cut_once  # type: ignore[method-assign]
    meter = ImpedanceMeter(session, dialect)  # type: ignore[arg-type]
    seen: list[tuple[float, complex]] = []
    f = [100.0, 1e3, 1e4]
    z = meter.sweep(f, mode="points", on_points=lambda f, z: seen.append((f[0], z[0])))
    points = [m for m in session.sent if "FREQ " in m or m == "(reconnect)"]
    assert points == [
        "FREQ:MODE FIX;FREQ 100.0;READ?;*OPC?",
        "FREQ 1000.0;READ?;*OPC?",
        "(reconnect)",
        "FREQ:MODE FIX;FREQ 1000.0;READ?;*OPC?",
        "FREQ 10000.0;READ?;*OPC?",
    ]
    assert cut == [READING + ";1"]
    assert seen == [(fi, 12.5 - 628.31853j) for fi in f]
    np.testing.assert_array_equal(z, np.full(3, 12.5 - 628.31853j))


@pytest.mark.parametrize(
    ("ack", "taken"), [("0", False), ("1.0", True), ("+1.00E+00", True), ("1_0", False)]
)
def test_an_acknowledgement_is_the_number_one_however_written(ack, taken):
    dialect = load_dialect("simulated")
    session = FakeSession(dialect)
    answer = session.query

    def replace_ack(message: str, timeout: float | None = None) -> str:
        reply = answer(message, timeout)
        return reply[:-1] + ack if message.endswith("READ?;*OPC?") else reply

    session.query = replace_ack  # type: ignore[method-assign]
    meter = ImpedanceMeter(session, dialect)  # type: ignore[arg-type]
    if taken:
        assert meter.measure(1e3) == 12.5 - 628.31853j
    else:
        with pytest.raises(ReplyError, match=r"expected the acknowledgement 1 to '\*OPC\?'"):
            meter.measure(1e3)


# -- the reading pair -------------------------------------------------------------------------

VALID = [
    READING,
    "+1,-2",
    "1.,.5",
    "-.5,+0.0",
    "-0,0",
    "1e5,2E-3",
    "1.5E+03,-4.25e-01",
    " 1.5 , 2.5 ",
    "\t1,2\x00",  # IEEE 488.2 white space includes the control characters but LF
    "1 E 3,2",  # white space around the exponent mark (IEEE 488.2 7.7.2 program data)
    "1,2\n",
    "9.9E37,-9.9E+37",  # SCPI-99 overrange marker: a number, turned into inf later
    "9.91E37,1",  # SCPI-99 "invalid" marker
    "007,0.000",
    "9007199254740993,1",  # 2**53 + 1: rounds half to even to 2**53 (IEEE 754, from memory)
    "2.2250738585072011e-308,4.9e-324",  # near the smallest normal and subnormal doubles
    "1e400,-1e400",  # beyond the largest double: infinity, as Python's float gives
    "1e-400,1.7976931348623157e308",
    "0.1000000000000000055511151231257827,3.14159265358979323846264338327950288",
]

REFUSED = [
    "",
    "1",
    "1,2,3",
    "nan,1",
    "1,inf",
    "1,",
    ",1",
    "1,,2",
    "1_0,2",
    "\u0661,2",  # an Arabic-Indic digit
    "0x1,2",
    "+,1",
    "1e,2",
    ".,1",
    "1 2,3",
    "1;2",
    "1,2\n3",
    "1\u00a0,2",  # a no-break space is not IEEE 488.2 white space
    "1.25E+01,-6.28;1",
]


def outcome(read: Callable[[str], object], text: str) -> object:
    try:
        values = read(text)
    except ReplyError as exc:
        return ("refused", str(exc))
    return tuple((v, math.copysign(1.0, v)) for v in np.asarray(values, dtype=float).tolist())


def fast(text: str) -> tuple[float, float]:
    return point_message.reading_pair(text, point_message.pair_pattern())


def slow(text: str) -> np.ndarray:
    return scpi.parse_numbers(text, expected=2)


@pytest.mark.parametrize("text", VALID)
def test_the_fast_reader_takes_what_parse_numbers_takes(text):
    assert outcome(fast, text) == outcome(slow, text)
    assert outcome(fast, text)[0] != "refused"


@pytest.mark.parametrize("text", REFUSED)
def test_the_fast_reader_refuses_what_parse_numbers_refuses(text):
    assert outcome(fast, text) == outcome(slow, text)
    assert outcome(fast, text)[0] == "refused"


def test_the_fast_reader_agrees_on_random_replies():
    rng = random.Random(20261202)
    alphabet = "0123456789" * 3 + "+-.eE, \t\n\x00_ai"
    texts = ["".join(rng.choices(alphabet, k=rng.randint(0, 14))) for _ in range(20000)]
    for _ in range(5000):  # two long numbers: rounding of many digits, huge and tiny exponents
        digits = [
            f"{rng.choice('+-')}{rng.randint(0, 10 ** rng.randint(1, 30))}"
            f".{rng.randint(0, 10**20)}e{rng.randint(-330, 330)}"
            for _ in range(2)
        ]
        texts.append(",".join(digits))
    accepted = 0
    for text in texts:
        got = outcome(fast, text)
        assert got == outcome(slow, text), text
        accepted += got[0] != "refused"
    assert accepted > 5000


def test_the_fast_reader_gives_python_floats():
    assert fast(READING) == (12.5, -628.31853)
    assert all(type(v) is float for v in fast("1 E 3,2"))


# -- a failing point is named by its frequency ------------------------------------------------


def failing_meter(reading: Callable[[str], str], **changes) -> tuple[ImpedanceMeter, FakeSession]:
    dialect = dataclasses.replace(load_dialect("simulated"), **changes)
    session = FakeSession(dialect, reading)
    return ImpedanceMeter(session, dialect), session  # type: ignore[arg-type]


def garbled_at(frequency: str) -> Callable[[str], str]:
    return lambda message: "1.25E+01" if f"FREQ {frequency};" in message else READING


def test_a_point_whose_replies_are_all_malformed_is_named():
    meter, _ = failing_meter(garbled_at("12345.678"))
    with pytest.raises(ReplyError) as info:
        meter.sweep([1e3, 12345.678, 1e5], mode="points")
    assert str(info.value).startswith("measuring at 12345.7 Hz on fake: every reply was malformed")


def test_a_point_the_meter_explains_is_named_with_its_reason():
    def reading(message: str) -> str:
        if "FREQ 2000000.0;" in message:
            session.queue.append('-222,"Data out of range"')
            return "1.25E+01"
        return READING

    meter, session = failing_meter(reading)
    with pytest.raises(SettingRefused) as info:
        meter.sweep([1e3, 2e6], mode="points")
    message = str(info.value)
    assert message.startswith('measuring at 2e+06 Hz on fake: the meter reported -222,"Data out')


def test_a_point_not_safe_to_repeat_is_named():
    ops = dict(load_dialect("simulated").operations)
    ops["read"] = dataclasses.replace(ops["read"], idempotent=False)
    meter, _ = failing_meter(garbled_at("50.5"), operations=ops)
    with pytest.raises(ReplyError) as info:
        meter.sweep([50.5], mode="points")
    assert str(info.value).startswith("measuring at 50.5 Hz on fake failed (")
    assert "it was not repeated" in str(info.value)


def test_a_point_whose_connection_cannot_be_reopened_is_named():
    meter, session = failing_meter(garbled_at("300.0"))
    session.reopen_fails = True
    with pytest.raises(ConnectionLost) as info:
        meter.sweep([300.0], mode="points")
    assert str(info.value).startswith("lost fake during measuring at 300 Hz (")
