"""Reading the values of a plan file: typed keys of a TOML table, quantities and check limits.

:class:`TableReader` reads one key of a parsed TOML table as text, a word from a list, true or
false, a whole number or a quantity, and refuses anything else with a :class:`PlanError` naming
the file and the key path. :func:`read_limit` turns a check's limit keys (``nominal`` with
``tolerance``, or with ``tolerance_low`` and ``tolerance_high``; or ``minimum`` and/or
``maximum``) into a :class:`~acquire.production.plan.Limit` in SI units, each quantity read with
:mod:`acquire.units` in the unit of the quantity checked.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping
from typing import Any

from acquire.errors import InputError
from acquire.production.plan import DC_RESISTANCE, SATURATION, Check, Limit
from acquire.units import format_si, parse_fraction, parse_quantity

#: The unit each checkable quantity is shown in ("" for the plain numbers Q and D).
UNITS: dict[str, str] = {
    "Ls": "H", "Lp": "H", "Rs": "Ω", "Rp": "Ω", "Z": "Ω", "X": "Ω", "Cs": "F", "Cp": "F",
    "G": "S", "B": "S", "Q": "", "D": "", "theta": "°", DC_RESISTANCE: "Ω", SATURATION: "A",
}  # fmt: skip
#: How a value of each unit is written in a plan, for the refusal messages.
EXAMPLES = {"H": '"344uH"', "Ω": '"4.95ohm"', "F": '"100pF"', "S": '"10mS"', "": "40"}
EXAMPLES["A"] = '"2.5A"'
EXAMPLES["°"] = '"85deg"'
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")
_AGE = re.compile(
    r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*(h|hours?|min|minutes?|s)?\s*$"
)
_AGE_SCALE: dict[str | None, float] = {"h": 3600.0, "hour": 3600.0, "hours": 3600.0}
_AGE_SCALE |= {"min": 60.0, "minute": 60.0, "minutes": 60.0, "s": 1.0, None: 3600.0}
_KELVIN = re.compile(r"^\s*(.*?)\s*(K|kelvin|°C|degC|C)?\s*$")
_PLAIN = re.compile(r"^\s*[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?\s*$")
_DEGREES = re.compile(r"^(.*?)\s*(°|deg|degrees?)?\s*$")


class LimitError(Exception):
    """A check's limit keys are malformed: ``key`` (or "" for the check), reason, what to do."""

    def __init__(self, key: str, reason: str, todo: str) -> None:
        super().__init__(f"{key}: {reason}; {todo}")
        self.key, self.reason, self.todo = key, reason, todo


def show(value: float, unit: str) -> str:
    """A value for people: SI prefix for units, plain for Q and D, plain degrees for theta."""
    if unit == "":
        return f"{value:.4g}"
    if unit == "°":
        return f"{value:.4g}°"
    return format_si(value, unit)


def parser_for(quantity: str) -> Callable[[Any], float]:
    """The function reading a value of ``quantity`` (text with unit, or a number in SI)."""
    unit = UNITS[quantity]
    if unit == "":
        return lambda raw: _plain(raw, allow_percent=quantity == "D")
    if unit == "°":
        return _degrees
    return lambda raw: parse_quantity(raw, "ohm" if unit == "Ω" else unit)


def _plain(raw: Any, allow_percent: bool = False) -> float:
    if isinstance(raw, str) and "%" in raw and not allow_percent:
        raise InputError(f"{raw!r}: this quantity is a plain number, not a percentage")
    try:
        return parse_quantity(raw, "%")
    except InputError:
        raise InputError(f"{raw!r} is not a plain number") from None


def _degrees(raw: Any) -> float:
    match = _DEGREES.match(raw) if isinstance(raw, str) else None
    return _plain(match.group(1) if match else raw)


def read_limit(row: Mapping[str, Any], quantity: str) -> Limit:
    """The tolerance limits a check's keys give; raises :class:`LimitError` naming the key."""
    unit = UNITS[quantity]
    parse = parser_for(quantity)
    given = [k for k in ("nominal", "tolerance", "tolerance_low", "tolerance_high") if k in row]
    given += [k for k in ("minimum", "maximum") if k in row]
    if not given:
        raise LimitError(
            "", "the check has no limit", "give nominal with tolerance, or minimum and/or maximum"
        )
    if "nominal" in row:
        limit = _around_nominal(row, unit, parse)
    else:
        if given[0].startswith("tolerance"):
            raise LimitError(given[0], "a tolerance needs a nominal", "add nominal = ...")
        low = _value(row, "minimum", unit, parse)
        high = _value(row, "maximum", unit, parse)
        if low is not None and high is not None:
            text = f"{show(low, unit)} to {show(high, unit)}"
        else:
            text = f"≥ {show(low, unit)}" if low is not None else f"≤ {show(high or 0.0, unit)}"
        limit = Limit(low, high, None, text)
    if not all(math.isfinite(v) for v in (limit.low, limit.high) if v is not None):
        # nominal +- tolerance beyond the largest double (about 1.8e308) is infinite
        raise LimitError(given[-1], "the limits are not finite numbers", "give smaller values")
    if limit.low is not None and limit.high is not None and not limit.low < limit.high:
        raise LimitError(
            given[-1],
            f"the low limit {show(limit.low, unit)} is not below the high "
            f"limit {show(limit.high, unit)}",
            "swap or widen them",
        )
    return limit


