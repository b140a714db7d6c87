"""SCPI syntax of the simulated meter, without a socket.

References (from memory): IEEE 488.2 section 7 (program message syntax: ``;`` separators, string
data with doubled quotes, decimal numeric data, suffix multipliers where M is milli and MA mega
with MHZ and MOHM the exceptions, definite-length blocks ``#<n><len><bytes>``) and SCPI-99
(short/long keyword forms, optional nodes, MINimum/MAXimum/DEFault).
"""

from __future__ import annotations

import re
import struct
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from drivers import simulator
from drivers.simulator.commands import Commands
from drivers.simulator.instrument import Instrument
from drivers.simulator.scpi_parser import (
    CommandTree,
    ScpiError,
    block,
    boolean,
    format_number,
    keyword,
    number,
    parse_command,
    split_message,
    string,
)
from drivers.simulator.source_commands import SourceCommands


def code_of(fn, *args, **kw) -> int:
    with pytest.raises(ScpiError) as info:
        fn(*args, **kw)
    return info.value.code


def test_split_message_respects_strings():
    assert split_message("A 1;B \"x;y\";C 'p;q';;") == ["A 1", 'B "x;y"', "C 'p;q'"]
    assert code_of(split_message, 'A "open') == -102


def test_parse_command():
    cmd = parse_command(":sour:freq:cw 1kHz")
    assert cmd.nodes == ("SOUR", "FREQ", "CW") and not cmd.query and cmd.params == ("1kHz",)
    cmd = parse_command("LIST:FREQ 1, 2 ,3")
    assert cmd.params == ("1", "2", "3")
    assert parse_command("*idn?").nodes == ("*IDN",) and parse_command("*idn?").query
    assert code_of(parse_command, "FREQ:") == -102
    assert code_of(parse_command, "LIST:FREQ 1,,2") == -102


@pytest.mark.parametrize(
    ("text", "unit", "value"),
    [
        ("1000", "HZ", 1000.0),
        ("1e3", "HZ", 1000.0),
        ("+1.0E+03", "HZ", 1000.0),
        (".5", "V", 0.5),
        ("1kHz", "HZ", 1e3),
        ("1K", "HZ", 1e3),
        ("2.5MHZ", "HZ", 2.5e6),
        ("2.5mhz", "HZ", 2.5e6),
        ("3MAHZ", "HZ", 3e6),
        ("100mV", "V", 0.1),
        ("100MV", "V", 0.1),
        ("20ms", "S", 0.02),
        ("5us", "S", 5e-6),
        ("1GHZ", "HZ", 1e9),
        ("1MOHM", "OHM", 1e6),
    ],
)
def test_numbers_and_suffix_multipliers(text, unit, value):
    assert number(text, unit) == pytest.approx(value, rel=1e-15)


def test_number_errors_and_named_values():
    assert code_of(number, "1M", "HZ") == -131
    assert code_of(number, "1kV", "HZ") == -131
    assert code_of(number, "abc", "HZ") == -104
    assert code_of(number, "5", "HZ", 10.0, 100.0) == -222
    assert number("MAX", "HZ", 10.0, 100.0) == 100.0
    assert number("minimum", "HZ", 10.0, 100.0) == 10.0
    assert number("DEF", "HZ", 10.0, 100.0, 50.0) == 50.0


def test_keywords_booleans_strings():
    assert keyword("fix", ["FIXed", "LIST"]) == "FIX"
    assert keyword("FIXED", ["FIXed", "LIST"]) == "FIX"
    assert code_of(keyword, "FIXE", ["FIXed", "LIST"]) == -224
    assert code_of(keyword, "3", ["FIXed", "LIST"]) == -104
    assert [boolean(v) for v in ("ON", "off", "1", "0", "0.4")] == [True, False, True, False, False]
    assert code_of(boolean, "maybe") == -224
    assert string('"a ""quoted"" name"') == 'a "quoted" name'
    assert string("'x'") == "x" and string("bare-name") == "bare-name"


def test_tree_optional_nodes_and_forms():
    tree = CommandTree()
    tree.add("[SOURce:]FREQuency[:CW]", write=lambda: "w", read=lambda: "r")
    for header in ("FREQ", "FREQUENCY", "SOUR:FREQ", "SOURCE:FREQ:CW", "FREQ:CW", "freq:cw"):
        assert tree.find(parse_command(header + " 1"))() == "w"
        assert tree.find(parse_command(header + "?"))() == "r"
    assert code_of(tree.find, parse_command("FRE 1")) == -113
    assert code_of(tree.find, parse_command("SOURC:FREQ 1")) == -113
    with pytest.raises(ValueError, match="clashes"):
        tree.add("FREQuency", write=lambda: None)


def documented_headers(source: bool = False) -> list[str]:
    """Every command and query of the tables in COMMANDS.md, as written there: the meter's, or
    (``source``) those of the simulated DC current source."""
    text = (Path(simulator.__file__).parent / "COMMANDS.md").read_text()
    headers = []
    section = ""
    for line in text.splitlines():
        if line.startswith("#"):
            section = line
        if not line.startswith("| `") or "Readings" in section or "Errors" in section:
            continue
        if ("current source" in section) != source:
            continue
        cell = re.match(r"\| ((?:[^|\\]|\\.)*) \|", line).group(1)
        forms = re.findall(r"`([^`]+)`", cell)
        base = forms[0].split(" ")[0]
        headers.append(base)
        for extra in forms[1:]:
            headers.append(base.rstrip("?") + "?" if extra == "?" else extra.split(" ")[0])
    return headers


def test_every_documented_header_is_registered():
    headers = documented_headers()
    assert len(headers) > 50 and "[SOURce:]FREQuency[:CW]?" in headers
    tree = Commands(Instrument()).tree
    for header in headers:
        # Try the long form with every optional node, and the short form without them.
        full = re.sub(r"[\[\]]", "", header)
        short = re.sub(r"\[[^\]]*\]", "", header)
        short = ":".join(re.sub("[a-z]", "", node) for node in short.split(":"))
        for form in (full, short):
            assert tree.find(parse_command(form)) is not None, form


def test_every_documented_source_header_is_registered():
    headers = documented_headers(source=True)
    assert "MEASure:CURRent?" in headers and "BIAS:CURRent" not in headers
    tree = SourceCommands(Instrument()).tree
    for header in headers:
        full = re.sub(r"[\[\]]", "", header)
        short = re.sub(r"\[[^\]]*\]", "", header)
        short = ":".join(re.sub("[a-z]", "", node) for node in short.split(":"))
        for form in (full, short):
            assert tree.find(parse_command(form)) is not None, form


def test_block_format():
    payload = struct.pack(">2d", 1.5, -2.0)
    assert block(payload) == b"#216" + payload
    assert block(b"x" * 1234) == b"#41234" + b"x" * 1234


def test_number_replies_are_short_nr3():
    assert format_number(1000.0) == "+1E+03"
    assert format_number(9.9e37) == "+9.9E+37"
    assert format_number(9.91e37) == "+9.91E+37"
    assert format_number(-0.0706461267411556) == "-7.06461267411556E-02"
    assert format_number(0.0) == "+0E+00"


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_numbers_round_trip_exactly(value):
    assert float(format_number(value)) == value
