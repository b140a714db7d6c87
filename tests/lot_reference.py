"""What a lot's serial counts must be, worked out by hand from the units as written (the tests'
reference for yields, bins and failing checks): each serial's first and latest attempt by
attempt number; a check fails a unit when its latest attempt has a measurement of it with a
failing verdict, counted once a unit and check."""

from __future__ import annotations

from collections.abc import Callable, Sequence

from acquire.report.statistics import quantity_key
from acquire.store import MeasurementRecord, UnitRecord


def serial_counts(units: Sequence[UnitRecord], fails: Callable[[MeasurementRecord], bool]) -> dict:
    """units, attempts, passed, first_pass, bins and failing of ``units`` (every attempt)."""
    by_serial: dict[str, list[UnitRecord]] = {}
    for unit in units:
        by_serial.setdefault(unit.serial, []).append(unit)
    latest = [max(a, key=lambda u: u.attempt) for a in by_serial.values()]
    first = [min(a, key=lambda u: u.attempt) for a in by_serial.values()]
    failing: dict[str, int] = {}
    for unit in latest:
        for key in {quantity_key(m.parameter, m.frequency) for m in unit.measurements if fails(m)}:
            failing[key] = failing.get(key, 0) + 1
    return {
        "units": len(by_serial), "attempts": len(units),
        "passed": sum(u.outcome == "pass" for u in latest),
        "first_pass": sum(u.outcome == "pass" for u in first),
        "bins": {b: sum(u.bin == b for u in latest) for b in {u.bin for u in latest}},
        "failing": failing,
    }  # fmt: skip
