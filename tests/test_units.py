"""Parsing and formatting quantities at the edges.

Prefix values are those of the SI Brochure (BIPM, 9th edition, 2019, Table 7).
"""

from __future__ import annotations

import math

import pytest

from acquire.errors import InputError
from acquire.units import format_si, parse_list, parse_quantity


@pytest.mark.parametrize(
    ("text", "unit", "expected"),
    [
        ("100Hz", "Hz", 100.0),
        ("1k", "Hz", 1e3),
        ("2.5MHz", "Hz", 2.5e6),
        ("2.5 MHz", None, 2.5e6),
        ("4.7uH", "H", 4.7e-6),
        ("4.7µH", "H", 4.7e-6),
        ("10mm", "m", 0.01),
        ("10m", "m", 10.0),  # metre, not milli: the expected unit decides
        ("10m", "H", 0.01),  # milli-henry
        ("47pF", "F", 47e-12),
        ("5kΩ", "ohm", 5e3),
        ("0.5ohm", "ohm", 0.5),
        ("1e3", None, 1e3),
        ("-3.3e-3", None, -3.3e-3),
        ("1k", None, 1e3),
        ("10mm", None, 0.01),
        ("3GHz", None, 3e9),
        (12, "Hz", 12.0),
    ],
)
def test_parse_quantity(text, unit, expected):
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize(
    ("text", "unit"),
    [("", None), ("abc", None), ("1 kHz", "H"), ("4.7 uX", None), ("inf", None), ("1e999", None)],
)
def test_parse_quantity_refuses_with_a_hint(text, unit):
    with pytest.raises(InputError):
        parse_quantity(text, unit)


def test_parse_list():
    assert parse_list("1k, 10k 100kHz", "Hz") == [1e3, 1e4, 1e5]
    with pytest.raises(InputError):
        parse_list(" , ", "Hz")


@pytest.mark.parametrize(
    ("value", "unit", "expected"),
    [
        (4.7e-6, "H", "4.700 µH"),
        (999.96, "Hz", "1.000 kHz"),  # rounding carries into the next prefix
        (1e7, "Hz", "10.00 MHz"),
        (-3.3e-3, "Ω", "-3.300 mΩ"),
        (0.0, "Ω", "0.000 Ω"),
        (123456.0, "Hz", "123.5 kHz"),
        (47e-12, "F", "47.00 pF"),
    ],
)
def test_format_si(value, unit, expected):
    assert format_si(value, unit) == expected


def test_format_si_non_finite():
    assert format_si(math.inf, "Ω") == "∞ Ω"
    assert format_si(-math.inf, "Ω") == "-∞ Ω"
    assert format_si(math.nan, "Ω") == "— Ω"


def test_round_trip_through_text():
    for value in (1.0, 4.7e-6, 2.2e-3, 8.2e5, 3.3e-12):
        text = format_si(value, "H", digits=6).replace(" ", "")
        assert parse_quantity(text, "H") == pytest.approx(value, rel=1e-5)
