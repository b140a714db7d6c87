"""IEEE 488.2 and SCPI-99 helpers: identity, the error queue, numbers and definite-length blocks.

Nothing here talks to a meter by itself; each function takes text or bytes already read (or a
callable that asks the meter once), so the same helpers serve every backend and every dialect.
"""

from __future__ import annotations

import re
import warnings
from collections.abc import Callable, Iterable
from dataclasses import dataclass

import numpy as np
from pyvisa import util as visa_util

from drivers.errors import ReplyError, SettingRefused

#: The longest error queue drained in one go; a meter that never answers "0" is broken.
MAX_QUEUE = 100

#: SCPI-99 (volume 2, 21.8): error/event numbers lie in [-32768, 32767].
CODE_RANGE = (-32768, 32767)

#: IEEE 488.2 (7.4.1.2) white space: ASCII 0-9 and 11-32, i.e. control characters but LF, and
#: the space.
_WS = r"[\x00-\x09\x0b-\x20]*"
#: IEEE 488.2 decimal numeric data: NR1, NR2 and NR3 as a forgiving listener reads them (7.7.2
#: program data: optional sign, ASCII digits with at most one point, optional exponent with
#: white space allowed around its E). ASCII digits only: no underscores, no other scripts'
#: digits, no words such as inf or nan (which Python's float would accept).
_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:" + _WS + r"[Ee]" + _WS + r"[+-]?[0-9]+)?"
_ONE_NUMBER = _WS + "(" + _NUMBER + ")" + _WS  # compiled by the re module on first use
_NUMBER_LIST = re.compile(_WS + _NUMBER + _WS + "(?:," + _WS + _NUMBER + _WS + ")*")
_WHITE = re.compile(r"[\x00-\x09\x0b-\x20]+")


#: Overrange and invalid markers of SCPI-99, and the relative tolerance used to recognise them.
OVERRANGE = 9.9e37
INVALID = 9.91e37
MARKER_RTOL = 1e-5


class MeterWarning(UserWarning):
    """An entry of the meter's error queue that reports an event rather than a failure."""


@dataclass(frozen=True)
class Identity:
    """The four fields of an IEEE 488.2 ``*IDN?`` reply."""

    manufacturer: str
    model: str
    serial: str
    firmware: str

    def __str__(self) -> str:
        return (
            f"{self.manufacturer} {self.model}, serial {self.serial or '-'}, "
            f"firmware {self.firmware or '-'}"
        )


@dataclass(frozen=True)
class ErrorEntry:
    """One entry of the SCPI error queue: code, message and how serious it is."""

    code: int
    message: str
    severity: str

    def __str__(self) -> str:
        return f'{self.code},"{self.message}"'


def parse_identity(text: str) -> Identity:
    """Split an ``*IDN?`` reply into manufacturer, model, serial and firmware.

    IEEE 488.2 (clause 10.14) defines four comma-separated fields; a reply with fewer is refused,
    and any commas past the third are kept inside the firmware field.
    """
    fields = [part.strip() for part in text.strip().split(",", 3)]
    if len(fields) != 4 or not fields[0] or not all(_printable(f) for f in fields):
        raise ReplyError(
            f"the identity reply {text.strip()!r} does not have the four IEEE 488.2 fields "
            "manufacturer,model,serial,firmware; is the resource a SCPI meter?"
        )
    return Identity(*fields)


def _printable(field: str) -> bool:
    """True if ``field`` holds printable ASCII only (IEEE 488.2 clause 10.14's fields are text)."""
    return all(" " <= c <= "~" for c in field)


def same_identity(first: str, second: str) -> Identity:
    """The identity of two ``*IDN?`` replies read one after the other, which must agree.

    IEEE 488.2 clause 10.14: a device answers ``*IDN?`` with the same fields every time, so two
    replies that differ mean one was garbled or cut short on the way (raises
    :class:`ReplyError`, which the session repeats like any other malformed reply).
    """
    identity = parse_identity(first)
    if second.strip() != first.strip():
        raise ReplyError(
            f"two identity replies in a row differ ({first.strip()[:40]!r}, "
            f"{second.strip()[:40]!r}); one was garbled or cut short on the way"
        )
    return identity


