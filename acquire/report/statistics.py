"""A selection of production units in numbers: yields, bins, failing checks, and per quantity
its mean, spread and process capability.

Two ways of counting, each where it answers the question asked:

- *process statistics* (count, mean, std, min, max, sigma within, Cp, Cpk, Pp, Ppk) use every
  attempt's measurements in test order: a retest measures the unit again, and each reading is a
  sample of the process;
- *yields, bins and failing checks* use each serial's latest attempt (first-pass yield its first
  attempt): a unit is sorted once, as it left the station.

Counts, mean, the standard deviation (two passes: the deviations from the mean are summed in a
second pass), min, max, the mean moving range in test order and the limits' medians are worked
out with numpy from the chosen units' packed readings, read in test order
(:mod:`acquire.store.packed_statistics`; from the measurement rows,
:mod:`acquire.store.quantity_summary`, for a unit stored without them).

Capability (NIST/SEMATECH e-Handbook of Statistical Methods, 6.1.6, "What is Process
Capability?"): Cp = (USL - LSL) / 6σ and Cpk = min(USL - µ, µ - LSL) / 3σ with the within sigma
σ = MR-bar / d2 (d2 = 1.128, moving ranges of two; 6.3.2); Pp and Ppk the same with the overall
sample standard deviation. USL and LSL are the test plan's tolerance limits (the median of those
stated in the selection), not the guard-banded acceptance limits. With one limit only, Cp and
Pp are NaN and Cpk, Ppk come from that side (6.1.6's one-sided indices); with none, all four
are NaN.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, fields
from typing import TYPE_CHECKING, Any

import numpy as np

from acquire.report.control import D2
from acquire.store.lot_query import DC, LotFilter

if TYPE_CHECKING:
    import pandas as pd

    from acquire.store import Store

__all__ = [
    "LotFilter",
    "LotStatistics",
    "QuantityStatistics",
    "lot_statistics",
    "process_capability",
    "quantity_key",
    "quantity_series",
]

#: What each index's sigma is, as the reports say it.
SIGMA_NOTE = (
    "Cp and Cpk use the within sigma (mean moving range / 1.128, in test order); Pp and Ppk "
    "the overall sample standard deviation (n - 1); limits: the plan's tolerance limits"
)
#: How the two kinds of numbers count attempts, as the reports say it.
COUNTING_NOTE = (
    "process statistics: every attempt's measurements in test order; yields, bins and failing "
    "checks: each serial's latest attempt (first-pass yield: its first)"
)


def quantity_key(parameter: str, frequency: float | None) -> str:
    """A quantity's short name: ``"Rs@10000"`` (frequency in hertz), ``"Rdc"`` for a DC value."""
    if frequency is None or frequency == DC or math.isnan(frequency):
        return parameter
    return f"{parameter}@{frequency:.12g}"


def key_name(key: str) -> str:
    """A :func:`quantity_key` as people read it: ``"Rs at 10 kHz"``; ``"Rdc"`` stays."""
    from acquire.units import si_prefix

    parameter, _, hertz = key.partition("@")
    if not hertz:
        return parameter
    frequency = float(hertz)
    scale, prefix = si_prefix(frequency)
    return f"{parameter} at {frequency / scale:.4g} {prefix}Hz"


def process_capability(
    mean: float, sigma: float, low: float | None, high: float | None
) -> tuple[float, float]:
    """(Cp, Cpk) of a process of ``mean`` and ``sigma`` against limits ``low`` and ``high``
    (None: open side); NIST/SEMATECH e-Handbook 6.1.6. NaN where undefined."""
    nan = float("nan")
    if not (math.isfinite(sigma) and sigma > 0 and math.isfinite(mean)):
        return nan, nan
    upper = nan if high is None else (high - mean) / (3 * sigma)
    lower = nan if low is None else (mean - low) / (3 * sigma)
    cp = nan if low is None or high is None else (high - low) / (6 * sigma)
    sides = [v for v in (upper, lower) if not math.isnan(v)]
    return cp, (min(sides) if sides else nan)


@dataclass(frozen=True)
class QuantityStatistics:
    """One quantity's numbers over every attempt of the selection (see the module docstring).

    ``count`` measurements, ``valid`` of them finite, ``passed`` with verdict "pass"; mean, std
    (overall, n - 1), minimum and maximum of the valid values; the tolerance and acceptance
    limits (medians of those stated; None when none is); ``sigma_within`` = MR-bar / d2 in
    test order; the capability indices. NaN where undefined.
    """

    parameter: str
    frequency: float | None
    unit: str
    count: int
    valid: int
    passed: int
    mean: float
    std: float
    minimum: float
    maximum: float
    tolerance_low: float | None
    tolerance_high: float | None
    acceptance_low: float | None
    acceptance_high: float | None
    sigma_within: float
    cp: float
    cpk: float
    pp: float
    ppk: float

    @property
    def key(self) -> str:
        return quantity_key(self.parameter, self.frequency)


