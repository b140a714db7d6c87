"""SI prefixes and units at the edges: parsing what a user types, formatting what a user reads.

Everything inside the tool is a plain float in SI units (hertz, henry, ohm, metre, farad, volt).
Text such as ``100Hz``, ``1k``, ``2.5MHz``, ``4.7uH``, ``10mm`` or ``47 pF`` is turned into a float
here and nowhere else, and numbers are shown with an SI prefix by :func:`format_si`.
"""

from __future__ import annotations

import math
import re

from acquire.errors import InputError

PREFIXES: dict[str, float] = {
    "y": 1e-24, "z": 1e-21, "a": 1e-18, "f": 1e-15, "p": 1e-12, "n": 1e-9,
    "u": 1e-6, "µ": 1e-6, "μ": 1e-6, "m": 1e-3, "c": 1e-2, "": 1.0,
    "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12,
}  # fmt: skip
"""SI prefixes (SI Brochure, 9th edition, Table 7). Centi is accepted before the metre only."""

#: Unit symbols accepted, each mapped to its canonical spelling.
UNITS: dict[str, str] = {
    "hz": "Hz", "h": "H", "ohm": "Ω", "ohms": "Ω", "Ω": "Ω", "r": "Ω", "f": "F", "m": "m",
    "s": "s", "v": "V", "a": "A", "w": "W", "%": "%",
}  # fmt: skip

ABSOLUTE_ZERO_C = -273.15
"""0 K in degrees Celsius (SI Brochure, 9th edition, section 2.3.1)."""

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(\S*)\s*$", re.ASCII)
_SPACES = str.maketrans({"\u00a0": " ", "\u2009": " ", "\u202f": " "})
_CELSIUS = {"", "c", "°c", "ºc", "degc", "celsius"}

