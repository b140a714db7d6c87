"""IEEE 488.2 / SCPI-99 helpers: identity, error queue, numbers, definite-length blocks.

Outside references: IEEE 488.2 clause 10.14 (*IDN? has four fields) and clause 7.7.6 (definite
length arbitrary block ``#<n><length><bytes>``); SCPI-99 volume 2 chapter 21 (error queue,
code ranges) and volume 1 section 7.2.1 (9.9E37 overrange, 9.91E37 not a number), all from
memory; blocks are built with pyvisa's own encoder (``pyvisa.util.to_ieee_block``).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from pyvisa import util as visa_util

from drivers import scpi
from drivers.errors import ReplyError, SettingRefused


def test_identity_has_four_fields():
    ident = scpi.parse_identity("Bench Example,Protocol Meter,EXAMPLE-01,1.0\n")
    assert ident == scpi.Identity("Bench Example", "Protocol Meter", "EXAMPLE-01", "1.0")
    assert str(ident) == "Bench Example Protocol Meter, serial EXAMPLE-01, firmware 1.0"


def test_identity_keeps_extra_commas_in_firmware_and_blank_fields():
    ident = scpi.parse_identity("Maker, Model ,0,fw 2.1,build 7")
    assert ident.model == "Model"
    assert ident.serial == "0"
    assert ident.firmware == "fw 2.1,build 7"
    assert str(scpi.parse_identity("Maker,Model,,")).endswith("serial -, firmware -")


@pytest.mark.parametrize("text", ["", "Only,Three,Fields", ",Model,1,2"])
def test_identity_refuses_short_replies(text):
    with pytest.raises(ReplyError, match="four IEEE 488.2 fields"):
        scpi.parse_identity(text)


@pytest.mark.parametrize(
    ("text", "code", "message", "severity"),
    [
        ('0,"No error"', 0, "No error", "none"),
        ('+0,"No error"', 0, "No error", "none"),
        ('-222,"Data out of range; 5 outside 10 to 3e+07"', -222, None, "error"),
        ('-113,"Undefined header"', -113, "Undefined header", "error"),
        ("-410, Query INTERRUPTED", -410, "Query INTERRUPTED", "error"),
        ('-800,"Operation complete"', -800, "Operation complete", "warning"),
        ('-500,"Power on"', -500, "Power on", "warning"),
        ('12,"Meter specific"', 12, "Meter specific", "error"),
        ("-100", -100, "", "error"),
    ],
)
def test_error_entries(text, code, message, severity):
    entry = scpi.parse_error(text)
    assert entry.code == code
    assert entry.severity == severity
    if message is not None:
        assert entry.message == message
    else:
        assert entry.message.startswith("Data out of range")


def test_dialect_can_declare_own_codes_as_warnings():
    assert scpi.parse_error('12,"Meter specific"', warning_codes=[12]).severity == "warning"


def test_error_entry_refuses_nonsense():
    with pytest.raises(ReplyError, match="error-queue reply"):
        scpi.parse_error("+1.0E+00,+2.0E+00")


def test_drain_reads_until_no_error():
    replies = iter(['-222,"Data out of range"', '-800,"Operation complete"', '0,"No error"'])
    entries = scpi.drain_errors(lambda: next(replies))
    assert [e.code for e in entries] == [-222, -800]
    with pytest.raises(StopIteration):
        next(replies)


def test_drain_stops_at_a_limit_for_a_stuck_queue():
    with pytest.raises(ReplyError, match="still had entries after 5 reads"):
        scpi.drain_errors(lambda: '-222,"Data out of range"', limit=5)


def test_errors_raise_and_warnings_warn():
    entries = [scpi.parse_error('-800,"Operation complete"')]
    with pytest.warns(scpi.MeterWarning, match="-800"):
        scpi.raise_for_errors(entries, "configure")
    entries.append(scpi.parse_error('-222,"Data out of range"'))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", scpi.MeterWarning)
        with pytest.raises(SettingRefused, match=r'configure: the meter refused it .*-222,"Data'):
            scpi.raise_for_errors(entries, "configure")
    scpi.raise_for_errors([scpi.parse_error('0,"No error"')], "nothing")


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("+1.2345678901234567E+03", 1234.5678901234567),
        ("9.9E37", math.inf),
        ("+9.90000E+37", math.inf),
        ("-9.9E37", -math.inf),
        (repr(float(np.float32(9.9e37))), math.inf),  # a float32 rounding of the marker
        ("9.91E37", math.nan),
        ("9.95E37", 9.95e37),
    ],
)
def test_numbers_and_markers(text, expected):
    got = scpi.parse_number(text)
    if math.isnan(expected):
        assert math.isnan(got)
    else:
        assert got == expected


def test_number_refuses_text():
    with pytest.raises(ReplyError, match="expected a number"):
        scpi.parse_number("#@!")


def test_number_lists_check_count_and_content():
    np.testing.assert_array_equal(scpi.parse_numbers("1,2.5,-3E+00\n", expected=3), [1, 2.5, -3])
    with pytest.raises(ReplyError, match="expected 4 numbers"):
        scpi.parse_numbers("1,2,3", expected=4)
    with pytest.raises(ReplyError, match="not a list of numbers"):
        scpi.parse_numbers("1,2#,3")
    special = scpi.special_values(np.array([9.9e37, -9.9e37, 9.91e37, 1.0]))
    assert special[0] == math.inf and special[1] == -math.inf
    assert math.isnan(special[2]) and special[3] == 1.0


@pytest.mark.parametrize(("datatype", "big"), [("d", True), ("d", False), ("f", True)])
def test_blocks_built_by_pyvisa_are_read_back(datatype, big):
    values = np.array([1.0, -2.5, 9.9e37, 10.0, 1e-12, 0.0625])
    block = visa_util.to_ieee_block(values, datatype, big)
    raw = b"1;" + block + b"\n"
    begin, offset, length = scpi.find_block(raw)
    assert raw[begin : begin + 1] == b"#"
    assert length == values.size * np.dtype(datatype).itemsize
    got = scpi.block_values(raw, offset, length, datatype, big)
    np.testing.assert_allclose(got, values.astype(datatype), rtol=0)


def test_block_with_line_feeds_in_its_data():
    values = np.frombuffer(b"\n" * 16, dtype=">f8").astype(float)
    raw = visa_util.to_ieee_block(values, "d", True) + b"\n"
    _, offset, length = scpi.find_block(raw)
    np.testing.assert_array_equal(scpi.block_values(raw, offset, length), values)


def test_broken_blocks_are_reply_errors():
    with pytest.raises(ReplyError, match="starting with '#'"):
        scpi.find_block(b"1.0,2.0\n")
    raw = visa_util.to_ieee_block([1.0, 2.0], "d", True)
    _, offset, length = scpi.find_block(raw)
    with pytest.raises(ReplyError, match="cut short"):
        scpi.block_values(raw[:-3], offset, length)
    with pytest.raises(ReplyError, match="whole 8-byte values"):
        scpi.block_values(raw, offset, length - 1)
