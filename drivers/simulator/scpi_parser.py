"""SCPI syntax for the simulated meter: split messages, match headers, read parameters, format.

Follows IEEE 488.2 and SCPI-99 where they apply: case-insensitive headers with short and long
forms (the capitals of ``FREQuency`` are its short form), optional nodes in brackets, several
commands in one message separated by ``;``, decimal numeric data with suffix multipliers (IEEE
488.2: ``M`` is milli and ``MA`` mega, except ``MHZ`` and ``MOHM``), ``MINimum``/``MAXimum``/
``DEFault``, booleans, quoted strings, and definite-length arbitrary blocks.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

#: SCPI-99 error messages for the codes the simulator uses.
ERROR_MESSAGES: dict[int, str] = {
    0: "No error",
    -100: "Command error",
    -102: "Syntax error",
    -104: "Data type error",
    -108: "Parameter not allowed",
    -109: "Missing parameter",
    -113: "Undefined header",
    -131: "Invalid suffix",
    -200: "Execution error",
    -211: "Trigger ignored",
    -213: "Init ignored",
    -221: "Settings conflict",
    -222: "Data out of range",
    -224: "Illegal parameter value",
    -230: "Data corrupt or stale",
    -350: "Queue overflow",
}

#: IEEE 488.2 suffix multipliers.
MULTIPLIERS: dict[str, float] = {
    "EX": 1e18, "PE": 1e15, "T": 1e12, "G": 1e9, "MA": 1e6, "K": 1e3,
    "M": 1e-3, "U": 1e-6, "N": 1e-9, "P": 1e-12, "F": 1e-15, "A": 1e-18,
}  # fmt: skip

_HEADER = re.compile(r"^:?(\*[A-Z]+\??|[A-Z][A-Z0-9_]*(?::[A-Z][A-Z0-9_]*)*\??)$")
_NUMBER = re.compile(r"^([+-]?(?:\d+\.?\d*|\.\d+)(?:E[+-]?\d+)?)\s*([A-Z]*)$")
#: A plain decimal number, no blanks, no suffix (the usual case, read without the general rules).
_PLAIN = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[Ee][+-]?\d+)?")
_PATTERN_NODE = re.compile(r"(\[)?:?(\*?[A-Za-z]+):?(\])?")


class ScpiError(Exception):
    """A command failed; ``code`` is its SCPI error code, ``detail`` an optional explanation."""

    def __init__(self, code: int, detail: str = "") -> None:
        super().__init__(f"{code},{ERROR_MESSAGES.get(code, 'Error')}; {detail}")
        self.code = code
        self.detail = detail

    @property
    def text(self) -> str:
        """The queue entry's message: the standard text, then ``; detail`` if any."""
        base = ERROR_MESSAGES.get(self.code, "Simulated error")
        return f"{base}; {self.detail}" if self.detail else base


@dataclass(frozen=True)
class Command:
    """One command of a message: its header nodes (upper case), query flag and raw parameters."""

    nodes: tuple[str, ...]
    query: bool
    params: tuple[str, ...]
    text: str


def _split_outside_quotes(text: str, sep: str) -> list[str]:
    if '"' not in text and "'" not in text:
        return text.split(sep)
    parts, current, quote = [], [], ""
    for ch in text:
        if quote:
            current.append(ch)
            if ch == quote:
                quote = ""
        elif ch in "\"'":
            quote = ch
            current.append(ch)
        elif ch == sep:
            parts.append("".join(current))
            current = []
        else:
            current.append(ch)
    if quote:
        raise ScpiError(-102, "unterminated string")
    parts.append("".join(current))
    return parts


def split_message(text: str) -> list[str]:
    """The commands of a message (split on ``;`` outside strings), empty ones dropped."""
    return [part.strip() for part in _split_outside_quotes(text, ";") if part.strip()]


