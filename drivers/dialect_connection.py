"""Checking a dialect's ``[connection]`` table: terminations, encoding, timeouts, retries.

Split from :mod:`drivers.dialect_check`, which calls :func:`check_connection` with its checker
so that every mistake names the file, the key and the reason in the same words. Program and
response messages are coded in 7-bit ASCII (IEEE 488.2), so the terminations and separators
must be ASCII and the encoding must carry every ASCII character as that one byte.
"""

from __future__ import annotations

import codecs
from typing import Any

#: Every 7-bit ASCII character, and its bytes: what the encoding must carry unchanged.
_ASCII = "".join(map(chr, range(128)))
_ASCII_BYTES = bytes(range(128))
#: The texts a dialect joins its messages and replies with, and their defaults.
_TEXTS = {
    "write_termination": "\n",
    "read_termination": "\n",
    "separator": ";",
    "reply_separator": ";",
}


def check_connection(checker: Any) -> dict[str, Any]:
    """The checked ``[connection]`` table as keyword arguments of :class:`~drivers.dialect.Dialect`.

    ``checker`` is the dialect checker of :mod:`drivers.dialect_check` (its ``table``, ``get``,
    ``positive``, ``unknown`` and ``fail``).
    """
    t = checker.table("connection")
    keys = {"encoding", "timeout", "per_point_timeout", "open_timeout", "compound"}
    keys |= {"retries", "retry_wait"} | set(_TEXTS)
    checker.unknown(t, "connection.", keys)
    out: dict[str, Any] = {}
    for key, default in _TEXTS.items():
        value = checker.get(t, f"connection.{key}", str, default)
        if not value:
            raise checker.fail(f"connection.{key}", "must not be empty")
        if not value.isascii():
            raise checker.fail(
                f"connection.{key}",
                f"must be ASCII characters (IEEE 488.2 messages are ASCII), got {value!r}",
            )
        out[key] = value
    out["encoding"] = _encoding(checker, checker.get(t, "connection.encoding", str, "ascii"))
    out["timeout"] = checker.positive(t, "connection.timeout", 5.0)
    out["per_point_timeout"] = checker.positive(t, "connection.per_point_timeout", 0.1, True)
    out["open_timeout"] = checker.positive(t, "connection.open_timeout", 5.0)
    out["retry_wait"] = checker.positive(t, "connection.retry_wait", 0.2, True)
    out["compound"] = checker.get(t, "connection.compound", bool, True)
    retries = checker.get(t, "connection.retries", int, 2)
    if not 0 <= retries <= 10:
        raise checker.fail("connection.retries", f"must be between 0 and 10, got {retries}")
    out["retries"] = retries
    return out


def _encoding(checker: Any, name: str) -> str:
    key = "connection.encoding"
    try:
        codecs.lookup(name)
        carried = _ASCII.encode(name) == _ASCII_BYTES and _ASCII_BYTES.decode(name) == _ASCII
    except (LookupError, ValueError):
        raise checker.fail(key, f"unknown encoding {name!r}; ascii suits most meters") from None
    if not carried:
        raise checker.fail(
            key,
            f"{name!r} does not send ASCII as one byte a character, as IEEE 488.2 messages "
            "are; use ascii, latin-1 or utf-8",
        )
    return name
