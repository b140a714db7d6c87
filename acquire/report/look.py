"""The reports' own plain look, in one place: figure sizes, fonts, lines, markers, SI axes.

Every picture is drawn in black and greys on white, so it prints and photocopies as it shows,
and no colour carries meaning alone: each kind of line has its own line style and each kind of
point its own marker, named here (:data:`LINES`, :data:`MARKERS`) and used by every picture.
Axes show SI-prefixed numbers with the unit in the label (``Ls [µH]``): the data stay in SI
units (the artists hold henry, ohm, hertz) and only the tick labels are scaled, with the prefix
:func:`acquire.units.si_prefix` picks.

Figures are :class:`matplotlib.figure.Figure` objects on the Agg canvas: no pyplot, no window,
no global figure state. Build them inside :func:`styled` (it applies :data:`STYLE` for the
time it takes) and turn them into PNG bytes with :func:`png_bytes`.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import matplotlib
import numpy as np
from cycler import cycler
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import Formatter, MaxNLocator

from acquire.units import si_prefix

#: Resolution of every PNG, dots per inch; a figure of (w, h) inches is (w·DPI, h·DPI) pixels.
DPI = 100
#: Figure sizes in inches: one panel, and two panels stacked (a chart with its moving ranges).
WIDE = (8.0, 4.5)
TALL = (8.0, 6.5)

#: Greys, darkest first (black for the measured data, lighter for what is drawn behind it).
INK, DARK, MID, LIGHT, PALE = "#000000", "#404040", "#808080", "#b0b0b0", "#e4e4e4"

#: The line style of each kind of line, so the kind shows without colour.
LINES: dict[str, dict[str, Any]] = {
    "data": {"color": INK, "linestyle": "-", "linewidth": 1.0},
    "tolerance": {"color": INK, "linestyle": "-", "linewidth": 1.6},
    "acceptance": {"color": INK, "linestyle": "--", "linewidth": 1.3},
    "center": {"color": DARK, "linestyle": "-", "linewidth": 1.0},
    "control": {"color": DARK, "linestyle": (0, (6, 3)), "linewidth": 1.0},
    "mean": {"color": MID, "linestyle": ":", "linewidth": 1.3},
    "raw": {"color": MID, "linestyle": "-", "linewidth": 0.8},
    "fit": {"color": INK, "linestyle": "--", "linewidth": 1.0},
}

#: The marker of each kind of point: a filled dot for an ordinary value, an open square round a
#: point that breaks a control rule, a triangle for a retest, an x for a value that failed.
MARKERS: dict[str, dict[str, Any]] = {
    "value": {"marker": "o", "markersize": 4.0, "color": INK, "linestyle": "none"},
    "broken": {
        "marker": "s",
        "markersize": 10.0,
        "markerfacecolor": "none",
        "markeredgecolor": INK,
        "markeredgewidth": 1.4,
        "linestyle": "none",
    },
    "retest": {"marker": "^", "markersize": 6.0, "color": INK, "linestyle": "none"},
    "failed": {"marker": "x", "markersize": 7.0, "color": INK, "linestyle": "none"},
}

#: Line styles and markers to tell apart overlaid curves (several sweeps on one panel).
CYCLE: tuple[tuple[Any, str], ...] = (
    ("-", "o"),
    ("--", "s"),
    (":", "^"),
    ("-.", "D"),
    ((0, (5, 1, 1, 1, 1, 1)), "v"),
    ((0, (1, 3)), "x"),
)

#: Fill of a histogram's bars: grey for passed values, white with hatching for the others.
BARS: dict[str, dict[str, Any]] = {
    "passed": {"facecolor": LIGHT, "edgecolor": INK, "linewidth": 0.8},
    "other": {"facecolor": "white", "edgecolor": INK, "linewidth": 0.8, "hatch": "////"},
}

#: matplotlib settings applied while a picture is built (see :func:`styled`).
STYLE: dict[str, Any] = {
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.titlesize": 10.0,
    "axes.labelsize": 9.0,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.grid": True,
    "axes.prop_cycle": cycler(color=[INK, DARK, MID]),
    "grid.color": PALE,
    "grid.linewidth": 0.6,
    "grid.linestyle": "-",
    "xtick.color": INK,
    "ytick.color": INK,
    "legend.fontsize": 8.0,
    "legend.frameon": True,
    "legend.framealpha": 0.9,
    "legend.edgecolor": LIGHT,
    "figure.facecolor": "white",
    "axes.facecolor": "white",
    "hatch.color": INK,
    "hatch.linewidth": 0.6,
    "axes.formatter.useoffset": False,
}


@contextmanager
def styled() -> Iterator[None]:
    """Build a picture in the reports' look (:data:`STYLE`); settings are restored after."""
    with matplotlib.rc_context(STYLE):  # type: ignore[arg-type]
        yield


