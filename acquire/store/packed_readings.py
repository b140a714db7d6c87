"""A unit's readings packed into its own row: a read-optimised copy for lot statistics.

Each ``units`` row carries, beside its measurement rows (which stay the record), a copy of what
lot statistics read, written in the same INSERT from the same prepared values (schema revision
0012):

- ``readings_layout``: the unit's quantities in ``seq`` order as compact JSON, a
  ``[parameter, frequency, si_unit]`` triple per measurement (frequency 0.0 for DC, null where
  the row holds NULL). Units measured to the same plan share the same text, so a lot's units
  are grouped by it.
- ``readings``: for ``n`` measurements, five arrays of ``n`` little-endian float64 (the value,
  NaN when the reading is not finite or NULL; ``low_limit``, ``high_limit``, ``tolerance_low``,
  ``tolerance_high``, NaN for NULL) and two arrays of ``n`` bytes: the verdict
  (:data:`VERDICT_CODES`) and ``value_special`` (:data:`SPECIAL_CODES`).

A unit whose rows cannot be packed exactly (a ``value_special`` other than the store writes, a
NaN stored as a finite value) keeps NULL in both columns, and lot statistics then read the
measurement rows (:mod:`acquire.store.packed_statistics`).
"""

from __future__ import annotations

import json
import struct
from functools import cache, lru_cache
from typing import Any

import numpy as np

#: Verdict as stored -> its byte; any other verdict is :data:`OTHER_VERDICT` (a failing one).
VERDICT_CODES = {"": 0, "pass": 1, "conditional pass": 2, "conditional fail": 3, "fail": 4}
OTHER_VERDICT = 255
#: Codes of verdicts that do not count a check as failing (lot_query.NOT_FAILING).
NOT_FAILING_CODES = (0, 1, 2)
#: The verdict byte of "pass".
PASS_CODE = 1
#: ``value_special`` as stored -> its byte.
SPECIAL_CODES = {"": 0, "nan": 1, "inf": 2, "-inf": 3}
#: The float arrays of a packed copy, in their order (measurement column names).
FLOAT_COLUMNS = ("value", "low_limit", "high_limit", "tolerance_low", "tolerance_high")
#: Where the packed columns' sources lie in a measurement tuple (the measurement columns after
#: ``unit_id``: seq, parameter, frequency, value, si_unit, low_limit, high_limit, verdict,
#: lot_id, value_special, uncertainty, tolerance_low, tolerance_high, tested_at, ...).
_PARAMETER, _FREQUENCY, _VALUE, _SI_UNIT, _LOW, _HIGH, _VERDICT = 1, 2, 3, 4, 5, 6, 7
_SPECIAL, _TOL_LOW, _TOL_HIGH = 9, 11, 12
_NAN = float("nan")


@cache
def packer(n: int) -> struct.Struct:
    """The layout of ``readings`` for ``n`` measurements, as a :class:`struct.Struct`."""
    return struct.Struct(f"<{5 * n}d{2 * n}B")


@cache
def record_dtype(n: int) -> np.dtype:
    """The numpy record of one packed copy of ``n`` measurements (arrays of ``n`` each)."""
    floats = [(name, "<f8", (n,)) for name in FLOAT_COLUMNS]
    return np.dtype([*floats, ("verdict", "u1", (n,)), ("special", "u1", (n,))])


def pack(rows: list[tuple] | tuple) -> tuple[str | None, bytes | None]:
    """(readings_layout, readings) of a unit's measurement ``rows`` (tuples of the measurement
    columns after ``unit_id``, in ``seq`` order, as the store writes or reads them); (None,
    None) when a row cannot be packed exactly."""
    specials = [SPECIAL_CODES.get(r[_SPECIAL]) for r in rows]
    if None in specials or any(
        s == 0 and r[_VALUE] is not None and r[_VALUE] != r[_VALUE]
        for r, s in zip(rows, specials, strict=True)
    ):
        return None, None
    values = [
        _NAN if s or r[_VALUE] is None else r[_VALUE] for r, s in zip(rows, specials, strict=True)
    ]
    blob = packer(len(rows)).pack(
        *values,
        *[_NAN if r[_LOW] is None else r[_LOW] for r in rows],
        *[_NAN if r[_HIGH] is None else r[_HIGH] for r in rows],
        *[_NAN if r[_TOL_LOW] is None else r[_TOL_LOW] for r in rows],
        *[_NAN if r[_TOL_HIGH] is None else r[_TOL_HIGH] for r in rows],
        *[VERDICT_CODES.get(r[_VERDICT], OTHER_VERDICT) for r in rows],
        *specials,
    )
    return layout_text(tuple([(r[_PARAMETER], r[_FREQUENCY], r[_SI_UNIT]) for r in rows])), blob


@lru_cache(maxsize=256)
def layout_text(keys: tuple[tuple[str, float | None, str], ...]) -> str:
    """The ``readings_layout`` text of a unit's quantities (a plan's few layouts are kept)."""
    return json.dumps([list(k) for k in keys], separators=(",", ":"))


def unpack_layout(layout: str) -> list[tuple[str, float | None, str]]:
    """The (parameter, frequency, si_unit) of each measurement of a ``readings_layout``."""
    return [(p, f, s) for p, f, s in json.loads(layout)]


def unpack(layout: str, readings: bytes) -> dict[str, Any]:
    """One packed copy as plain columns: ``parameter``, ``frequency``, ``si_unit`` (lists),
    the :data:`FLOAT_COLUMNS` (float arrays), ``verdict`` and ``special`` (byte arrays)."""
    keys = unpack_layout(layout)
    dtype = record_dtype(len(keys))
    if len(readings) != dtype.itemsize:
        raise ValueError("a packed copy does not match its layout")
    record = np.zeros(1, dtype) if not keys else np.frombuffer(readings, dtype)
    out: dict[str, Any] = {
        "parameter": [k[0] for k in keys],
        "frequency": [k[1] for k in keys],
        "si_unit": [k[2] for k in keys],
    }
    for name in (*FLOAT_COLUMNS, "verdict", "special"):
        out[name] = record[name][0].copy()
    return out
