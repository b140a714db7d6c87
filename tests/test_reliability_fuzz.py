"""Property and fuzz tests: whatever a meter sends or a user types, a value or our own error.

Instrument replies (numbers, lists of readings in ASCII and in binary blocks, identity, the
error queue, acknowledgements) go through drivers/scpi.py, drivers/readings.py and a real
:class:`~drivers.exchange.Exchange` over a real :class:`~drivers.session.Session` whose VISA
resource is replaced by a stand-in that returns the fuzzed bytes. Plan files go through
:func:`acquire.production.plan_file.parse_plan` (the example plan with arbitrary TOML values at
random keys, and arbitrary text); command-line values through acquire/units.py and
:func:`acquire.commands.options.parse_time`. Each input must end in a value or an
:class:`~acquire.errors.AcquireError` / :class:`~drivers.errors.InstrumentError`; any other
exception fails the test. Where a value is accepted, it is checked against an outside reference
(Python's float and struct for IEEE 754 numbers, the clauses of IEEE 488.2 and SCPI-99 named
beside each check, Python's datetime for ISO 8601).

Dialect files, simulator profiles and reference files have their properties in
tests/test_hardening_files.py and are not repeated here.

CI runs a reduced number of examples per test (the file takes well under 90 s on two cores);
``ACQUIRE_LONG_TESTS=1`` runs ten times as many.
"""

from __future__ import annotations

import math
import os
import re
import struct
import warnings
from datetime import UTC, datetime, timedelta, timezone

import numpy as np
from hypothesis import HealthCheck, example, given, settings
from hypothesis import strategies as st
from pyvisa import constants
from pyvisa.errors import VisaIOError

from acquire.commands.options import parse_time
from acquire.errors import AcquireError
from acquire.production.plan import TestPlan
from acquire.production.plan_file import example_plan_path, parse_plan
from acquire.units import (
    ABSOLUTE_ZERO_C,
    parse_fraction,
    parse_length,
    parse_list,
    parse_quantity,
    parse_temperature,
)
from drivers import readings, scpi
from drivers.dialect import DIRECTORY, Dialect
from drivers.dialect_file import load_dialect
from drivers.error_queue import ErrorQueue
from drivers.errors import InstrumentError, SettingRefused
from drivers.exchange import Exchange
from drivers.session import Session

OWN = (AcquireError, InstrumentError)
LONG = os.environ.get("ACQUIRE_LONG_TESTS") == "1"


def budget(n: int) -> settings:
    """Hypothesis settings: 2 n examples at CI settings, ten times that when long."""
    return settings(
        max_examples=n * 20 if LONG else n * 2,
        deadline=None,
        suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much],
    )


def outcome(call, *args, **kwargs):
    """``call(*args)``'s value, or None when it raised one of the project's own errors."""
    try:
        return call(*args, **kwargs)
    except OWN:
        return None


# ----------------------------------------------------------------------------------------------
# Strategies for replies

#: IEEE 488.2 (7.4.1.2) white space: ASCII 0-9 and 11-32 (control characters but LF, and space).
IEEE_WHITE = "".join(chr(c) for c in [*range(0, 10), *range(11, 33)])
#: Characters a garbled line may pick up: digits of other scripts, words Python's float takes,
#: separators, quotes and line ends.
NOISE = st.sampled_from(
    [
        "\x00",
        "\n",
        "\r",
        " ",
        "\t",
        ",",
        ";",
        '"',
        "#",
        "_",
        "e",
        "E",
        "+",
        "-",
        ".",
        "1",
        "0",
        "9",
        "\u0661",
        "\uff11",
        "\u00b2",
        "inf",
        "nan",
        "Infinity",
        "\x7f",
        "\u00e9",
        "\ufffd",
    ]
)
FINITE = st.floats(allow_nan=False, allow_infinity=False)
MARKERS = st.sampled_from(["9.9E37", "-9.9E37", "9.91E37", "+9.90000E+37", "9.91e+37"])