_ERROR = re.compile(r'^\s*([+-]?[0-9]{1,6})\s*(?:,\s*"?(.*?)"?)?\s*$', re.DOTALL)


def severity(code: int, warning_codes: Iterable[int] = ()) -> str:
    """How serious a SCPI error code is: ``"none"``, ``"warning"`` or ``"error"``.

    SCPI-99 (volume 2, chapter 21): 0 is no error; -100..-499 are command, execution,
    device-specific and query errors; -500..-899 report events (power on, user request, request
    control, operation complete), which we treat as warnings. Positive codes are the meter's own
    and count as errors unless the dialect lists them in ``warning_codes``.
    """
    if code == 0:
        return "none"
    if -899 <= code <= -500 or code in set(warning_codes):
        return "warning"
    return "error"


def parse_error(text: str, warning_codes: Iterable[int] = ()) -> ErrorEntry:
    """Parse one error-queue reply such as ``-222,"Data out of range"``."""
    match = _ERROR.match(text)
    if not match or not CODE_RANGE[0] <= int(match.group(1)) <= CODE_RANGE[1]:
        raise ReplyError(
            f"the error-queue reply {text.strip()!r} is not '<code>,\"<message>\"' as SCPI-99 "
            "requires; check the dialect's next_error command"
        )
    code = int(match.group(1))
    message = (match.group(2) or "").strip()
    return ErrorEntry(code, message, severity(code, warning_codes))


def drain_errors(
    ask: Callable[[], str], warning_codes: Iterable[int] = (), limit: int = MAX_QUEUE
) -> list[ErrorEntry]:
    """Read the error queue until it reports code 0; return the entries, oldest first.

    ``ask`` sends the dialect's error query once and returns the reply text.
    """
    codes = tuple(warning_codes)
    entries: list[ErrorEntry] = []
    for _ in range(limit):
        entry = parse_error(ask(), codes)
        if entry.code == 0:
            return entries
        entries.append(entry)
    raise ReplyError(
        f"the error queue still had entries after {limit} reads ({entries[-1]}); "
        "the meter may be repeating one error: clear it at the meter and try again"
    )


def raise_for_errors(
    entries: Iterable[ErrorEntry],
    context: str,
    error: type[Exception] = SettingRefused,
) -> None:
    """Warn for every warning entry; raise ``error`` listing every error entry (if any)."""
    failures = []
    for entry in entries:
        if entry.severity == "warning":
            warnings.warn(f"{context}: the meter reported {entry}", MeterWarning, stacklevel=2)
        elif entry.severity == "error":
            failures.append(entry)
    if failures:
        listed = "; ".join(str(e) for e in failures)
        raise error(
            f"{context}: the meter refused it and reported {listed}. Check the value against "
            "the meter's limits and the dialect's command for it"
        )


