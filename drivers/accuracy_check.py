"""Checking a dialect's ``[accuracy]`` table: the meter's stated accuracy, every number finite.

Split from :mod:`drivers.dialect_check`, which calls :func:`check_accuracy` with its checker so
that every mistake names the file, the key and the reason in the same words.
"""

from __future__ import annotations

from typing import Any

from drivers.dialect import MeterAccuracy, Operation

#: Marks a key that has no default (it must be given); the checker uses the same marker.
MISSING: Any = object()


def check_accuracy(checker: Any, operations: dict[str, Operation]) -> MeterAccuracy | None:
    """The ``[accuracy]`` table (see :class:`~drivers.dialect.MeterAccuracy`), or None.

    ``checker`` is the dialect checker of :mod:`drivers.dialect_check` (its ``data``, ``table``,
    ``get``, ``positive``, ``unknown`` and ``fail``); ``operations`` the checked operations,
    whose ``set_speed`` words the speed factors must name.
    """
    if "accuracy" not in checker.data:
        return None
    t = checker.table("accuracy")
    floors = {"relative", "low_impedance", "high_impedance", "frequency_corner"}
    checker.unknown(t, "accuracy.", floors | {"reference_level", "repeatability", "speed_factors"})
    values = {}
    for key, default, zero in (
        ("relative", MISSING, True),
        ("low_impedance", MISSING, True),
        ("high_impedance", MISSING, False),
        ("frequency_corner", MISSING, False),
        ("reference_level", 1.0, False),
        ("repeatability", 0.0, True),
    ):
        values[key] = checker.positive(t, f"accuracy.{key}", default, zero)
    table = checker.get(t, "accuracy.speed_factors", dict, {})
    words = operations["set_speed"].choices if "set_speed" in operations else {}
    factors = {}
    for word in table:
        key = f"accuracy.speed_factors.{word}"
        if words and word not in words:
            known = ", ".join(words)
            raise checker.fail(key, f"not a speed word of operations.set_speed (known: {known})")
        factors[word] = checker.positive(table, key, MISSING)
    missing = [w for w in words if w not in factors]  # no set_speed: any words, unused
    if factors and missing:
        raise checker.fail("accuracy.speed_factors", f"missing the speed word {missing[0]!r}")
    return MeterAccuracy(speed_factors=dict(factors), **values)