@st.composite
def number_text(draw) -> str:
    """A number as a meter might write it: NR1, NR2 or NR3, signs, exponents, white space."""
    x = draw(FINITE)
    style = draw(st.integers(0, 5))
    if style == 0:
        text = repr(x)
    elif style == 1:
        text = f"{x:.6E}"
    elif style == 2:
        text = str(int(x)) if abs(x) < 1e300 else repr(x)
    elif style == 3:
        text = draw(MARKERS)
    elif style == 4:
        text = f"{x:+.12e}".replace("e", draw(st.sampled_from(["e", "E", " E ", "e\t"])))
    else:
        text = draw(
            st.from_regex(r"[+-]?[0-9]{1,30}(\.[0-9]{0,20})?([eE][+-]?[0-9]{1,4})?", fullmatch=True)
        )
    pad = st.text(alphabet=" \t\r", max_size=2)
    return draw(pad) + text + draw(pad)


@st.composite
def garbled(draw, text: str) -> str:
    """``text`` with a few characters dropped, replaced or inserted, or cut short."""
    chars = list(text)
    for _ in range(draw(st.integers(0, 3))):
        action = draw(st.integers(0, 3))
        at = draw(st.integers(0, len(chars)))
        if action == 0 and chars:
            del chars[min(at, len(chars) - 1)]
        elif action == 1:
            chars.insert(at, draw(NOISE))
        elif action == 2 and chars:
            chars[min(at, len(chars) - 1)] = draw(NOISE)
        else:
            chars = chars[:at]
    return "".join(chars)


def reply_text(parts: st.SearchStrategy[str]) -> st.SearchStrategy[str]:
    """Well-formed replies, garbled replies and arbitrary text."""
    return st.one_of(parts, parts.flatmap(garbled), st.text(max_size=40))


def number_list(count: int | None = None) -> st.SearchStrategy[str]:
    size = {"min_size": count, "max_size": count} if count else {"min_size": 1, "max_size": 8}
    return st.lists(number_text(), **size).map(",".join)


def ieee_fields(text: str) -> list[str]:
    """``text`` cut at commas, with IEEE 488.2 white space removed (our own reading)."""
    cleaned = "".join(c for c in text.rstrip("\n") if c not in IEEE_WHITE)
    return cleaned.split(",")


# ----------------------------------------------------------------------------------------------
# Numbers (IEEE 488.2, 7.7.2 decimal numeric data; SCPI-99 markers 9.9E37 and 9.91E37)


@budget(400)
@given(text=reply_text(number_text()))
@example(text="1_0")
@example(text="\u0661")
@example(text="1e999")
@example(text="9" * 400)
@example(text="1 E 3")
def test_one_number_ends_in_a_float_or_a_reply_error(text):
    value = outcome(scpi.parse_number, text)
    if value is None:
        return
    # IEEE 488.2 7.7.2: ASCII digits, sign, point and exponent only; nothing Python's float
    # alone would also take (underscores, other scripts' digits, inf, nan).
    assert text.isascii() and "_" not in text
    assert not re.search(r"inf|nan", text, re.IGNORECASE)
    (field,) = ieee_fields(text)
    reference = float(field)  # Python's float: correctly rounded IEEE 754 conversion
    if abs(abs(reference) - 9.91e37) <= 9.91e37 * 1e-5:
        assert math.isnan(value)
    elif abs(abs(reference) - 9.9e37) <= 9.9e37 * 1e-5 or math.isinf(reference):
        assert value == math.copysign(math.inf, reference)
    else:
        assert value == reference


@budget(300)
@given(
    case=st.integers(1, 4).flatmap(
        lambda n: st.tuples(st.just(2 * n), reply_text(number_list(2 * n)))
    )
)
@example(case=(2, "1.5,2.5\n"))
@example(case=(2, "1.5,\n2.5"))
@example(case=(2, "1.5,2.5,"))
@example(case=(2, "1.5,,2.5"))
def test_a_list_of_numbers_ends_in_exactly_that_many_floats_or_a_reply_error(case):
    count, text = case
    values = outcome(scpi.parse_numbers, text, expected=count)
    if values is None:
        return
    assert "\n" not in text.rstrip("\n") and text.isascii()
    fields = ieee_fields(text)
    assert values.shape == (count,) == (len(fields),)
    assert np.array_equal(values, np.array([float(f) for f in fields]), equal_nan=True)


# ----------------------------------------------------------------------------------------------
# Identity and the error queue (IEEE 488.2 10.14 *IDN?; SCPI-99 volume 2, chapter 21)