def parse_command(text: str) -> Command:
    """Parse one command (``:SOUR:FREQ 1kHz``) into header nodes, query flag and parameters."""
    head, _, rest = text.strip().partition(" ")
    if "\t" in head:
        head, _, more = head.partition("\t")
        rest = more + " " + rest
    header = head.upper()
    if not _HEADER.match(header):
        raise ScpiError(-102, f"bad header {head!r}")
    query = header.endswith("?")
    nodes = tuple(header.lstrip(":").rstrip("?").split(":"))
    rest = rest.strip()
    params: tuple[str, ...] = ()
    if rest:
        params = tuple(p.strip() for p in _split_outside_quotes(rest, ","))
        if any(not p for p in params):
            raise ScpiError(-102, "empty parameter")
    return Command(nodes=nodes, query=query, params=params, text=text.strip())


@dataclass
class Entry:
    """What a header does as a command (``write``) and as a query (``read``)."""

    pattern: str
    write: Callable[..., Any] | None = None
    read: Callable[..., Any] | None = None


def _keyword_forms(keyword: str) -> tuple[str, ...]:
    short = "".join(ch for ch in keyword if ch.isupper() or ch in "*?")
    return tuple(dict.fromkeys((short, keyword.upper())))


class CommandTree:
    """Headers with optional nodes and short/long forms, mapped to their :class:`Entry`."""

    def __init__(self) -> None:
        self._entries: dict[tuple[str, ...], Entry] = {}
        self.patterns: list[str] = []

    def add(
        self,
        pattern: str,
        write: Callable[..., Any] | None = None,
        read: Callable[..., Any] | None = None,
    ) -> None:
        """Register ``pattern`` (``[SOURce:]FREQuency[:CW]``) for a command and/or a query."""
        entry = Entry(pattern, write, read)
        nodes = [
            (m.group(2), bool(m.group(1) and m.group(3))) for m in _PATTERN_NODE.finditer(pattern)
        ]
        optional = [i for i, (_, opt) in enumerate(nodes) if opt]
        for present in itertools.product((True, False), repeat=len(optional)):
            keep = dict(zip(optional, present, strict=True))
            chosen = [kw for i, (kw, _) in enumerate(nodes) if keep.get(i, True)]
            for combo in itertools.product(*(_keyword_forms(kw) for kw in chosen)):
                if combo in self._entries and self._entries[combo] is not entry:
                    raise ValueError(f"{pattern} clashes with {self._entries[combo].pattern}")
                self._entries[combo] = entry
        self.patterns.append(pattern)

    def find(self, command: Command) -> Callable[..., Any]:
        """The handler for ``command``; -113 if its header (or that form of it) is unknown."""
        entry = self._entries.get(command.nodes)
        handler = None if entry is None else (entry.read if command.query else entry.write)
        if handler is None:
            raise ScpiError(-113, command.text.split(" ")[0])
        return handler


def expect(params: Sequence[str], least: int, most: int | None = None) -> None:
    """Check the parameter count: -109 when too few, -108 when too many."""
    most = least if most is None else most
    if len(params) < least:
        raise ScpiError(-109, f"expected {least} parameter(s)")
    if len(params) > most:
        raise ScpiError(-108, f"at most {most} parameter(s)")


def keyword(text: str, choices: Sequence[str]) -> str:
    """Match ``text`` against keyword patterns (``FIXed``); returns the choice's short form."""
    word = text.strip().upper()
    if _NUMBER.match(word):
        raise ScpiError(-104, f"expected one of {', '.join(choices)}")
    for choice in choices:
        if word in _keyword_forms(choice):
            return _keyword_forms(choice)[0]
    raise ScpiError(-224, f"{text!r} is not one of {', '.join(choices)}")


