"""Values as the store writes them, with the standard library alone (no SQLAlchemy).

The store's usual path (SQLAlchemy Core) and its plain-SQLite sweep path
(:mod:`acquire.store.sqlite_sweeps`) both take these, so both write the same bytes: the current
UTC time, the SHA-256 key of an identity, sweep settings as strict JSON, and a time as the text
SQLAlchemy's SQLite ``DATETIME`` stores (``tests/test_store_sqlite_sweeps.py`` holds
:func:`sqlite_time` to SQLAlchemy's own bind processing).
"""

from __future__ import annotations

import json
from datetime import UTC, datetime
from typing import Any

import numpy as np

try:  # CPython's own SHA-256 (3.11: _sha256, 3.12 on: _sha2): the same digest as hashlib's,
    # without loading OpenSSL as `import hashlib` does (milliseconds at every sweep's start)
    from _sha256 import sha256
except ImportError:  # pragma: no cover - another Python or build
    try:
        from _sha2 import sha256
    except ImportError:
        from hashlib import sha256


def utc_now() -> datetime:
    """The current time, timezone-aware, in UTC."""
    return datetime.now(UTC)


def identity_key(*parts: str) -> str:
    """The SHA-256 key of an identity made of several strings (unambiguous for any content)."""
    return sha256(json.dumps(list(parts), ensure_ascii=False).encode()).hexdigest()


def _json_default(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    raise TypeError(f"sweep settings hold a {type(value).__name__}, which cannot be stored")


def to_json(value: Any) -> str:
    """Serialise sweep settings as strict JSON (numpy scalars and arrays become plain numbers and
    lists; NaN and infinity are refused, as PostgreSQL refuses them in JSON)."""
    return json.dumps(value, default=_json_default, allow_nan=False, ensure_ascii=False)


def sqlite_time(when: datetime) -> str:
    """An aware time as an SQLite store holds it: naive UTC text with six decimals of a second
    (``2026-03-02 08:00:00.000000``), the format SQLAlchemy's SQLite ``DATETIME`` writes."""
    if when.tzinfo is None:
        raise ValueError("times given to the store must be timezone-aware (use UTC)")
    t = when.astimezone(UTC)
    return (
        f"{t.year:04d}-{t.month:02d}-{t.day:02d} "
        f"{t.hour:02d}:{t.minute:02d}:{t.second:02d}.{t.microsecond:06d}"
    )