FIELD = st.text(alphabet=st.characters(min_codepoint=32, max_codepoint=126), max_size=12)
IDENTITY = st.lists(FIELD, min_size=1, max_size=5).map(",".join)


@budget(300)
@given(first=reply_text(IDENTITY), second=st.one_of(st.none(), reply_text(IDENTITY)))
@example(first="Maker,Model,123,1.0", second=None)
@example(first=",Model,123,1.0", second=None)
@example(first="Maker,Mod\x00el,123,1.0", second=None)
@example(first="Maker,Model,123,1.0", second="Maker,Model,123,1.")
def test_an_identity_ends_in_four_printable_fields_or_a_reply_error(first, second):
    if second is None:
        identity = outcome(scpi.parse_identity, first)
    else:
        identity = outcome(scpi.same_identity, first, second)
    if identity is None:
        return
    fields = [identity.manufacturer, identity.model, identity.serial, identity.firmware]
    # IEEE 488.2 10.14: four comma-separated fields, the manufacturer not empty; printable ASCII.
    assert fields[0] and all(f.isascii() and f.isprintable() for f in fields)
    assert [f.strip() for f in first.strip().split(",", 3)] == fields
    if second is not None:
        assert second.strip() == first.strip()


ERROR_REPLY = st.tuples(
    st.one_of(st.integers(-40000, 40000), st.sampled_from([0, -100, -222, -350, -410, -500, -800])),
    st.text(
        alphabet=st.characters(min_codepoint=32, max_codepoint=126, exclude_characters='"'),
        max_size=20,
    ),
).map(lambda t: f'{t[0]},"{t[1]}"')


@budget(300)
@given(text=reply_text(ERROR_REPLY), warning_codes=st.lists(st.integers(-1000, 1000), max_size=3))
@example(text='-222,"Data out of range"', warning_codes=[])
@example(text='99999999999999999999,"x"', warning_codes=[])
@example(text="+0", warning_codes=[])
@example(text='-32769,"too small"', warning_codes=[])
def test_an_error_queue_reply_ends_in_an_entry_or_a_reply_error(text, warning_codes):
    entry = outcome(scpi.parse_error, text, warning_codes)
    if entry is None:
        return
    # SCPI-99 volume 2, 21.8: codes lie in [-32768, 32767]; 0 is "no error"; -500..-899 events.
    assert -32768 <= entry.code <= 32767
    assert int(re.match(r"\s*([+-]?[0-9]+)", text).group(1)) == entry.code
    if entry.code == 0:
        assert entry.severity == "none"
    elif -899 <= entry.code <= -500 or entry.code in warning_codes:
        assert entry.severity == "warning"
    else:
        assert entry.severity == "error"


# ----------------------------------------------------------------------------------------------
# Binary blocks (IEEE 488.2 7.7.6 definite-length arbitrary block) and readings


@st.composite
def block_bytes(draw) -> tuple[bytes, list[float]]:
    """A definite-length block of big-endian doubles, then possibly damaged byte by byte."""
    values = draw(st.lists(st.floats(width=64), min_size=0, max_size=6))
    data = struct.pack(f">{len(values)}d", *values)
    length = str(len(data)).encode()
    raw = bytearray(b"#" + str(len(length)).encode() + length + data)
    for _ in range(draw(st.integers(0, 3))):
        action = draw(st.integers(0, 3))
        at = draw(st.integers(0, len(raw)))
        if action == 0 and raw:
            del raw[min(at, len(raw) - 1)]
        elif action == 1:
            raw.insert(at, draw(st.sampled_from(b"#-+ _09\n\x00\xff")))
        elif action == 2 and raw:
            raw[min(at, len(raw) - 1)] = draw(st.integers(0, 255))
        else:
            raw = raw[:at]
    return bytes(raw), values