def markers(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Boolean masks (overrange, invalid) of the SCPI-99 markers in ``values``.

    A value within :data:`MARKER_RTOL` of +-9.9E37 is overrange, of 9.91E37 invalid; an actual
    NaN or infinity (possible in binary transfers) counts as invalid or overrange too.
    """
    magnitude = np.abs(np.asarray(values, dtype=float))
    invalid = (np.abs(magnitude - INVALID) <= INVALID * MARKER_RTOL) | np.isnan(magnitude)
    overrange = (np.abs(magnitude - OVERRANGE) <= OVERRANGE * MARKER_RTOL) | np.isinf(magnitude)
    return overrange & ~invalid, invalid


def special_values(values: np.ndarray) -> np.ndarray:
    """Replace SCPI-99 markers: 9.9E37 by inf (sign kept), 9.91E37 by nan (as floats)."""
    v = np.array(values, dtype=float)
    over, bad = markers(v)
    v[over] = np.copysign(np.inf, v[over])
    v[bad] = np.nan
    return v


def is_number(text: str) -> bool:
    """True if ``text`` is one IEEE 488.2 decimal number (NR1, NR2 or NR3), white space around."""
    return re.fullmatch(_ONE_NUMBER, text) is not None


def parse_number(text: str) -> float:
    """One IEEE 488.2 decimal number (NR1, NR2 or NR3); 9.9E37 becomes +-inf and 9.91E37 nan.

    Anything else (Python's float would take ``1_0``, other scripts' digits, ``inf``) raises
    :class:`ReplyError`.
    """
    if not is_number(text):
        raise ReplyError(f"expected a number from the meter, got {text.strip()[:40]!r}")
    return float(special_values(np.array([float(_WHITE.sub("", text))]))[0])


def parse_numbers(text: str, expected: int | None = None) -> np.ndarray:
    """A comma-separated list of SCPI numbers as a float array (markers left as sent).

    Raises :class:`ReplyError` if a field is not a number or (with ``expected``) if the count
    differs, so a garbled, truncated or stale reply is never taken for a reading.
    """
    fields = _WHITE.sub("", text).split(",")
    if expected is not None and len(fields) != expected:
        raise ReplyError(
            f"expected {expected} numbers in the reply, got {len(fields)} "
            f"(starting {text.strip()[:40]!r})"
        )
    if _NUMBER_LIST.fullmatch(text.rstrip("\n")) is None:
        raise ReplyError(
            f"the reply is not a list of numbers as IEEE 488.2 writes them (NR1, NR2, NR3; "
            f"starting {text.strip()[:40]!r})"
        )
    return np.array(fields, dtype=float)


def find_block(raw: bytes | bytearray) -> tuple[int, int, int]:
    """Locate an IEEE 488.2 definite-length block in ``raw``.

    Returns ``(begin, offset, length)``: where ``#`` is, where the data starts and how many
    bytes it holds. Header parsing is pyvisa's own (:func:`pyvisa.util.parse_ieee_block_header`).
    An indefinite-length block (``#0``) has length -1.
    """
    begin = raw.find(b"#")
    if begin < 0:
        raise ReplyError(f"expected a binary block starting with '#', got {bytes(raw[:25])!r}")
    try:
        offset, length = visa_util.parse_ieee_block_header(raw[begin:], 0, True)
    except (ValueError, RuntimeError) as exc:
        raise ReplyError(f"malformed binary block header {bytes(raw[:25])!r}: {exc}") from None
    if not bytes(raw[begin + 1 : begin + offset]).isdigit():
        # IEEE 488.2 (7.7.6.2): '#', a digit, then that many ASCII digits; Python's int would
        # also take a sign, white space or underscores, and a length such as "-8".
        raise ReplyError(f"malformed binary block header {bytes(raw[begin : begin + 25])!r}")
    return begin, begin + offset, length


def block_values(
    raw: bytes | bytearray,
    offset: int,
    length: int,
    datatype: visa_util.BINARY_DATATYPES = "d",
    big_endian: bool = True,
) -> np.ndarray:
    """The numbers held in a block's data (pyvisa's :func:`pyvisa.util.from_binary_block`)."""
    size = np.dtype(datatype).itemsize
    if length < 0 or length % size or len(raw) < offset + length:
        raise ReplyError(
            f"binary block of {length} bytes does not hold whole {size}-byte values "
            f"or was cut short ({len(raw) - offset} bytes received)"
        )
    # pyvisa documents np.array as a container (and reads it with np.frombuffer), but its
    # annotation asks for a Sequence, which an ndarray is not.
    values = visa_util.from_binary_block(
        raw,
        offset,
        length,
        datatype,
        big_endian,
        np.array,  # type: ignore[arg-type]
    )
    return np.array(values, dtype=float)
