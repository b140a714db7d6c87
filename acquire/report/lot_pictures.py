"""Pictures of a lot: per judged quantity, a histogram against its limits and a control chart.

The histogram counts the quantity's values (every stored attempt, as the lot statistics count
them) in bars: grey for values judged "pass", white hatched for the others, stacked. The plan's
tolerance limits are drawn as solid lines and the acceptance limits actually applied (after
the guard band) as dashed ones, each labelled with its value; acceptance limits that differ
from unit to unit (a guard band follows each reading's uncertainty) are drawn at their median,
and the label gives their range. The mean is a dotted line.

The control chart is an individuals chart over the moving ranges of two, in test order (as
:func:`acquire.report.control.individuals_chart` computes them): the values with their center
line and control limits, a point that breaks a run rule ringed by an open square and labelled
with the rule's number (the rules are listed under the chart), a retest's value drawn as a
triangle and a value not judged "pass" as an x; below, the moving ranges with their center
line and upper limit.

:func:`histogram_figure` and :func:`control_figure` are pure (a data frame in, a Figure out);
:func:`lot_figures` reads the store through :mod:`acquire.report.statistics` and renders PNGs.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from matplotlib.figure import Figure

from acquire.report import look

if TYPE_CHECKING:
    import pandas as pd

    from acquire.report.control import ControlChart
    from acquire.report.statistics import LotFilter, QuantityStatistics

#: The run rules in the order their numbers are given on a chart; a rule the chart reports that
#: is not listed here is numbered after them.
RULES: tuple[str, ...] = ("beyond 3 sigma", "2 of 3 beyond 2 sigma", "4 of 5 beyond 1 sigma")
RULES += ("8 in a row on one side",)


def lot_figures(store: Any, filter: LotFilter) -> list[tuple[str, bytes]]:
    """PNGs of the units ``filter`` selects: per judged quantity, ``lot-<quantity>-histogram.png``
    and (with two values or more) ``lot-<quantity>-control.png``, as (file name, PNG bytes)."""
    from acquire.report.control import individuals_chart
    from acquire.report.statistics import lot_statistics, quantity_series

    statistics = lot_statistics(store, filter)
    where = selection_name(filter)
    out = []
    for q in statistics.quantities:
        series = quantity_series(store, filter, q.parameter, q.frequency)
        name = look.quantity_name(q.parameter, q.frequency)
        stem = look.file_stem(f"lot-{q.parameter}-{frequency_stem(q.frequency)}")
        with look.styled():
            figure = histogram_figure(series, name, q.unit, f"{where}: {name}", q)
            out.append((f"{stem}-histogram.png", look.png_bytes(figure)))
            values = series["value"].to_numpy(dtype=float)
            if np.isfinite(values).sum() >= 2:
                chart = individuals_chart(values[np.isfinite(values)])
                figure = control_figure(series, chart, name, q.unit, f"{where}: {name}")
                out.append((f"{stem}-control.png", look.png_bytes(figure)))
    return out


def selection_name(filter: LotFilter) -> str:
    """``lot DEMO-LOT-1``, with the other parts of the filter that are set."""
    parts = [f"lot {filter.lot}"] if filter.lot else ["units"]
    if filter.station:
        parts.append(f"station {filter.station}")
    if filter.plan_hash:
        parts.append(f"plan {filter.plan_hash}")
    if filter.since:
        parts.append(f"from {filter.since:%Y-%m-%d %H:%M}")
    if filter.until:
        parts.append(f"until {filter.until:%Y-%m-%d %H:%M}")
    return ", ".join(parts)


def frequency_stem(frequency: float | None) -> str:
    return "DC" if frequency is None else look.frequency_text(frequency, space="")


#: A limit to draw: its median over the selected values, and the lowest and highest applied.
Limit = tuple[float, float, float]


def _one_limit(column: pd.Series) -> Limit | None:
    values = column.to_numpy(dtype=float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return None
    return float(np.median(values)), float(values.min()), float(values.max())


def limits(series: pd.DataFrame) -> dict[str, Limit | None]:
    """The four limits to draw: ``tolerance_low``, ``tolerance_high``, ``low_limit`` and
    ``high_limit`` (acceptance), each as (median, lowest, highest) of the stored ones, or None
    for an open side."""
    keys = ("tolerance_low", "tolerance_high", "low_limit", "high_limit")
    return {k: _one_limit(series[k]) for k in keys}


def histogram_figure(
    series: pd.DataFrame,
    name: str,
    unit: str,
    title: str,
    statistics: QuantityStatistics | None = None,
) -> Figure:
    """The histogram of ``series["value"]`` with its limits (see the module's description).

    The tolerance and acceptance lines carry the gid ``tolerance`` and ``acceptance``.
    """
    values = series["value"].to_numpy(dtype=float)
    finite = np.isfinite(values)
    passed = (series["verdict"].to_numpy() == "pass") & finite
    drawn = limits(series)
    figure = look.new_figure(look.WIDE)
    ax = figure.add_subplot()
    shown = values[finite]
    edges = _edges(shown)
    ok, _ = np.histogram(values[passed], edges)
    other, _ = np.histogram(values[finite & ~passed], edges)
    widths = np.diff(edges)
    ax.bar(edges[:-1], ok, widths, align="edge", label="passed", **look.BARS["passed"])
    if other.any():
        ax.bar(edges[:-1], other, widths, bottom=ok, align="edge", label="not passed",
               **look.BARS["other"])  # fmt: skip
    span = [*shown, *(d[0] for d in drawn.values() if d is not None)]
    _limit_lines(ax, drawn, unit)
    if shown.size:
        ax.axvline(float(shown.mean()), **look.LINES["mean"], label="mean")
    look.si_axis(ax.xaxis, look.plain(name), unit, span)
    ax.set_ylabel("values")
    look.integer_ticks(ax.yaxis)
    _pad(ax, span)
    ax.set_title(look.plain(title), loc="left")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    text = _summary(values, statistics, unit)
    ax.text(1.01, 0.0, text, transform=ax.transAxes, va="bottom", ha="left", fontsize=8)
    return figure


def _edges(values: np.ndarray) -> np.ndarray:
    """Bin edges: about √n bins (5 to 30) over the values' range; one bin for equal values."""
    if values.size == 0:
        return np.array([0.0, 1.0])
    low, high = float(values.min()), float(values.max())
    if low == high:
        half = abs(low) * 1e-3 or 1.0
        return np.array([low - half, low + half])
    count = int(np.clip(np.ceil(np.sqrt(values.size)), 5, 30))
    return np.linspace(low, high, count + 1)


def _limit_lines(ax: Any, drawn: dict[str, Limit | None], unit: str) -> None:
    labelled: set[str] = set()
    for key, limit in drawn.items():
        if limit is None:
            continue
        value, low, high = limit
        kind = "tolerance" if key.startswith("tolerance") else "acceptance"
        side = "low" if key.endswith("low") or key == "low_limit" else "high"
        legend = {
            "tolerance": "tolerance limit (plan)",
            "acceptance": "acceptance limit (after guard band)",
        }[kind]
        ax.axvline(value, gid=kind, label=None if kind in labelled else legend,
                   **look.LINES[kind])  # fmt: skip
        labelled.add(kind)
        note = f"{kind} {side} {look.value_text(value, unit)}"
        if look.value_text(low, unit) != look.value_text(high, unit):
            note += f" (median; {look.value_text(low, unit)} to {look.value_text(high, unit)})"
        # tolerance labels outside their line, acceptance labels inside theirs, both upright
        outside = (side == "low") == (kind == "tolerance")
        ax.annotate(
            note,
            (value, 0.98),
            xycoords=("data", "axes fraction"),
            xytext=(-2 if outside else 2, 0),
            textcoords="offset points",
            rotation=90,
            ha="right" if outside else "left",
            va="top",
            fontsize=7.5,
        )


def _pad(ax: Any, span: list[float]) -> None:
    """Show every value and limit, with a margin for the limits' labels."""
    finite = np.asarray(span, dtype=float)
    finite = finite[np.isfinite(finite)]
    if finite.size == 0:
        return
    low, high = float(finite.min()), float(finite.max())
    margin = (high - low) * 0.22 or abs(low) * 0.01 or 1.0
    ax.set_xlim(low - margin, high + margin)
    top = max(ax.get_ylim()[1], 1.0)
    ax.set_ylim(0.0, top * 1.45)


def _summary(values: np.ndarray, q: QuantityStatistics | None, unit: str) -> str:
    finite = values[np.isfinite(values)]
    lines = [f"n = {finite.size}" + (f" of {values.size}" if finite.size != values.size else "")]
    if finite.size:
        lines.append(f"mean = {look.value_text(float(finite.mean()), unit)}")
    if finite.size > 1:
        lines.append(f"s = {look.value_text(float(finite.std(ddof=1)), unit, 3)}")
    if q is not None:
        for label, v in (("Cpk", q.cpk), ("Ppk", q.ppk)):
            if np.isfinite(v):
                lines.append(f"{label} = {v:.2f}")
    return "\n".join(lines)


def control_figure(
    series: pd.DataFrame, chart: ControlChart, name: str, unit: str, title: str
) -> Figure:
    """The individuals and moving-range chart of ``chart``, the finite values of ``series`` in
    test order (see the module's description). Rule-breaking points carry the gid ``broken``."""
    finite = np.isfinite(series["value"].to_numpy(dtype=float))
    rows = series[finite]
    values = np.asarray(chart.values, dtype=float)
    order = np.arange(1, values.size + 1)
    figure = look.new_figure(look.TALL)
    top, bottom = figure.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    top.plot(order, values, **look.LINES["raw"], zorder=1)
    retest = rows["attempt"].to_numpy(dtype=int) > 1 if "attempt" in rows else order < 0
    failed = (rows["verdict"].to_numpy() != "pass") if "verdict" in rows else order < 0
    ordinary = ~retest & ~failed
    top.plot(order[ordinary], values[ordinary], label="value", **look.MARKERS["value"])
    if (retest & ~failed).any():
        top.plot(order[retest & ~failed], values[retest & ~failed],
                 label="retest (attempt 2 or later)", **look.MARKERS["retest"])  # fmt: skip
    if failed.any():
        top.plot(order[failed], values[failed], label="not passed", **look.MARKERS["failed"])
    _control_lines(top, chart.center, chart.ucl, chart.lcl, unit)
    rules = _mark_broken(top, order, values, chart.broken)
    look.si_axis(top.yaxis, look.plain(name), unit, [*values, chart.ucl, chart.lcl])
    figure.suptitle(look.plain(title) + ": individuals and moving ranges, in test order",
                    x=0.01, ha="left", fontsize=look.STYLE["axes.titlesize"])  # fmt: skip
    top.legend(loc="lower left", bbox_to_anchor=(0.0, 1.01), ncol=5, borderaxespad=0.0)
    mr = np.asarray(chart.moving_range, dtype=float)
    bottom.plot(order[1:], mr, **look.LINES["raw"], zorder=1)
    bottom.plot(order[1:], mr, **look.MARKERS["value"])
    _control_lines(bottom, chart.mr_center, chart.mr_ucl, None, unit)
    wide = np.flatnonzero(mr > chart.mr_ucl)  # a moving range above its UCL (NIST 6.3.2)
    if wide.size:
        bottom.plot(order[1:][wide], mr[wide], gid="broken-mr", **look.MARKERS["broken"])
    look.si_axis(bottom.yaxis, "moving range", unit, [*mr, chart.mr_ucl])
    finite_mr = mr[np.isfinite(mr)]
    highest = max([chart.mr_ucl, *finite_mr]) if np.isfinite(chart.mr_ucl) else None
    bottom.set_ylim(0.0, highest * 1.12 if highest else None)
    look.integer_ticks(bottom.xaxis)
    sigma = (
        "control limits: center ± 3σ, σ within = average moving range / 1.128 = "
        f"{look.value_text(chart.sigma, unit, 3)}"
    )
    broken = "; ".join(f"{n}: {rule}" for rule, n in rules.items())
    note = f"ringed points break a run rule ({broken})" if rules else "no point breaks a run rule"
    if wide.size:
        note += f"; {wide.size} moving range{'s' if wide.size > 1 else ''} above its UCL, ringed"
    bottom.set_xlabel(f"test order (values in the order they were measured)\n{sigma}\n{note}")
    return figure


def _control_lines(ax: Any, center: float, upper: float, lower: float | None, unit: str) -> None:
    ax.axhline(center, gid="center", label="center line", **look.LINES["center"])
    ax.axhline(upper, gid="control", label="control limits", **look.LINES["control"])
    names = [("CL", center), ("UCL", upper)]
    if lower is not None:
        ax.axhline(lower, gid="control", **look.LINES["control"])
        names.append(("LCL", lower))
    for label, value in names:
        ax.annotate(
            f"{label} {look.value_text(value, unit)}",
            (1.0, value),
            xycoords=("axes fraction", "data"),
            xytext=(3, 0),
            textcoords="offset points",
            va="center",
            fontsize=7.5,
            annotation_clip=False,
        )


def _mark_broken(
    ax: Any, order: np.ndarray, values: np.ndarray, broken: tuple[tuple[int, str], ...]
) -> dict[str, int]:
    """Ring the points that break a rule and label them with the rules' numbers."""
    known = [r for r in RULES if any(rule == r for _, rule in broken)]
    extra = [rule for _, rule in broken if rule not in RULES]
    numbers = {rule: n for n, rule in enumerate(dict.fromkeys([*known, *extra]), 1)}
    by_point: dict[int, list[int]] = {}
    for index, rule in broken:
        by_point.setdefault(int(index), []).append(numbers[rule])
    if not by_point:
        return numbers
    points = np.array(sorted(by_point))
    ax.plot(order[points], values[points], gid="broken", label="breaks a run rule",
            **look.MARKERS["broken"])  # fmt: skip
    for i in points:
        ax.annotate(
            ",".join(str(n) for n in sorted(set(by_point[int(i)]))),
            (order[i], values[i]),
            xytext=(6, 6),
            textcoords="offset points",
            fontsize=8,
            fontweight="bold",
        )
    return numbers