@budget(400)
@given(case=st.one_of(block_bytes(), st.binary(max_size=40).map(lambda b: (b, None))))
@example(case=(b"#2-8" + bytes(20), None))
@example(case=(b"#3+08" + bytes(8), None))
@example(case=(b"#2 8" + bytes(8), None))
@example(case=(b"#", None))
@example(case=(b"#9", None))
@example(case=(b"#0abc", None))
def test_a_binary_block_ends_in_its_values_or_a_reply_error(case):
    raw, sent = case
    located = outcome(scpi.find_block, raw)
    if located is None:
        return
    begin, offset, length = located
    values = outcome(scpi.block_values, raw, offset, length, "d", True)
    if values is None:
        return
    # IEEE 488.2 7.7.6.2: '#', a non-zero digit n, n ASCII digits giving the byte count.
    digits = raw[begin + 2 : offset]
    assert raw[begin + 1 : begin + 2] == str(len(digits)).encode() and digits.isdigit()
    assert length == int(digits) and length % 8 == 0 and len(raw) >= offset + length
    # The values are the IEEE 754 doubles of those bytes (Python's struct as reference).
    expected = struct.unpack(f">{length // 8}d", raw[offset : offset + length])
    assert np.array_equal(values, np.array(expected), equal_nan=True)
    if sent is not None and raw == struct_block(sent):
        assert np.array_equal(values, np.array(sent, dtype=float), equal_nan=True)


def struct_block(values: list[float]) -> bytes:
    data = struct.pack(f">{len(values)}d", *values)
    return b"#" + str(len(str(len(data)))).encode() + str(len(data)).encode() + data


READING = st.one_of(FINITE, st.sampled_from([9.9e37, -9.9e37, 9.91e37, math.inf, math.nan]))


@budget(300)
@given(
    pair=st.sampled_from(readings.supported_pairs()),
    swap=st.booleans(),
    qd_sign=st.sampled_from(readings.QD_SIGNS),
    points=st.lists(st.tuples(st.floats(1e-3, 1e9), READING, READING), min_size=1, max_size=5),
)
def test_any_pair_of_numbers_becomes_an_impedance_or_a_marker(pair, swap, qd_sign, points):
    f, a, b = (np.array(column) for column in zip(*points, strict=True))
    named = pair[::-1] if swap else pair
    z = readings.to_impedance(named, f, a, b, qd_sign)
    assert z.shape == f.shape and z.dtype == complex
    # SCPI-99 (volume 1, 7.2.1, from memory for the clause): 9.91E37 is "not a number" and
    # 9.9E37 "infinity"; a point with either in its pair is invalid or overrange.
    invalid = np.isnan(a) | np.isnan(b)
    invalid |= np.isclose(np.abs(a), 9.91e37, rtol=1e-5, atol=0)
    invalid |= np.isclose(np.abs(b), 9.91e37, rtol=1e-5, atol=0)
    over = np.isinf(a) | np.isinf(b)
    over |= np.isclose(np.abs(a), 9.9e37, rtol=1e-5, atol=0)
    over |= np.isclose(np.abs(b), 9.9e37, rtol=1e-5, atol=0)
    assert np.all(np.isnan(z[invalid].real)) and np.all(np.isnan(z[invalid].imag))
    assert np.all(np.isinf(z[over & ~invalid].real))
    if named == ("R", "X") or named == ("X", "R"):
        r, x = (b, a) if swap else (a, b)
        plain = ~(invalid | over)
        assert np.array_equal(z[plain], r[plain] + 1j * x[plain])  # Z = R + jX, by definition


# ----------------------------------------------------------------------------------------------
# Whole replies through a real Exchange and Session (the VISA resource replaced)


class Resource:
    """A stand-in VISA resource that answers every read with the next of ``chunks``; past the
    last one it times out, as a meter that has nothing more to say does."""

    def __init__(self, chunks: list[bytes]) -> None:
        self.chunks = list(chunks)
        self.timeout = 5000.0
        self.sent: list[str] = []

    def write(self, message: str) -> None:
        self.sent.append(message)

    def read_raw(self) -> bytes:
        if not self.chunks:
            raise VisaIOError(constants.StatusCode.error_timeout)
        return self.chunks.pop(0)

    def read_bytes(self, count: int) -> bytes:
        rest = b"".join(self.chunks)
        if len(rest) < count:
            raise VisaIOError(constants.StatusCode.error_timeout)
        self.chunks = [rest[count:]] if rest[count:] else []
        return rest[:count]

    def clear(self) -> None:
        """A device clear empties the output queue (IEEE 488.2 5.8)."""
        self.chunks = []

    def close(self) -> None:
        pass


