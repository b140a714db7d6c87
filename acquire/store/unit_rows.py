"""A production unit's measurement rows and the packed copy of its readings, made in one pass.

This runs for every unit a station stores, inside the time the unit takes to store, right after
the previous unit's commit has waited on the disk (when the processor's caches are cold and
every Python step costs several times what it costs in a tight loop). So the rows and the
packed copy (:mod:`acquire.store.packed_readings`) are built together, a measurement's fields
read in one call, with no second walk over the rows. :func:`measurement_rows` gives exactly
what building the rows and then calling :func:`~acquire.store.packed_readings.pack` on them
gives (a test holds the two equal over awkward units); ``pack`` stays the reference, and the
one used on rows read back from a store.
"""

from __future__ import annotations

from collections.abc import Iterable
from operator import attrgetter
from typing import Any

from acquire.store.packed_readings import (
    OTHER_VERDICT,
    SPECIAL_CODES,
    VERDICT_CODES,
    layout_text,
    packer,
)

#: The frequency stored for a DC value (a measurement whose ``frequency`` is None).
DC = 0.0
_NAN = float("nan")
#: A measurement record's fields, in the order :func:`measurement_rows` takes them.
_FIELDS = attrgetter(
    "parameter",
    "frequency",
    "value",
    "unit",
    "low",
    "high",
    "verdict",
    "uncertainty",
    "tolerance_low",
    "tolerance_high",
    "bias_current",
)


def measurement_rows(
    measurements: Iterable[Any], lot_id: int | None, tested: Any
) -> tuple[list[tuple], str, bytes]:
    """(rows, readings_layout, readings) of a unit's ``measurements`` (its
    :class:`~acquire.store.records.MeasurementRecord` s): the measurement rows as tuples of the
    measurement columns after ``unit_id`` (``tested`` is the unit's test time as its row
    carries it; numbers as Python floats; NaN and a non-finite value stored as NULL, the value's
    kind in ``value_special``; DC as frequency 0.0), and their packed copy."""
    rows: list[tuple] = []
    keys = []
    values: list[float] = []
    lows: list[float] = []
    highs: list[float] = []
    tolerance_lows: list[float] = []
    tolerance_highs: list[float] = []
    verdicts: list[int] = []
    specials: list[int] = []
    verdict_code = VERDICT_CODES.get
    for seq, m in enumerate(measurements):
        parameter, f, value, si_unit, low, high, verdict, u, t_low, t_high, bias = _FIELDS(m)
        value = float(value)
        if value - value == 0.0:  # finite
            special = ""
            values.append(value)
            specials.append(0)
        else:
            special = repr(value)
            value = None
            values.append(_NAN)
            specials.append(SPECIAL_CODES[special])
        f = DC if f is None else None if f != f else float(f)
        low = None if low is None or low != low else float(low)
        high = None if high is None or high != high else float(high)
        lows.append(_NAN if low is None else low)
        highs.append(_NAN if high is None else high)
        tolerance_lows.append(_NAN if t_low is None else t_low)
        tolerance_highs.append(_NAN if t_high is None else t_high)
        verdicts.append(verdict_code(verdict, OTHER_VERDICT))
        keys.append((parameter, f, si_unit))
        rows.append(
            (
                seq,
                parameter,
                f,
                value,
                si_unit,
                low,
                high,
                verdict,
                lot_id,
                special,
                None if u is None or u != u else float(u),
                t_low,
                t_high,
                tested,
                None if bias is None or bias != bias else float(bias),
            )
        )
    readings = packer(len(rows)).pack(
        *values, *lows, *highs, *tolerance_lows, *tolerance_highs, *verdicts, *specials
    )
    return rows, layout_text(tuple(keys)), readings
