"""Pictures of a gauge R&R study, in the reports' plain look (:mod:`acquire.report.look`).

- components of variation: per source (gauge R&R, repeatability, reproducibility, part) bars
  of its % contribution (of the total variance), % study variation (of the total standard
  deviation) and, with a tolerance, % tolerance; the 10 % and 30 % band edges (common practice)
  are drawn across;
- the range chart by operator: each part's range over its trials, operator after operator, with
  R̄ and UCL = D4·R̄ (LCL = D3·R̄); a range above the UCL says that operator's trials scatter
  more than the rest;
- the average chart by operator: each part's average, with X̿ ± A2·R̄; here most points should
  fall outside the limits, since the parts must differ by more than the gauge's scatter;
- measurements by part and by operator: every value, and the means joined by a line.

Each function takes a :class:`~acquire.msa.grr_report.GrrAnalysis` and returns a Figure;
:func:`grr_figures` renders all of them as PNG bytes. The data stay in SI units.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.figure import Figure

from acquire.msa.average_range import ChartLimits, average_chart, range_chart
from acquire.msa.grr_report import GrrAnalysis, shown
from acquire.report import look

#: Bars of the components picture: (label, hatch-free fill).
KINDS = ("% contribution", "% study variation", "% tolerance")
FILLS = (look.INK, look.LIGHT, "white")
SOURCES = (("gauge R&R", "grr"), ("repeatability", "repeatability"),
           ("reproducibility", "reproducibility"), ("part", "part_variation"))  # fmt: skip


def _title(a: GrrAnalysis, what: str) -> str:
    return look.plain(f"{shown(a.quantity or 'value')}: {what}")


def component_percentages(a: GrrAnalysis) -> dict[str, list[float]]:
    """The bars' heights: per kind of percentage, one value per source of :data:`SOURCES`."""
    s = a.anova
    sig = [a.sigma(key) for _, key in SOURCES]
    out = {
        KINDS[0]: [s.percent_contribution(x**2) for x in sig],
        KINDS[1]: [s.percent_total(x) for x in sig],
    }
    if a.tolerance is not None:
        out[KINDS[2]] = [a.percent_tolerance(key) for _, key in SOURCES]
    return out


def components_figure(a: GrrAnalysis) -> Figure:
    """Bars per source and kind of percentage; each bar container is labelled with its kind."""
    heights = component_percentages(a)
    figure = look.new_figure(look.WIDE)
    ax = figure.add_subplot()
    x = np.arange(len(SOURCES), dtype=float)
    width = 0.8 / len(heights)
    for n, (kind, values) in enumerate(heights.items()):
        drawn = np.nan_to_num(np.asarray(values, dtype=float), nan=0.0)
        ax.bar(x + (n - (len(heights) - 1) / 2) * width, drawn, width, label=kind,
                      facecolor=FILLS[n], edgecolor=look.INK, linewidth=0.8)  # fmt: skip
    for edge in (10.0, 30.0):
        ax.axhline(edge, gid="band", **look.LINES["acceptance"])
    ax.text(1.0, 10.0, " 10 %", transform=ax.get_yaxis_transform(), va="center", fontsize=7.5)
    ax.text(1.0, 30.0, " 30 %", transform=ax.get_yaxis_transform(), va="center", fontsize=7.5)
    ax.set_xticks(x, [label for label, _ in SOURCES])
    ax.set_ylabel("percent")
    ax.set_ylim(0.0, max(105.0, *(np.nan_to_num(v).max() * 1.05 for v in heights.values())))
    ax.legend(loc="upper left", bbox_to_anchor=(1.06, 1.0), borderaxespad=0.0)
    ax.set_title(_title(a, "components of variation (ANOVA method)"), loc="left")
    tol = f"; of the tolerance ({a.sigmas:g}σ)" if a.tolerance is not None else ""
    ax.set_xlabel("dashed: the 10 % and 30 % band edges of %GRR (common practice)\n"
                  f"percent of the total variance; of the total σ{tol}")  # fmt: skip
    return figure


def _by_operator(ax: Any, a: GrrAnalysis, chart: ChartLimits, name: str) -> np.ndarray:
    """Plot ``chart.points[part, operator]`` operator after operator; the x positions."""
    p, o = chart.points.shape
    x = np.arange(p * o, dtype=float).reshape(o, p).T + np.arange(o)[None, :]
    for j in range(o):
        ax.plot(x[:, j], chart.points[:, j], gid=f"operator-{j}", **look.LINES["raw"])
        ax.plot(x[:, j], chart.points[:, j], **look.MARKERS["value"])
        if j:
            ax.axvline(x[0, j] - 1.0, color=look.LIGHT, linewidth=0.8)
    ax.axhline(chart.center, gid="center", **look.LINES["center"])
    ax.axhline(chart.upper, gid="control", **look.LINES["control"])
    if chart.lower > 0 or name == "average":
        ax.axhline(chart.lower, gid="control", **look.LINES["control"])
    for label, value in (("UCL", chart.upper), ("CL", chart.center), ("LCL", chart.lower)):
        ax.annotate(f"{label} {look.value_text(value, a.unit)}", (1.0, value),
                    xycoords=("axes fraction", "data"), xytext=(3, 0),
                    textcoords="offset points", va="center", fontsize=7.5,
                    annotation_clip=False)  # fmt: skip
    ax.set_xticks(x[:, :].T.ravel(), [str(q) for _ in range(o) for q in a.cube.parts],
                  fontsize=7)  # fmt: skip
    for j, op in enumerate(a.cube.operators):
        ax.annotate(look.plain(shown(op)), (float(x[:, j].mean()), 1.0),
                    xycoords=("data", "axes fraction"), xytext=(0, 3),
                    textcoords="offset points", ha="center", fontsize=8)  # fmt: skip
    return x