class StandInSession(Session):
    """A real :class:`Session` whose connection (also when reopened) is a :class:`Resource`."""

    def __init__(self, chunks: list[bytes]) -> None:
        super().__init__("TCPIP0::fuzz::INSTR", timeout=0.01, retries=0, retry_wait=0.0)
        self.stand_in = Resource(chunks)
        self._resource = self.stand_in  # type: ignore[assignment]

    def open(self) -> Session:
        self._resource = self.stand_in  # type: ignore[assignment]
        return self


SIMULATED = load_dialect(DIRECTORY / "simulated.toml")


def exchange(chunks: list[bytes], dialect: Dialect = SIMULATED) -> tuple[Exchange, Session]:
    session = StandInSession(chunks)
    return Exchange(session, dialect), session


def point_steps(dialect: Dialect = SIMULATED) -> list:
    context = {"frequency": "1000"}
    return [(dialect.operations[name], context) for name in dialect.point_sequence]


@budget(300)
@given(
    text=reply_text(
        st.tuples(number_list(2), st.sampled_from(["1", "+1", "1.0", "0", "2", ""])).map(
            lambda t: f"{t[0]};{t[1]}"
        )
    ),
    split=st.integers(0, 3),
)
@example(text="1.5,2.5;1", split=0)
@example(text="1.5,2.5;0", split=0)
@example(text="1.5;2.5;1", split=0)
@example(text="1.5,2.5,3.5;1", split=0)
@example(text="1.5,2.5;1\n1", split=0)
def test_an_ascii_point_reply_ends_in_two_numbers_or_an_instrument_error(text, split):
    """The simulated dialect's point sequence: readings query, then *OPC? (acknowledged 1)."""
    raw = text.encode("utf-8", "surrogatepass") + b"\n"
    chunks = [raw[:split], raw[split:]] if 0 < split < len(raw) else [raw]
    io, _ = exchange(chunks)
    values = outcome(io.readings, point_steps(), 1, timeout=0.01)
    if values is None:
        return
    # What was read back: the first read's line (pyvisa's read_raw ends at the termination).
    line = chunks[0].decode("ascii")
    line = line[:-1] if line.endswith("\n") else line
    reading, ack = line.split(";")
    # IEEE 488.2 8.4.1 (a compound query's replies joined by ';'): two numbers, then 1.
    assert float("".join(c for c in ack if c not in IEEE_WHITE)) == 1.0
    assert values.shape == (2,)
    fields = ieee_fields(reading)
    assert np.array_equal(values, np.array([float(f) for f in fields]), equal_nan=True)


@st.composite
def binary_point_reply(draw) -> bytes:
    raw, _ = draw(block_bytes())
    return raw + draw(st.sampled_from([b";1\n", b";0\n", b"\n", b";1", b";1\n;1\n", b";\n"]))


@budget(300)
@given(raw=st.one_of(binary_point_reply(), st.binary(max_size=40)))
@example(raw=struct_block([1.5, -2.5]) + b";1\n")
@example(raw=struct_block([1.5]) + b";1\n")
@example(raw=b"#2-8" + bytes(16) + b";1\n")
@example(raw=b"#0" + bytes(16) + b";1\n")
def test_a_binary_point_reply_ends_in_two_numbers_or_an_instrument_error(raw):
    io, _ = exchange([raw])
    values = outcome(io.readings, point_steps(), 1, timeout=0.01, binary=True)
    if values is None:
        return
    # IEEE 488.2 7.7.6.2: '#', n, n digits giving 16 bytes: two big-endian IEEE 754 doubles;
    # then the acknowledgement 1 after ';' (IEEE 488.2 8.4.1).
    n = int(raw[1:2])
    assert raw[:1] == b"#" and int(raw[2 : 2 + n]) == 16
    data, rest = raw[2 + n : 18 + n], raw[18 + n :]
    assert np.array_equal(values, np.array(struct.unpack(">2d", data)), equal_nan=True)
    assert rest[:1] == b";" and rest.endswith(b"\n") and float(rest[1:-1]) == 1.0


