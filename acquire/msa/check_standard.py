"""A check standard's control chart: limits from its first results, run rules on the rest.

A check standard is a reference coil kept with the station and measured every shift as a unit
is. Each checked quantity (a plan check key such as ``"Ls@10000"``) gets an individuals and
moving-range chart (:func:`acquire.report.control.individuals_chart`). Its limits come from a
baseline, the first :data:`BASELINE` valid results, and are then held fixed: later results are
judged against them with the run rules of :func:`acquire.report.control.run_rules` (Western
Electric Statistical Quality Control Handbook, 1956; Nelson, J. Quality Technology 16(4), 1984).
While fewer results are stored the limits are being established and no rule is applied.

Twenty baseline results is common practice, no published source: the NIST/SEMATECH e-Handbook
of Statistical Methods, 6.3.2, describes limits computed from a baseline of in-control data and
held for later data (from memory, without a fixed count there); 20 to 25 subgroups is the count
usually quoted for charts.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np

from acquire.report.control import D4, ControlChart, individuals_chart, moving_ranges, run_rules
from acquire.store.check_results import CheckValue

#: How many valid results establish a standard's limits.
BASELINE = 20


@dataclass(frozen=True, eq=False)
class StandardChart:
    """One quantity of a check standard over its stored checks, oldest first.

    ``chart`` holds every value with the limits of the first ``baseline`` valid ones (None while
    they are being established); ``rules`` the run rules each value broke when it was stored.
    """

    quantity: str
    unit: str
    times: tuple[datetime, ...]
    values: np.ndarray
    uncertainty: np.ndarray
    rules: tuple[tuple[str, ...], ...]
    chart: ControlChart | None
    baseline: int = BASELINE

    @property
    def valid(self) -> int:
        return int(np.isfinite(self.values).sum())

    @property
    def establishing(self) -> bool:
        return self.chart is None


def baseline_end(values: np.ndarray, baseline: int = BASELINE) -> int | None:
    """The index just past the ``baseline``-th valid value, or None when there are fewer."""
    valid = np.flatnonzero(np.isfinite(np.asarray(values, dtype=float)))
    return None if valid.size < baseline else int(valid[baseline - 1]) + 1


def held_chart(values: np.ndarray, baseline: int = BASELINE) -> ControlChart | None:
    """The individuals chart of ``values`` with center and limits from the first ``baseline``
    valid values (None when there are fewer); ``broken`` lists only points after the baseline."""
    x = np.asarray(values, dtype=float).ravel()
    end = baseline_end(x, baseline)
    if end is None:
        return None
    base = individuals_chart(x[:end])
    ok = np.isfinite(base.sigma) and base.sigma > 0
    broken = run_rules(x, base.center, base.sigma) if ok else ()
    return ControlChart(
        values=x,
        center=base.center,
        sigma=base.sigma,
        ucl=base.ucl,
        lcl=base.lcl,
        moving_range=moving_ranges(x),
        mr_center=base.mr_center,
        mr_ucl=D4 * base.mr_center,
        broken=tuple((i, rule) for i, rule in broken if i >= end),
    )


def rules_of_last(values: np.ndarray, baseline: int = BASELINE) -> tuple[str, ...]:
    """The run rules the last of ``values`` breaks against the held limits (none while the
    limits are being established)."""
    chart = held_chart(values, baseline)
    if chart is None:
        return ()
    last = len(chart.values) - 1
    return tuple(rule for i, rule in chart.broken if i == last)


def establishing_text(valid: int, baseline: int = BASELINE) -> str:
    """``"limits being established: 7 of 20 results"``, or '' once they are set."""
    if valid >= baseline:
        return ""
    return f"limits being established: {valid} of {baseline} results"


def standard_charts(rows: Sequence, baseline: int = BASELINE) -> list[StandardChart]:
    """One chart per quantity of stored check rows (``Store.check_history``), in the order the
    quantities first appear."""
    grouped: dict[str, list] = {}
    for row in rows:
        grouped.setdefault(row.quantity, []).append(row)
    out = []
    for quantity, mine in grouped.items():
        values = np.array([r.value for r in mine], dtype=float)
        out.append(
            StandardChart(
                quantity=quantity,
                unit=mine[-1].unit,
                times=tuple(r.checked_at for r in mine),
                values=values,
                uncertainty=np.array([r.uncertainty for r in mine], dtype=float),
                rules=tuple(tuple(r.rules) for r in mine),
                chart=held_chart(values, baseline),
                baseline=baseline,
            )
        )
    return out


def position_strip(value: float, chart: ControlChart | None, width: int = 25) -> str:
    """A one-line picture of ``value`` between the limits: ``|`` at LCL and UCL, ``:`` at the
    center, ``o`` at the value (``<`` or ``>`` at the edge when it lies beyond ±4 sigma)."""
    if chart is None or not np.isfinite(value) or not (np.isfinite(chart.sigma) and chart.sigma):
        return ""
    cells = [" "] * width

    def place(z: float) -> int:
        return round((z + 4.0) / 8.0 * (width - 1))

    for z, mark in ((-3.0, "|"), (3.0, "|"), (0.0, ":")):
        cells[place(z)] = mark
    z = (value - chart.center) / chart.sigma
    if z < -4:
        cells[0] = "<"
    elif z > 4:
        cells[-1] = ">"
    else:
        cells[place(z)] = "o"
    return "".join(cells)


def check_values(
    plan: Any, measured: Any, history: Mapping[str, np.ndarray], baseline: int = BASELINE
) -> list[CheckValue]:
    """A measured check (:class:`~acquire.production.measure.UnitMeasurement`) as store values,
    one per check of ``plan``, each with the run rules it breaks after ``history`` (the
    quantity's stored values, oldest first)."""
    out = []
    for check in plan.checks:
        key = check.key
        value = float(measured.values.get(key, np.nan))
        u = float(measured.uncertainty.get(key, np.nan))
        series = np.append(np.asarray(history.get(key, ()), dtype=float), value)
        out.append(CheckValue(key, check.unit, value, u, rules_of_last(series, baseline)))
    return out