def _suffix_scale(suffix: str, unit: str, text: str) -> float:
    if not suffix or suffix == unit:
        return 1.0
    if (unit, suffix) in (("HZ", "MHZ"), ("OHM", "MOHM")):
        return 1e6
    prefix = suffix[: -len(unit)] if unit and suffix.endswith(unit) else suffix
    if prefix == suffix and prefix == "M":
        raise ScpiError(-131, f"{text!r}: M alone is milli; write MA for mega or give the unit")
    if prefix in MULTIPLIERS:
        return MULTIPLIERS[prefix]
    raise ScpiError(-131, f"{text!r}: expected a number in {unit or 'plain units'}")


def number(
    text: str,
    unit: str = "",
    minimum: float | None = None,
    maximum: float | None = None,
    default: float | None = None,
) -> float:
    """Decimal numeric data with an optional suffix in ``unit``; MIN/MAX/DEF where given.

    Out of ``[minimum, maximum]`` is -222; a word where a number belongs is -104.
    """
    if _PLAIN.fullmatch(text):
        value = float(text)
    else:
        word = text.strip().upper()
        named = {"MIN": minimum, "MINIMUM": minimum, "MAX": maximum, "MAXIMUM": maximum}
        named |= {"DEF": default, "DEFAULT": default}
        if word in named and named[word] is not None:
            return float(named[word])  # type: ignore[arg-type]
        match = _NUMBER.match(word)
        if not match:
            raise ScpiError(-104, f"expected a number, got {text.strip()!r}")
        value = float(match.group(1)) * _suffix_scale(match.group(2), unit, text.strip())
    if not math.isfinite(value):
        raise ScpiError(-222, f"{text.strip()!r} is not finite")
    if (minimum is not None and value < minimum * (1 - 1e-12)) or (
        maximum is not None and value > maximum * (1 + 1e-12)
    ):
        low = "-inf" if minimum is None else f"{minimum:g}"
        high = "inf" if maximum is None else f"{maximum:g}"
        raise ScpiError(-222, f"{text.strip()} outside {low} to {high}")
    if minimum is not None:
        value = max(value, minimum)
    if maximum is not None:
        value = min(value, maximum)
    return value


def integer(text: str, minimum: int, maximum: int, default: int | None = None) -> int:
    """A whole number (decimal numeric data rounded to the nearest integer) in a range."""
    value = number(text, "", minimum, maximum, default)
    return int(math.floor(value + 0.5))


def boolean(text: str) -> bool:
    """``ON``/``OFF`` or a number (non-zero after rounding is on)."""
    word = text.strip().upper()
    if word in ("ON", "OFF"):
        return word == "ON"
    match = _NUMBER.match(word)
    if match and not match.group(2):
        return math.floor(float(match.group(1)) + 0.5) != 0
    raise ScpiError(-224 if word.isalpha() else -104, f"expected ON, OFF, 1 or 0, got {text!r}")


def string(text: str) -> str:
    """String data (``"..."`` or ``'...'`` with the quote doubled inside), or bare text as is."""
    text = text.strip()
    if len(text) >= 2 and text[0] in "\"'" and text[-1] == text[0]:
        quote = text[0]
        return text[1:-1].replace(quote * 2, quote)
    return text


def format_number(value: float) -> str:
    """A float in NR3 form with the fewest digits that read back as the same float64.

    ``+1E+03``, ``+9.9E+37``, ``-3.4339163793418222E-04`` (at most 17 significant digits).
    """
    text = repr(abs(float(value)))
    digits = len(text.split("e")[0].replace(".", "").strip("0")) or 1
    out = f"{value:+.{digits - 1}E}"
    return out if float(out) == value else f"{value:+.16E}"


def quote(text: str) -> str:
    """String response data: ``text`` in double quotes, inner quotes doubled."""
    return '"' + text.replace('"', '""') + '"'


def block(payload: bytes) -> bytes:
    """IEEE 488.2 definite-length arbitrary block: ``#<n><length><payload>``."""
    length = str(len(payload)).encode()
    return b"#" + str(len(length)).encode() + length + payload