_FORMAT_PREFIXES = [
    (1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
    (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"),
]  # fmt: skip


def _canonical(unit: str) -> str:
    return UNITS.get(unit.lower(), UNITS.get(unit, unit))


def _split(text: str | float | int) -> tuple[float, str]:
    """``text`` as (number, suffix); an ``int`` or ``float`` has no suffix."""
    if isinstance(text, bool):
        raise InputError(f"{text!r} is not a number")
    if isinstance(text, int | float):
        try:
            return float(text), ""
        except OverflowError:  # an int beyond the largest double (a TOML or JSON integer)
            raise InputError("a whole number beyond 1.8e308 is not a finite number") from None
    match = _NUMBER.match(str(text).translate(_SPACES))
    if not match:
        raise InputError(f"{text!r} is not a number (examples: 1000, 1e3, 1k, 2.5MHz, 4.7uH)")
    return float(match.group(1)), match.group(2)


def _finite(value: float, text: object) -> float:
    if not math.isfinite(value):
        raise InputError(f"{text!r} is not a finite number")
    return value


def parse_quantity(text: str | float | int, unit: str | None = None) -> float:
    """Parse ``text`` into a float in SI units.

    ``unit`` is the unit expected (``"Hz"``, ``"H"``, ``"ohm"``, ``"m"``, ``"%"``, ...). When
    given, the text may end in that unit or in nothing, after an optional SI prefix: with
    ``unit="m"``, ``"10mm"`` is 0.01 and ``"10m"`` is 10; with ``unit="H"``, ``"10m"`` is 0.01. A
    different unit is refused. A trailing ``%`` divides by 100 (``"20 %"`` is 0.2). Kilo is a
    lower-case ``k``: ``K`` is the kelvin and is refused here (see :func:`parse_temperature`).
    Plain numbers (and ``int``/``float`` values) pass through.
    """
    value, suffix = _split(text)
    return _finite(value * _suffix_scale(suffix, unit, str(text)), text)


def _suffix_scale(suffix: str, unit: str | None, text: str) -> float:
    if not suffix:
        return 1.0
    if suffix == "%":
        if unit not in (None, "%"):
            raise InputError(f"{text!r}: expected a value in {_canonical(unit)}, not a percentage")
        return 0.01
    if suffix.startswith("K"):
        raise InputError(
            f"{text!r}: K is the kelvin; for kilo write a lower-case k "
            f"(for example {text.strip().replace('K', 'k', 1)})"
        )
    if unit is None:
        return _free_scale(suffix, text)
    want = _canonical(unit)
    if suffix in PREFIXES and suffix != want and suffix.lower() == want.lower():
        # "10f" with farads, "10a" with amperes: femto or the unit itself?
        number = text.strip()[:-1].strip()
        raise InputError(
            f"{text!r} could be {number} {suffix}{want} or {number} {want} ({suffix} is also an "
            f"SI prefix): write {number}{suffix}{want} or {number}{want}"
        )
    for cut in range(len(suffix) + 1):
        prefix, rest = suffix[:cut], suffix[cut:]
        centi_ok = prefix != "c" or want == "m"
        if prefix in PREFIXES and centi_ok and (rest == "" or _canonical(rest) == want):
            _refuse_ambiguous_case(prefix, rest, text)
            return PREFIXES[prefix]
    raise InputError(f"{text!r}: expected a value in {want} (for example 4.7k{want})")


def _refuse_ambiguous_case(prefix: str, unit: str, text: str) -> None:
    """Refuse ``mhz`` and ``MHZ``: with the hertz not in its own case (``Hz``), the case of the
    prefix cannot be trusted either, and milli (``mHz``) and mega (``MHz``) differ by 10¹²."""
    if prefix in ("m", "M") and _canonical(unit) == "Hz" and unit != "Hz":
        raise InputError(
            f"{text!r}: write MHz for megahertz or mHz for millihertz (the case of M matters)"
        )


def _free_scale(suffix: str, text: str) -> float:
    """Scale of a suffix when no unit is expected: a lone prefix, a unit, or prefix + unit."""
    if suffix in PREFIXES and suffix != "c":
        return PREFIXES[suffix]
    if _canonical(suffix) in UNITS.values():
        return 1.0
    rest = _canonical(suffix[1:])
    if suffix[0] in PREFIXES and rest in UNITS.values() and (suffix[0] != "c" or rest == "m"):
        _refuse_ambiguous_case(suffix[0], suffix[1:], text)
        return PREFIXES[suffix[0]]
    raise InputError(f"{text!r}: unknown unit or prefix {suffix!r}")


def parse_temperature(text: str | float | int) -> float:
    """Parse a temperature into degrees Celsius.

    Accepted: a plain number (°C), ``23C``, ``23 °C``, ``23degC`` or kelvin ``296.15K``. Anything
    else (Fahrenheit, a prefix such as ``k``) is refused; so is a temperature below absolute zero.
    """
    value, suffix = _split(text)
    unit = suffix.lower()
    if unit in _CELSIUS:
        celsius = value
    elif suffix in ("K", "kelvin"):
        celsius = value + ABSOLUTE_ZERO_C
    else:
        hint = "write it in °C (23, 23C, 23°C) or in kelvin (296.15K)"
        if unit in ("f", "°f", "ºf", "degf"):
            raise InputError(f"{text!r}: Fahrenheit is not accepted; {hint}")
        raise InputError(f"{text!r} is not a temperature: {hint}")
    _finite(celsius, text)
    if celsius < ABSOLUTE_ZERO_C:
        raise InputError(f"{text!r} is below absolute zero")
    return celsius


def parse_length(text: str | float | int) -> float:
    """Parse a length into metres; the text must carry its unit (``30mm``, ``0.03m``, ``3cm``).

    A bare number other than 0 is refused with a hint, since ``30`` could be millimetres or
    metres and a wrong guess changes a prediction a thousandfold.
    """
    value, suffix = _split(text)
    if not suffix and value != 0:
        shown = f"{value:g}"
        guess = f"{shown} mm" if abs(value) >= 1 else f"{shown} m ({value * 1e3:g} mm)"
        raise InputError(
            f"{text!r} has no unit: did you mean {guess}? Write the unit, e.g. "
            f"{shown}mm or {shown}m"
        )
    return parse_quantity(text, "m")


def parse_fraction(text: str | float | int) -> float:
    """Parse a ratio: ``"20 %"`` and ``"0.2"`` are both 0.2; a bare number above 1 is refused."""
    value, suffix = _split(text)
    if not suffix and abs(value) > 1:
        raise InputError(f"{text!r} is more than 1: did you mean {value:g} %? Write the % sign")
    ratio = parse_quantity(text, "%")
    if suffix != "%" and abs(ratio) > 1:  # "2k", "1E30y": an SI prefix does not make a ratio
        raise InputError(f"{text!r} is more than 1: write a ratio (0.2) or a percentage (20 %)")
    return ratio


def parse_list(text: str, unit: str | None = None) -> list[float]:
    """Parse a comma- or whitespace-separated list of quantities (``"1k, 10k, 100kHz"``)."""
    items = [item for item in re.split(r"[,\s]+", text.strip()) if item]
    if not items:
        raise InputError("an empty list was given; write values separated by commas")
    return [parse_quantity(item, unit) for item in items]


def si_prefix(value: float) -> tuple[float, str]:
    """The SI prefix a value is shown with, and its scale: ``(1e-6, "µ")`` for 4.7e-6; from
    femto to tera (smaller values in femto, larger in tera)."""
    return next(((s, p) for s, p in _FORMAT_PREFIXES if abs(value) >= s), (1e-15, "f"))


def format_si(value: float, unit: str = "", digits: int = 4) -> str:
    """Format ``value`` with an SI prefix and ``digits`` significant digits: ``4.700 µH``."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return f"— {unit}".rstrip()
    if math.isinf(value):
        return f"{'-' if value < 0 else ''}∞ {unit}".rstrip()
    if value == 0:
        return f"{0:.{max(digits - 1, 0)}f} {unit}".rstrip()
    rounded = float(f"{value:.{digits}g}")
    if not math.isfinite(rounded) or abs(rounded) >= 1e3 * _FORMAT_PREFIXES[0][0]:
        # Past the largest prefix (up to the largest double): a power of ten, not 300 digits.
        return f"{value:.{max(digits - 1, 0)}e} {unit}".rstrip()
    value = rounded
    scale, prefix = si_prefix(value)
    scaled = value / scale
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(scaled)))), 0) if scaled else 0
    return f"{scaled:.{decimals}f} {prefix}{unit}".rstrip()