@budget(200)
@given(replies=st.lists(reply_text(ERROR_REPLY), min_size=1, max_size=4), reopened=st.booleans())
@example(replies=['-222,"Data out of range"', '0,"No error"'], reopened=False)
@example(replies=['-500,"Power on"', "+0"], reopened=True)
@example(replies=['1,"x"'], reopened=False)
def test_an_error_queue_ends_in_entries_a_warning_or_an_instrument_error(replies, reopened):
    session = StandInSession([r.encode("utf-8", "surrogatepass") + b"\n" for r in replies])
    queue = ErrorQueue(session, SIMULATED)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", scpi.MeterWarning)
        outcome(queue.before_clear, reopened)
        try:
            queue.check("fuzz", recovered=True)
        except SettingRefused as exc:
            # SCPI-99 volume 2, 21.8: only codes other than 0 and -500..-899 are failures.
            assert re.search(r"-?\d+,", str(exc))
        except InstrumentError:
            pass


# ----------------------------------------------------------------------------------------------
# Plan files: the example plan with arbitrary TOML values at random keys, and arbitrary text

EXAMPLE_PLAN = example_plan_path().read_text(encoding="utf-8")

QUANTITY_TEXT = st.tuples(
    st.sampled_from(["344", "-3", "0", "1e400", "1e-400", "4.95", ".5", "1e308", "nan", "1_0"]),
    st.sampled_from(["", " ", "u", "m", "k", "M", "K", "µ", "f", "%"]),
    st.sampled_from(["", "H", "Hz", "ohm", "F", "V", "K", "C", "h", "min", "s", "deg", "%"]),
).map(lambda t: json_string("".join(t)))


def json_string(text: str) -> str:
    """``text`` as a TOML basic string (its escapes are JSON's for these characters)."""
    import json

    return json.dumps(text)


TOML_SCALAR = st.one_of(
    st.integers().map(str),
    st.sampled_from(
        [
            "9" * 400,
            "9" * 5000,
            "-9223372036854775808",
            "0",
            "-1",
            "1",
            "true",
            "false",
            "inf",
            "-inf",
            "nan",
            "1e999",
            "5e-324",
            "1979-05-27T07:32:00Z",
            "07:32:00",
            "1979-05-27",
            '""',
            '" "',
            '"\\u0000"',
            '"a\\nb"',
            "'[0-9]{4}'",
            '"((((a))))"',
            '"' + "(" * 1200 + ")" * 1200 + '"',
            '"a{4294967296}"',
            '"fixed"',
            '"per-lot"',
            '"guarded"',
            '"simple"',
            '"non-binary"',
            '"retest"',
            '"Rdc"',
            '"Ls"',
            '"theta"',
            '"Q"',
            '"D"',
            '"pass"',
            '"reject"',
            '"Error"',
        ]
    ),
    st.floats().map(
        lambda x: "nan" if x != x else ("inf" if x > 0 else "-inf") if math.isinf(x) else repr(x)
    ),
    QUANTITY_TEXT,
    st.text(max_size=10).map(json_string),
)
TOML_VALUE = st.recursive(
    TOML_SCALAR,
    lambda inner: st.one_of(
        st.lists(inner, max_size=3).map(lambda xs: "[" + ", ".join(xs) + "]"),
        st.dictionaries(
            st.sampled_from(["quantity", "nominal", "name", "x"]), inner, max_size=2
        ).map(lambda d: "{ " + ", ".join(f"{k} = {v}" for k, v in d.items()) + " }"),
    ),
    max_leaves=4,
)
KEYS_ANYWHERE = [
    "frequency",
    "dc",
    "quantity",
    "nominal",
    "tolerance",
    "tolerance_low",
    "tolerance_high",
    "minimum",
    "maximum",
    "name",
    "check",
    "step",
    "bin",
]
HEADERS = [
    "[plan]",
    "[meter]",
    "[[step]]",
    "[[step.check]]",
    "[[bin]]",
    "[[bin.check]]",
    "[bins]",
    "[step]",
    "[temperature]",
    "[[plan]]",
]