@dataclass(frozen=True)
class LotStatistics:
    """The selection ``filter`` in numbers: ``units`` (serials), ``attempts``, ``passed`` and
    ``first_pass`` (serials whose latest / first attempt passed), the yields (NaN with no
    units), ``bins`` (serials per bin of the latest attempt; "" for none), ``failing`` (serials
    whose latest attempt failed a check, by :func:`quantity_key`) and per quantity its
    :class:`QuantityStatistics`."""

    filter: LotFilter
    units: int
    attempts: int
    passed: int
    first_pass: int
    yield_: float
    first_pass_yield: float
    bins: dict[str, int]
    failing: dict[str, int]
    quantities: tuple[QuantityStatistics, ...]

    def to_json(self) -> dict[str, Any]:
        """A JSON-ready dict (NaN as None); see the module docstring for what counts."""
        quantities = []
        for q in self.quantities:
            item = {f.name: _plain(getattr(q, f.name)) for f in fields(q)}
            item["min"] = item.pop("minimum")
            item["max"] = item.pop("maximum")
            quantities.append({"key": q.key, **item})
        return {
            "lot": self.filter.lot,
            "filter": self.filter.describe(),
            "units": self.units,
            "attempts": self.attempts,
            "passed": self.passed,
            "first_pass": self.first_pass,
            "yield": _plain(self.yield_),
            "first_pass_yield": _plain(self.first_pass_yield),
            "bins": dict(self.bins),
            "failing": dict(self.failing),
            "counting": COUNTING_NOTE,
            "sigma": SIGMA_NOTE,
            "quantities": quantities,
        }


def _plain(value: Any) -> Any:
    if isinstance(value, float | np.floating):
        return float(value) if math.isfinite(value) else None
    return value


def _median(pairs: Iterable[tuple[float, int]]) -> float | None:
    """The median of values given with their counts (None when there are none)."""
    items = sorted((float(v), int(n)) for v, n in pairs)
    if not items:
        return None
    values = np.array([v for v, _ in items])
    ends = np.cumsum([n for _, n in items])
    total = int(ends[-1])
    middle = np.searchsorted(ends, [(total - 1) // 2, total // 2], side="right")
    return float(values[middle].mean())


class _Limits:
    """The median of each quantity's stated limits: the one value when every stated value is
    the same (read from the summary's smallest and largest), else counted per value by
    ``Store.limit_counts`` (one query per limit column, only when some quantity needs it)."""

    def __init__(self, store: Store, chosen: LotFilter) -> None:
        self._store, self._chosen = store, chosen
        self._counted: dict[str, dict[tuple, float | None]] = {}

    def median(self, row: Any, column: str) -> float | None:
        if row.medians is not None:
            return row.medians[column]
        low, high = row.limits[column]
        if low is None:
            return None
        if low == high:
            return float(low)
        if column not in self._counted:
            grouped: dict[tuple, list[tuple[float, int]]] = {}
            for p, f, unit, limit, n in self._store.limit_counts(self._chosen, column):
                grouped.setdefault((p, f, unit), []).append((limit, n))
            self._counted[column] = {k: _median(v) for k, v in grouped.items()}
        return self._counted[column].get((row.parameter, row.frequency, row.si_unit))


def _number(value: Any) -> float:
    return float("nan") if value is None else float(value)


def _quantity(row: Any, limits: _Limits) -> QuantityStatistics:
    valid = int(row.valid)
    mean = _number(row.mean)
    std = math.sqrt(row.ss / (valid - 1)) if valid > 1 and row.ss is not None else math.nan
    mr = row.mr_sum / row.mr_count if row.mr_count else None
    within = math.nan if mr is None else float(mr) / D2
    low, high = limits.median(row, "tolerance_low"), limits.median(row, "tolerance_high")
    cp, cpk = process_capability(mean, within, low, high)
    pp, ppk = process_capability(mean, std, low, high)
    return QuantityStatistics(
        parameter=row.parameter,
        frequency=None if row.frequency == DC else float(row.frequency),
        unit=row.si_unit,
        count=int(row.count),
        valid=valid,
        passed=int(row.passed),
        mean=mean,
        std=std,
        minimum=_number(row.min),
        maximum=_number(row.max),
        tolerance_low=low,
        tolerance_high=high,
        acceptance_low=limits.median(row, "low_limit"),
        acceptance_high=limits.median(row, "high_limit"),
        sigma_within=within,
        cp=cp,
        cpk=cpk,
        pp=pp,
        ppk=ppk,
    )


def lot_statistics(store: Store, filter: LotFilter) -> LotStatistics:
    """Yields, bins, failing checks and per quantity statistics of the units ``filter`` picks."""
    counts, rows = store.lot_numbers(filter)
    limits = _Limits(store, filter)
    quantities = tuple(_quantity(r, limits) for r in rows)
    serials = counts.serials
    return LotStatistics(
        filter=filter,
        units=serials,
        attempts=counts.attempts,
        passed=counts.passed,
        first_pass=counts.first_pass,
        yield_=counts.passed / serials if serials else math.nan,
        first_pass_yield=counts.first_pass / serials if serials else math.nan,
        bins=dict(counts.bins),
        failing={quantity_key(p, f): n for (p, f), n in counts.failing.items()},
        quantities=quantities,
    )


#: Columns of :func:`quantity_series`.
SERIES_COLUMNS: tuple[str, ...] = (
    "serial",
    "attempt",
    "finished_at",
    "value",
    "uncertainty",
    "low_limit",
)
SERIES_COLUMNS += ("high_limit", "tolerance_low", "tolerance_high", "verdict")


def quantity_series(
    store: Store, filter: LotFilter, parameter: str, frequency: float | None
) -> pd.DataFrame:
    """Every attempt's value of ``parameter`` at ``frequency`` (None: DC) in test order, with
    its uncertainty (U, k = 2), applied and tolerance limits (NaN: open side) and verdict;
    ``value`` is NaN for an invalid reading. Columns :data:`SERIES_COLUMNS`."""
    rows = store.measurement_rows(filter, parameter, frequency)
    return rows[list(SERIES_COLUMNS)].reset_index(drop=True)
