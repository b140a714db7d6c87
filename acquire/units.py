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
    "k": 1e3, "K": 1e3, "M": 1e6, "G": 1e9, "T": 1e12,
}  # fmt: skip

#: Unit symbols accepted, each mapped to its canonical spelling.
UNITS: dict[str, str] = {
    "hz": "Hz", "h": "H", "ohm": "Ω", "ohms": "Ω", "Ω": "Ω", "r": "Ω", "f": "F", "m": "m",
    "s": "s", "v": "V", "a": "A", "w": "W", "%": "%",
}  # fmt: skip

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(\S*)\s*$")

_FORMAT_PREFIXES = [
    (1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"),
    (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f"),
]  # fmt: skip


def _canonical(unit: str) -> str:
    return UNITS.get(unit.lower(), UNITS.get(unit, unit))


def parse_quantity(text: str | float | int, unit: str | None = None) -> float:
    """Parse ``text`` into a float in SI units.

    ``unit`` is the unit expected (``"Hz"``, ``"H"``, ``"ohm"``, ``"m"``, ...). When given, the
    text may end in that unit or in nothing, after an optional SI prefix: with ``unit="m"``,
    ``"10mm"`` is 0.01 and ``"10m"`` is 10; with ``unit="H"``, ``"10m"`` is 0.01. A different unit
    is refused. Plain numbers (and ``int``/``float`` values) pass through.
    """
    if isinstance(text, int | float):
        value = float(text)
    else:
        match = _NUMBER.match(str(text))
        if not match:
            raise InputError(f"{text!r} is not a number (examples: 1000, 1e3, 1k, 2.5MHz, 4.7uH)")
        value = float(match.group(1)) * _suffix_scale(match.group(2), unit, str(text))
    if not math.isfinite(value):
        raise InputError(f"{text!r} is not a finite number")
    return value


def _suffix_scale(suffix: str, unit: str | None, text: str) -> float:
    if not suffix:
        return 1.0
    if unit is not None:
        want = _canonical(unit)
        for cut in range(len(suffix) + 1):
            prefix, rest = suffix[:cut], suffix[cut:]
            if prefix in PREFIXES and (rest == "" or _canonical(rest) == want):
                return PREFIXES[prefix]
        raise InputError(f"{text!r}: expected a value in {want} (for example 4.7k{want})")
    if _canonical(suffix) in UNITS.values() and suffix not in PREFIXES:
        return 1.0
    if suffix in PREFIXES:
        return PREFIXES[suffix]
    if suffix[0] in PREFIXES and _canonical(suffix[1:]) in UNITS.values():
        return PREFIXES[suffix[0]]
    raise InputError(f"{text!r}: unknown unit or prefix {suffix!r}")


def parse_list(text: str, unit: str | None = None) -> list[float]:
    """Parse a comma- or whitespace-separated list of quantities (``"1k, 10k, 100kHz"``)."""
    items = [item for item in re.split(r"[,\s]+", text.strip()) if item]
    if not items:
        raise InputError("an empty list was given; write values separated by commas")
    return [parse_quantity(item, unit) for item in items]


def format_si(value: float, unit: str = "", digits: int = 4) -> str:
    """Format ``value`` with an SI prefix and ``digits`` significant digits: ``4.700 µH``."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return f"— {unit}".rstrip()
    if math.isinf(value):
        return f"{'-' if value < 0 else ''}∞ {unit}".rstrip()
    if value == 0:
        return f"{0:.{max(digits - 1, 0)}f} {unit}".rstrip()
    value = float(f"{value:.{digits}g}")
    scale, prefix = next(((s, p) for s, p in _FORMAT_PREFIXES if abs(value) >= s), (1e-15, "f"))
    scaled = value / scale
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(scaled)))), 0) if scaled else 0
    return f"{scaled:.{decimals}f} {prefix}{unit}".rstrip()