@st.composite
def mutated_plan(draw) -> str:
    """The example plan with values replaced, lines dropped, keys and table headers added."""
    lines = EXAMPLE_PLAN.splitlines()
    keyed = [i for i, line in enumerate(lines) if " = " in line and not line.startswith("#")]
    for _ in range(draw(st.integers(1, 4))):
        action = draw(st.integers(0, 5))
        i = draw(st.sampled_from(keyed))
        key = lines[i].split(" = ", 1)[0]
        if action == 0:
            lines[i] = ""
        elif action == 1:
            lines.insert(i, f"{draw(st.sampled_from(KEYS_ANYWHERE))} = {draw(TOML_VALUE)}")
        elif action == 2:
            lines.insert(draw(st.integers(0, len(lines))), draw(st.sampled_from(HEADERS)))
        else:
            lines[i] = f"{key} = {draw(TOML_VALUE)}"
    return "\n".join(lines) + "\n"


@budget(250)
@given(
    text=st.one_of(
        mutated_plan(), st.text(max_size=200), st.text(max_size=40).map(lambda t: EXAMPLE_PLAN + t)
    )
)
@example(text=EXAMPLE_PLAN.replace("minimum = 0.40", "minimum = 1" + "0" * 400))
@example(text=EXAMPLE_PLAN.replace("averaging = 1 ", "averaging = " + "9" * 5000 + " "))
@example(text=EXAMPLE_PLAN.replace('"EXAMPLE-[0-9]{4}"', '"' + "(" * 2000 + ")" * 2000 + '"'))
@example(text=EXAMPLE_PLAN.replace('"EXAMPLE-[0-9]{4}"', '"a{4294967296}"'))
@example(text=EXAMPLE_PLAN.replace('max_age = "8h"', "max_age = 1" + "0" * 400))
@example(
    text=EXAMPLE_PLAN.replace('nominal = "4.95ohm"', 'nominal = "1e308ohm"').replace(
        'tolerance = "6%"', 'tolerance = "1e308ohm"'
    )
)
def test_any_plan_text_ends_in_a_plan_or_a_plan_error(text):
    plan = outcome(parse_plan, text, "fuzz.toml")
    if plan is None:
        return
    assert isinstance(plan, TestPlan) and plan.checks and plan.name
    for check in plan.checks:
        low, high = check.limit.low, check.limit.high
        assert low is not None or high is not None
        assert all(math.isfinite(v) for v in (low, high) if v is not None)
        if low is not None and high is not None:
            assert low < high
        assert check.frequency is None or check.frequency > 0
    assert plan.max_reference_age > 0 and plan.temperature.half_width >= 0
    assert re.compile(plan.serial.pattern).fullmatch("") is None


def test_the_example_plan_still_reads():
    plan = parse_plan(EXAMPLE_PLAN, "example")
    # The mutations above start from a valid plan: acquire/examples/coil-plan.toml as written
    # has three AC steps (seven checks) and the DC step (Rdc).
    assert [c.key for c in plan.checks] == [
        "Ls@1000",
        "Q@1000",
        "Ls@10000",
        "Rs@10000",
        "Q@10000",
        "Ls@100000",
        "Q@100000",
        "Rdc",
    ]


# ----------------------------------------------------------------------------------------------
# Command-line values: quantities, lengths, temperatures, fractions, lists and times

PREFIX = st.sampled_from(
    [
        "",
        "y",
        "z",
        "a",
        "f",
        "p",
        "n",
        "u",
        "µ",
        "μ",
        "m",
        "c",
        "k",
        "M",
        "G",
        "T",
        "K",
        "E",
        "d",
        "da",
        "mm",
    ]
)
UNIT = st.sampled_from(
    [
        "",
        "Hz",
        "hz",
        "HZ",
        "H",
        "ohm",
        "Ohms",
        "Ω",
        "R",
        "F",
        "m",
        "s",
        "V",
        "A",
        "W",
        "%",
        "C",
        "°C",
        "degC",
        "K",
        "kelvin",
        "F",
        "°F",
        "in",
    ]
)
SPACE = st.sampled_from(["", " ", "\u00a0", "\u2009", "\u202f", "\t", "\n"])


@st.composite
def typed_quantity(draw) -> str:
    """What a user might type: a number, a space, an SI prefix and a unit, in any mix."""
    number = draw(st.one_of(number_text(), st.sampled_from(["1e400", "-0", ".", "1.", "1e"])))
    return number.strip() + draw(SPACE) + draw(PREFIX) + draw(UNIT) + draw(SPACE)