def range_figure(a: GrrAnalysis) -> Figure | None:
    """The range chart by operator (None beyond 10 trials, where D4 is not tabulated here)."""
    chart = range_chart(a.cube.values)
    if chart is None:
        return None
    figure = look.new_figure(look.WIDE)
    ax = figure.add_subplot()
    _by_operator(ax, a, chart, "range")
    look.si_axis(ax.yaxis, "range", a.unit, [*chart.points.ravel(), chart.upper])
    ax.set_ylim(0.0, max(chart.upper, float(chart.points.max())) * 1.12 or 1.0)
    ax.set_xlabel("part, by operator; UCL = D4·R̄, LCL = D3·R̄ (NIST/SEMATECH e-Handbook 6.3.2)")
    ax.set_title(_title(a, "range chart by operator"), loc="left", pad=16)
    return figure


def average_figure(a: GrrAnalysis) -> Figure | None:
    """The average chart by operator (None beyond 10 trials)."""
    chart = average_chart(a.cube.values)
    if chart is None:
        return None
    figure = look.new_figure(look.WIDE)
    ax = figure.add_subplot()
    _by_operator(ax, a, chart, "average")
    look.si_axis(ax.yaxis, "average", a.unit, [*chart.points.ravel(), chart.upper, chart.lower])
    ax.set_xlabel("part, by operator; limits X̿ ± A2·R̄ (NIST/SEMATECH e-Handbook 6.3.2): "
                  "parts should fall outside them")  # fmt: skip
    ax.set_title(_title(a, "average chart by operator"), loc="left", pad=16)
    return figure


def _values_by(ax: Any, positions: np.ndarray, values: np.ndarray, means: np.ndarray) -> None:
    ax.plot(positions, values, gid="values", **look.MARKERS["value"])
    ax.plot(np.unique(positions), means, gid="means", label="mean", **look.LINES["mean"])


def by_part_figure(a: GrrAnalysis) -> Figure:
    """Every measurement against its part, and the part means joined (gid ``means``)."""
    y = a.cube.values
    figure = look.new_figure(look.WIDE)
    ax = figure.add_subplot()
    index = np.arange(1, y.shape[0] + 1, dtype=float)
    positions = np.repeat(index, y.shape[1] * y.shape[2])
    _values_by(ax, positions, y.reshape(y.shape[0], -1).ravel(), y.mean(axis=(1, 2)))
    ax.set_xticks(index, [str(q) for q in a.cube.parts])
    ax.set_xlabel("part")
    look.si_axis(ax.yaxis, look.plain(shown(a.quantity or "value")), a.unit, y.ravel())
    ax.set_title(_title(a, "measurements by part"), loc="left")
    return figure


def by_operator_figure(a: GrrAnalysis) -> Figure:
    """Every measurement against its operator, and the operator means joined."""
    y = a.cube.values
    figure = look.new_figure(look.WIDE)
    ax = figure.add_subplot()
    index = np.arange(1, y.shape[1] + 1, dtype=float)
    per = np.moveaxis(y, 1, 0).reshape(y.shape[1], -1)
    positions = np.repeat(index, per.shape[1])
    _values_by(ax, positions, per.ravel(), per.mean(axis=1))
    ax.set_xticks(index, [look.plain(shown(op)) for op in a.cube.operators])
    ax.set_xlabel("operator")
    look.si_axis(ax.yaxis, look.plain(shown(a.quantity or "value")), a.unit, y.ravel())
    ax.set_title(_title(a, "measurements by operator"), loc="left")
    return figure


def grr_figures(a: GrrAnalysis) -> list[tuple[str, bytes]]:
    """All pictures as (file name, PNG bytes)."""
    makers = (("grr-components.png", components_figure), ("grr-range.png", range_figure),
              ("grr-average.png", average_figure), ("grr-by-part.png", by_part_figure),
              ("grr-by-operator.png", by_operator_figure))  # fmt: skip
    out = []
    with look.styled():
        for name, make in makers:
            figure = make(a)
            if figure is not None:
                out.append((name, look.png_bytes(figure)))
    return out
