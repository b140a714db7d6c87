"""One point's message made once per sweep, and its two numbers read without numpy.

A point-by-point sweep sends the same operations at every point; only the frequency changes.
:func:`message_parts` splits the joined commands of a point sequence around their
``{frequency}`` placeholders once, so that ``frequency_text.join(parts)`` is the very message
that filling in every command and joining them with the dialect's separator gives (a command
with any other field, a format spec or a conversion is left to that slower way: None).
:func:`reading_pair` reads a reply of two plain numbers with a pattern made once, and hands any
other reply to :func:`drivers.scpi.parse_numbers`, which takes or refuses it by its own rules;
so every reply is accepted or refused exactly as that function does, with the same numbers.
:class:`Position` holds the point a sweep is at and makes its name only when asked.
"""

from __future__ import annotations

import re
import string
from collections.abc import Iterable

from drivers import scpi
from drivers.dialect import Operation

#: IEEE 488.2 white space (scpi's ``_WS``) and a decimal number without white space inside it:
#: a strict subset of what :func:`drivers.scpi.parse_numbers` takes.
_WS = r"[\x00-\x09\x0b-\x20]*"
_PLAIN = r"([+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[Ee][+-]?[0-9]+)?)"
PAIR = _WS + _PLAIN + _WS + "," + _WS + _PLAIN + _WS


def message_parts(operations: Iterable[Operation], separator: str) -> tuple[str, ...] | None:
    """The text of the joined commands between their ``{frequency}`` fields, or None if a
    command has a field of another kind."""
    parts = [""]
    for k, op in enumerate(operations):
        if k:
            parts[-1] += separator
        for literal, field, spec, conversion in string.Formatter().parse(op.command):
            parts[-1] += literal
            if field is None:
                continue
            if field != "frequency" or spec or conversion is not None:
                return None
            parts.append("")
    return tuple(parts)


def pair_pattern() -> re.Pattern[str]:
    """The compiled pattern :func:`reading_pair` takes (made when a sweep starts)."""
    return re.compile(PAIR)


def reading_pair(text: str, pattern: re.Pattern[str]) -> tuple[float, float]:
    """The two numbers of a readings reply, as :func:`drivers.scpi.parse_numbers` with
    ``expected=2`` reads them; a reply it refuses raises its :class:`ReplyError`."""
    match = pattern.fullmatch(text)
    if match is None:
        first, second = scpi.parse_numbers(text, expected=2).tolist()
        return first, second
    return float(match[1]), float(match[2])


class Position:
    """Where a sweep is: the point's frequency (Hz) and the text sent for it."""

    __slots__ = ("frequency", "text")

    def __init__(self) -> None:
        self.frequency = 0.0
        self.text = ""

    def describe(self) -> str:
        """The point's name in messages."""
        return f"measuring at {self.frequency:g} Hz"