CLI_TEXT = st.one_of(typed_quantity(), typed_quantity().flatmap(garbled), st.text(max_size=20))
CLI_VALUE = st.one_of(CLI_TEXT, FINITE, st.floats(), st.integers(), st.just(10**400), st.booleans())
EXPECTED_UNIT = st.sampled_from([None, "Hz", "H", "ohm", "m", "%", "F", "V", "s"])


@budget(400)
@given(value=CLI_VALUE, unit=EXPECTED_UNIT)
@example(value=10**400, unit=None)
@example(value=10**5000, unit="Hz")
@example(value="10mhz", unit="Hz")
@example(value="1e400k", unit=None)
@example(value="10f", unit="F")
def test_a_quantity_ends_in_a_finite_float_or_an_input_error(value, unit):
    result = outcome(parse_quantity, value, unit)
    if result is None:
        return
    assert isinstance(result, float) and math.isfinite(result)
    if isinstance(value, int | float) and not isinstance(value, bool):
        assert result == float(value)  # plain numbers are SI values as they are


@budget(300)
@given(value=CLI_VALUE, reader=st.sampled_from(["length", "temperature", "fraction"]))
@example(value=10**400, reader="length")
@example(value="-300C", reader="temperature")
@example(value="-1K", reader="temperature")
@example(value="150", reader="fraction")
@example(value="1E30y", reader="fraction")
@example(value="2k", reader="fraction")
def test_a_length_temperature_or_fraction_ends_in_a_value_or_an_input_error(value, reader):
    parse = {"length": parse_length, "temperature": parse_temperature, "fraction": parse_fraction}
    result = outcome(parse[reader], value)
    if result is None:
        return
    assert math.isfinite(result)
    if reader == "temperature":
        # SI Brochure (9th edition, 2.3.1): 0 K is -273.15 °C; nothing lies below it.
        assert result >= ABSOLUTE_ZERO_C
    if reader == "fraction" and isinstance(value, str) and "%" not in value:
        assert abs(result) <= 1


@budget(200)
@given(
    text=st.lists(CLI_TEXT, max_size=5).flatmap(
        lambda items: st.sampled_from([", ", ",", " ", ",,", "\n"]).map(lambda s: s.join(items))
    ),
    unit=EXPECTED_UNIT,
)
@example(text="1k, 10k, 100kHz", unit="Hz")
@example(text=" , ,", unit=None)
def test_a_list_ends_in_finite_floats_or_an_input_error(text, unit):
    values = outcome(parse_list, text, unit)
    if values is None:
        return
    assert values and all(isinstance(v, float) and math.isfinite(v) for v in values)
    assert len(values) == len([t for t in re.split(r"[,\s]+", text.strip()) if t])


OFFSETS = st.integers(-23 * 60 - 59, 23 * 60 + 59).map(lambda m: timezone(timedelta(minutes=m)))


@st.composite
def time_text(draw) -> str:
    """An ISO 8601 time (with or without a zone, date only, or cut short), or arbitrary text."""
    when = draw(st.datetimes(timezones=st.one_of(st.none(), OFFSETS)))
    spec = draw(st.sampled_from(["auto", "minutes", "seconds", "microseconds", "date"]))
    text = when.date().isoformat() if spec == "date" else when.isoformat(timespec=spec)
    return draw(st.one_of(st.just(text), garbled(text)))


@budget(300)
@given(text=st.one_of(time_text(), st.text(max_size=30)))
@example(text="9999-12-31T23:59:59-01:00")
@example(text="0001-01-01T00:00+01:00")
@example(text="2026-03-02")
@example(text="2026-03-02T08:00+01:00")
def test_a_time_ends_in_an_aware_utc_time_or_an_input_error(text):
    when = outcome(parse_time, text, "--since")
    if when is None:
        return
    assert when.tzinfo is not None and when.utcoffset() == timedelta(0)
    # The same instant as Python's reading of the ISO 8601 text (UTC when no zone is given).
    read = datetime.fromisoformat(text.strip())
    read = read.replace(tzinfo=UTC) if read.tzinfo is None else read
    assert when == read