def _around_nominal(row: Mapping[str, Any], unit: str, parse: Callable[[Any], float]) -> Limit:
    for key in ("minimum", "maximum"):
        if key in row:
            raise LimitError(
                key,
                "a limit is either nominal with tolerance or minimum/maximum",
                f"remove {key} or nominal",
            )
    nominal = _value(row, "nominal", unit, parse)
    assert nominal is not None
    if "tolerance" in row:
        for key in ("tolerance_low", "tolerance_high"):
            if key in row:
                raise LimitError(
                    key,
                    "tolerance is symmetric; it cannot go with " + key,
                    "give tolerance, or tolerance_low and tolerance_high",
                )
        amount, shown = _tolerance(row, "tolerance", nominal, unit, parse)
        return Limit(
            nominal - amount, nominal + amount, nominal, f"{show(nominal, unit)} ± {shown}"
        )
    if "tolerance_low" not in row or "tolerance_high" not in row:
        missing = "tolerance_high" if "tolerance_low" in row else "tolerance_low"
        raise LimitError(
            missing,
            "a nominal needs tolerance, or both tolerance_low and tolerance_high",
            f"add {missing}",
        )
    below, low_text = _tolerance(row, "tolerance_low", nominal, unit, parse)
    above, high_text = _tolerance(row, "tolerance_high", nominal, unit, parse)
    text = f"{show(nominal, unit)} −{low_text} +{high_text}"
    return Limit(nominal - below, nominal + above, nominal, text)


def _value(
    row: Mapping[str, Any], key: str, unit: str, parse: Callable[[Any], float]
) -> float | None:
    if key not in row:
        return None
    raw = row[key]
    if isinstance(raw, bool) or not isinstance(raw, str | int | float):
        raise LimitError(key, f"{raw!r} is not a quantity", f"write it like {EXAMPLES[unit]}")
    try:
        return parse(raw)
    except InputError as exc:
        raise LimitError(key, str(exc), f"write it like {EXAMPLES[unit]}") from None


def _tolerance(
    row: Mapping[str, Any], key: str, nominal: float, unit: str, parse: Callable[[Any], float]
) -> tuple[float, str]:
    """A tolerance in SI units (absolute) and as written: ``"3%"`` of the nominal, or absolute."""
    raw = row[key]
    todo = f'write a percentage ("3%") or a value with its unit (like {EXAMPLES[unit]})'
    if isinstance(raw, str) and raw.strip().endswith("%"):
        try:
            fraction = parse_fraction(raw)
        except InputError as exc:
            raise LimitError(key, str(exc), todo) from None
        if not 0 < fraction < 1:
            raise LimitError(key, f"{raw!r} is not between 0 % and 100 %", todo)
        if nominal == 0:
            raise LimitError(key, "a percentage of a zero nominal is zero", "give it absolute")
        return abs(nominal) * fraction, f"{fraction * 100:g} %"
    bare = not isinstance(raw, str) or _PLAIN.match(raw)
    if bare and unit not in ("", "°") and not isinstance(raw, bool):
        raise LimitError(key, f"{raw!r} has no unit: percent or {unit}?", todo)
    amount = _value(row, key, unit, parse)
    assert amount is not None
    if not amount > 0:
        raise LimitError(key, f"the tolerance {show(amount, unit)} is not above 0", todo)
    return amount, show(amount, unit)


class PlanError(InputError):
    """A test plan file that cannot be read or is malformed; the message names file and place."""


