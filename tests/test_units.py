"""Parsing and formatting quantities at the edges.

Prefix values are those of the SI Brochure (BIPM, 9th edition, 2019, Table 7); the kelvin and
the degree Celsius, t/°C = T/K − 273.15, are from its section 2.3.1. The brochure's symbol for
kilo is a lower-case k; K is the kelvin.
"""

from __future__ import annotations

import math

import pytest

from acquire.errors import InputError
from acquire.units import (
    format_si,
    parse_fraction,
    parse_length,
    parse_list,
    parse_quantity,
    parse_temperature,
)


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
        ("3cm", "m", 0.03),
        ("3 cm", None, 0.03),
        ("20 %", None, 0.20),  # a percentage is a hundredth
        ("20%", "%", 0.20),
        ("0.5 %", None, 0.005),
        ("10\u00a0mm", "m", 0.01),  # a no-break space between number and unit
        ("1MΩ", "ohm", 1e6),
        ("1mΩ", "ohm", 1e-3),
        ("2.5V", "V", 2.5),
        ("100mV", "V", 0.1),
    ],
)
def test_parse_quantity(text, unit, expected):
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-15)


@pytest.mark.parametrize(
    ("text", "unit"),
    [
        ("", None), ("abc", None), ("1 kHz", "H"), ("4.7 uX", None), ("inf", None),
        ("1e999", None), ("nan", None), ("NaN", "Hz"), ("10K", "Hz"), ("10KHz", None),
        ("1K", "ohm"), ("23c", None), ("1cHz", "Hz"), ("20 %", "Hz"), ("10mm; 5", "m"),
        ("1..2", None), ("1e3e3", None), ("--5", None), ("1_000", None), ("1,5", None),
        ("\x00", None), ("10 mm mm", "m"), ("١٢", None), ("1" * 500, None),
        ("5 mm", "H"), ("0x10", None), (True, None),
    ],
)  # fmt: skip
def test_parse_quantity_refuses_with_a_hint(text, unit):
    with pytest.raises(InputError):
        parse_quantity(text, unit)


def test_capital_k_is_refused_with_the_kilo_hint():
    with pytest.raises(InputError, match="kelvin.*10kHz"):
        parse_quantity("10KHz", "Hz")


@pytest.mark.parametrize(
    ("text", "celsius"),
    [
        ("23", 23.0), ("23C", 23.0), ("23c", 23.0), ("23°C", 23.0), ("23 °C", 23.0),
        ("23degC", 23.0), ("296.15K", 23.0), ("296.15 K", 23.0), ("0K", -273.15),
        ("-40", -40.0), ("-40 °C", -40.0), ("273.15K", 0.0), (23, 23.0), (" 85C ", 85.0),
    ],
)  # fmt: skip
def test_parse_temperature(text, celsius):
    assert parse_temperature(text) == pytest.approx(celsius, abs=1e-12)


@pytest.mark.parametrize(
    "text",
    ["23k", "23 mK", "73F", "73°F", "-300", "-1K", "23 m", "23%", "hot", "", "1e999C", "nan"],
)
def test_parse_temperature_refuses(text):
    with pytest.raises(InputError):
        parse_temperature(text)


@pytest.mark.parametrize(
    ("text", "metres"),
    [
        ("30mm", 0.03),
        ("0.03m", 0.03),
        ("3cm", 0.03),
        ("30 mm", 0.03),
        ("0", 0.0),
        ("250um", 2.5e-4),
    ],
)
def test_parse_length(text, metres):
    assert parse_length(text) == pytest.approx(metres, rel=1e-15)


@pytest.mark.parametrize(
    ("text", "hint"),
    [("30", "did you mean 30 mm"), ("0.03", "did you mean 0.03 m"), ("45", "45mm")],
)
def test_parse_length_without_unit_is_refused_with_a_hint(text, hint):
    with pytest.raises(InputError, match=hint):
        parse_length(text)


@pytest.mark.parametrize("text", ["30 Hz", "30 H", "30K", "30 mmm", "30 inch"])
def test_parse_length_refuses_other_units(text):
    with pytest.raises(InputError):
        parse_length(text)


@pytest.mark.parametrize(("text", "value"), [("20 %", 0.2), ("20%", 0.2), ("0.2", 0.2), ("1", 1.0)])
def test_parse_fraction(text, value):
    assert parse_fraction(text) == pytest.approx(value, rel=1e-15)


def test_parse_fraction_refuses_a_bare_percentage():
    with pytest.raises(InputError, match="did you mean 20 %"):
        parse_fraction("20")


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


@pytest.mark.parametrize(("text", "unit"), [("10f", "F"), ("10 f", "F"), ("3a", "A")])
def test_a_letter_that_is_both_a_prefix_and_the_unit_is_refused(text, unit):
    # SI brochure (BIPM, 9th edition, 2019), tables 5 and 7: f is femto and F the farad, a is atto
    # and A the ampere; a lower-case f after a number cannot say which was meant.
    with pytest.raises(InputError, match="could be"):
        parse_quantity(text, unit)


def test_the_unit_in_its_own_case_and_a_prefixed_unit_still_read():
    assert parse_quantity("10F", "F") == 10.0
    assert parse_quantity("10fF", "F") == pytest.approx(10e-15)
    assert parse_quantity("2A", "A") == 2.0