def new_figure(size: tuple[float, float] = WIDE) -> Figure:
    """An empty figure of ``size`` inches on the Agg canvas, laid out with constrained layout."""
    figure = Figure(figsize=size, dpi=DPI, layout="constrained")
    FigureCanvasAgg(figure)
    return figure


def png_bytes(figure: Figure) -> bytes:
    """The figure as PNG bytes, exactly its size in pixels (no cropping)."""
    buffer = io.BytesIO()
    canvas = figure.canvas
    if not isinstance(canvas, FigureCanvasAgg):
        canvas = FigureCanvasAgg(figure)
    canvas.print_png(buffer)
    return buffer.getvalue()


class SIFormatter(Formatter):
    """Tick labels of SI values divided by a fixed scale (``1e-6`` for µ), with just enough
    decimals to tell neighbouring ticks apart."""

    def __init__(self, scale: float) -> None:
        self.scale = scale
        self.ticks: np.ndarray = np.array([])

    def set_locs(self, locs: Any) -> None:
        self.ticks = np.asarray(locs, dtype=float)

    def __call__(self, x: float, pos: int | None = None) -> str:
        scaled = self.ticks / self.scale
        decimals = next((d for d in range(7) if _exact(scaled, d)), 6)
        text = f"{x / self.scale:.{decimals}f}"
        return "0" if text.strip("-0.") == "" else text.replace("-", "\u2212")


def _exact(values: np.ndarray, decimals: int) -> bool:
    """True if ``decimals`` decimals show every one of ``values`` as it is."""
    if values.size == 0:
        return True
    shown = np.round(values, decimals)
    size = max(float(np.ptp(values)), float(np.abs(values).max()), 1e-300)
    return bool(np.all(np.abs(shown - values) <= 1e-9 * size))


def integer_ticks(axis: Any) -> None:
    """Ticks of ``axis`` at whole numbers only (counts, test order)."""
    axis.set_major_locator(MaxNLocator(integer=True))


def axis_scale(values: Sequence[float] | np.ndarray) -> tuple[float, str]:
    """The SI scale and prefix for an axis showing ``values`` (by the largest finite one)."""
    finite = np.abs(np.asarray(values, dtype=float))
    finite = finite[np.isfinite(finite) & (finite > 0)]
    if finite.size == 0:
        return 1.0, ""
    return si_prefix(float(finite.max()))


def si_axis(axis: Any, name: str, unit: str, values: Sequence[float] | np.ndarray) -> None:
    """Label ``axis`` (``ax.xaxis`` or ``ax.yaxis``) as ``name [prefix unit]`` and show its
    ticks in that prefix; a quantity without a unit (Q) is labelled by its name alone."""
    scale, prefix = axis_scale(values) if unit else (1.0, "")
    axis.set_major_formatter(SIFormatter(scale))
    axis.set_label_text(f"{name} [{prefix}{unit}]" if unit else name)


def quantity_name(parameter: str, frequency: float | None) -> str:
    """``Ls at 10 kHz``, or ``Rdc (DC)`` for a value measured without a frequency."""
    if frequency is None:
        return f"{parameter} (DC)"
    return f"{parameter} at {frequency_text(frequency)}"


def frequency_text(frequency: float, space: str = " ") -> str:
    """``10 kHz``, ``2.5 MHz``: a frequency with its SI prefix and no trailing zeros."""
    scale, prefix = si_prefix(frequency)
    return f"{frequency / scale:.4g}{space}{prefix}Hz"


def value_text(value: float, unit: str, digits: int = 4) -> str:
    """``344.0 µH`` with an SI prefix; a number without a unit (Q) is shown without a prefix,
    since ``440 m`` for a Q of 0.44 would read as metres."""
    from acquire.units import format_si

    if unit or value is None or not math.isfinite(value):
        return format_si(value, unit, digits)
    return f"{value:.{digits}g}"


def plain(text: str) -> str:
    """``text`` shown as written in a picture (a ``$`` would otherwise start mathtext)."""
    return str(text).replace("$", r"\$")


def file_stem(text: str) -> str:
    """A file name part made of ``text``: letters, digits, ``-`` and ``_`` only."""
    stem = re.sub(r"[^A-Za-z0-9_-]+", "-", text).strip("-")
    return stem or "x"
