"""A check standard's picture: one quantity's individuals and moving-range chart over its checks.

The chart is the reports' control chart (:func:`acquire.report.lot_pictures.control_figure`:
values in check order, center line, control limits, rule-breaking points ringed and numbered,
moving ranges below) with the limits held at those of the baseline, the first results
(:mod:`acquire.msa.check_standard`); a dashed vertical line marks where the baseline ends. While
the limits are being established the lines drawn are those of the results so far, and the title
says they are provisional.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure

from acquire.msa.check_standard import StandardChart, baseline_end, establishing_text
from acquire.report import look
from acquire.report.control import individuals_chart
from acquire.report.lot_pictures import control_figure


def check_figure(chart: StandardChart, standard: str) -> Figure:
    """The figure of one quantity of ``standard`` (a name, shown as text)."""
    name = chart.quantity.split("@", 1)[0]
    held = chart.chart
    waiting = establishing_text(chart.valid, chart.baseline)
    shown = held if held is not None else individuals_chart(chart.values)
    title = f"check standard {standard}, {chart.quantity}"
    if waiting:
        title += f" ({waiting}; limits provisional)"
    series = pd.DataFrame({"value": np.asarray(chart.values, dtype=float)})
    with look.styled():
        figure = control_figure(series, shown, name, chart.unit, title)
        end = baseline_end(chart.values, chart.baseline)
        if end is not None and end < len(chart.values):
            for ax in figure.axes:
                ax.axvline(end + 0.5, gid="baseline", color=look.INK, linestyle="--",
                           linewidth=0.8)  # fmt: skip
            top = figure.axes[0]
            top.annotate(
                f"limits from the first {chart.baseline} results",
                (end + 0.5, 1.0),
                xycoords=("data", "axes fraction"),
                xytext=(-3, -10),
                textcoords="offset points",
                ha="right",
                fontsize=7.5,
            )
    return figure


def check_png(chart: StandardChart, standard: str) -> bytes:
    """:func:`check_figure` as PNG bytes."""
    with look.styled():
        return look.png_bytes(check_figure(chart, standard))