class TableReader:
    """Reads typed keys of a parsed TOML document, failing with the file's name and key path."""

    def __init__(self, source: str) -> None:
        self.source = source

    def fail(self, path: str, reason: str, todo: str) -> PlanError:
        return PlanError(f"{self.source}: {path}: {reason}; {todo}")

    def table(self, data: Mapping[str, Any], key: str, path: str) -> dict[str, Any]:
        value = data.get(key, {})
        if not isinstance(value, dict):
            raise self.fail(path, f"{key} must be a table", f"write it as [{path}] with its keys")
        return value

    def known(self, table: Mapping[str, Any], allowed: tuple[str, ...], path: str) -> None:
        for key in table:
            if key not in allowed:
                place = f"{path}.{key}" if path else key
                raise self.fail(
                    place, f"unknown key {key!r}", f"the keys allowed here are {', '.join(allowed)}"
                )

    def tables(self, data: Mapping[str, Any], key: str, path: str) -> list[dict[str, Any]]:
        value = data.get(key, [])
        if not isinstance(value, list) or not all(isinstance(t, dict) for t in value):
            raise self.fail(path, f"{key} must be a list of tables", f"write each as [[{path}]]")
        return value

    def text(self, table: Mapping[str, Any], key: str, path: str, default: str = "") -> str:
        value = table.get(key, default)
        if isinstance(value, int) and not isinstance(value, bool) and key == "version":
            value = str(value)
        if not isinstance(value, str):
            raise self.fail(f"{path}.{key}", f"{value!r} is not text", 'write it in quotes: "..."')
        return value

    def name(self, table: Mapping[str, Any], key: str, path: str, default: str = "") -> str:
        value = self.text(table, key, path, default).strip()
        if _CONTROL.search(value):
            raise self.fail(f"{path}.{key}", "a name must be one line", "remove the line breaks")
        return value

    def word(
        self, table: Mapping[str, Any], key: str, path: str, words: tuple[str, ...], default: str
    ) -> str:
        value = self.text(table, key, path, default)
        if value not in words:
            raise self.fail(f"{path}.{key}", f"{value!r} is not allowed", f"use {either(words)}")
        return value

    def flag(self, table: Mapping[str, Any], key: str, path: str, default: bool) -> bool:
        value = table.get(key, default)
        if not isinstance(value, bool):
            raise self.fail(
                f"{path}.{key}", f"{value!r} is not true or false", "write true or false"
            )
        return value

    def count(
        self, table: Mapping[str, Any], key: str, path: str, default: int | None
    ) -> int | None:
        value = table.get(key, default)
        if value is None:
            return None
        if isinstance(value, bool) or not isinstance(value, int):
            raise self.fail(
                f"{path}.{key}", f"{value!r} is not a whole number", "write 1, 2, 3 ..."
            )
        if value < 1:
            raise self.fail(f"{path}.{key}", f"{value} is below 1", "write 1 or more")
        return value

    def quantity(self, raw: Any, parse: Callable[[Any], float], path: str, example: str) -> float:
        if isinstance(raw, bool) or not isinstance(raw, str | int | float):
            raise self.fail(path, f"{raw!r} is not a quantity", f"write it like {example}")
        try:
            return parse(raw)
        except InputError as exc:
            raise self.fail(path, str(exc), f"write it like {example}") from None


def age_seconds(raw: str | int | float) -> float:
    """Seconds of a reference age: a number of hours, or ``"8h"``, ``"30min"``, ``"90s"``."""
    if not isinstance(raw, str):
        return parse_quantity(raw) * 3600.0
    match = _AGE.match(raw)
    if match is None:
        raise InputError(f"{raw!r} is not an age in h, min or s")
    number, unit = match.groups()
    return parse_quantity(number) * _AGE_SCALE[unit]


def kelvin(raw: str | int | float) -> float:
    """A temperature difference in kelvin: ``"1K"``, ``"0.5 K"``, ``"1°C"`` or a number."""
    match = _KELVIN.match(raw) if isinstance(raw, str) else None
    if match is None:
        return parse_quantity(raw)
    return parse_quantity(match.group(1))


def check_name(check: Check) -> str:
    """``"Ls at 100 kHz"``, ``"Ls at 100 kHz under 3 A bias"``, ``"Isat20% at 100 kHz"``."""
    if check.frequency is None:
        return check.name
    name = f"{check.name} at {show(check.frequency, 'Hz')}"
    return name if check.bias is None else f"{name} under {check.bias:g} A bias"


def either(words: tuple[str, ...]) -> str:
    quoted = [f'"{w}"' for w in words]
    return quoted[0] if len(quoted) == 1 else f"{', '.join(quoted[:-1])} or {quoted[-1]}"


#: Where a TOML parser's message says the fault is.
TOML_PLACE = re.compile(r"\s*\(at (?:line (\d+), column (\d+)|end of document)\)\s*$")


def toml_message(message: str, text: str, source: str) -> str:
    """A TOML parser's complaint as one line naming the plan file and where in it."""
    place = TOML_PLACE.search(message)
    reason = message[: place.start()] if place else message
    if place and place.group(1):
        where = f"line {place.group(1)}"
        reason += f" (column {place.group(2)})"
    else:
        where = f"line {max(len(text.splitlines()), 1)}"
        reason += " (at the end of the file)"
    return f"{source}: {where}: {reason}; fix the TOML syntax (see acquire/examples/README.md)"
