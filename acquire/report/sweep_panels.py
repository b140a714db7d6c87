"""The panels of a sweep's picture: what each shows, its look, and its SI-prefixed axes.

Pure drawing helpers on matplotlib Axes (object API, no pyplot state) and numpy arrays in SI
units. The look is our own and plain: black and greys only; a line's style and marker carry its
meaning, never colour alone. :mod:`acquire.report.sweep_pictures` puts the panels together.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, NullFormatter

from acquire.impedance import quantities
from acquire.uncertainty.quantities import quantity_uncertainty
from acquire.units import si_prefix

#: Figure size (inches) and resolution of a sweep's picture: 1100 x 1050 pixels.
FIGURE_SIZE = (11.0, 10.5)
DPI = 100
FONT_SIZE = 9.0
#: Corrected values: black, solid. Raw readings: thin grey. The fit: dashed black.
CORRECTED: dict[str, Any] = {"color": "black", "linewidth": 1.4, "linestyle": "-"}
RAW: dict[str, Any] = {"color": "0.55", "linewidth": 0.8, "linestyle": "-"}
FIT: dict[str, Any] = {"color": "black", "linewidth": 1.0, "linestyle": (0, (5, 3))}
#: The Ls axis stops at this many times the low-frequency Ls: toward a self-resonance Ls grows
#: without bound and would flatten the rest of the curve into the bottom of the panel.
LS_CAP = 10.0
#: The corrected value's band (± U, k = 2): a light grey fill with no edge.
BAND: dict[str, Any] = {"color": "0.82", "linewidth": 0.0}
#: The self-resonance: a dotted vertical line.
RESONANCE: dict[str, Any] = {"color": "black", "linewidth": 1.0, "linestyle": ":"}
#: Points past the meter's stated accuracy: small open circles on the corrected line.
FLAGGED: dict[str, Any] = {
    "marker": "o",
    "markersize": 3.5,
    "markerfacecolor": "white",
    "markeredgewidth": 0.7,
    "color": "black",
    "linestyle": "none",
}
#: Line style and marker of each sweep overlaid, in order (cycled past the last).
OVERLAY_STYLES: tuple[tuple[Any, str, str], ...] = (
    ("-", "o", "black"),
    ((0, (5, 2)), "s", "black"),
    ((0, (1, 1.5)), "^", "black"),
    ((0, (6, 2, 1, 2)), "D", "0.35"),
    ("-", "v", "0.5"),
    ((0, (2, 2)), "x", "0.35"),
)


@dataclass(frozen=True)
class Panel:
    """One panel: the quantity's key in :func:`acquire.impedance.quantities`, its axis label,
    unit, and whether its axis is logarithmic (only values above zero are then drawn)."""

    key: str
    label: str
    unit: str
    log: bool


#: The panels of a sweep's picture, in order (left to right, top to bottom).
PANELS: tuple[Panel, ...] = (
    Panel("Ls", "series inductance Ls", "H", True),
    Panel("Rs", "series resistance Rs", "Ω", True),
    Panel("Q", "quality factor Q", "", True),
    Panel("Z", "impedance magnitude |Z|", "Ω", True),
    Panel("theta", "phase θ", "°", False),
)
KEYS = tuple(p.key for p in PANELS)

#: What the band means, for the notes beside the panels.
BAND_NOTE = (
    "band: corrected value ± U (k = 2) from each point's stored U(R), U(X); "
    "U(Ls) = U(X)/ω, U(Rs) = U(R); U(Q), U(|Z|), U(θ) with R and X taken as uncorrelated"
)


def values(f: np.ndarray, z: np.ndarray) -> dict[str, np.ndarray]:
    """The panels' quantities of impedance ``z`` (ohm) at ``f`` (Hz)."""
    q = quantities(f, z)
    return {k: q[k] for k in KEYS}


def expanded(f: np.ndarray, z: np.ndarray, u: np.ndarray | None) -> dict[str, np.ndarray]:
    """U (k = 2) of the panels' quantities from the stored U of R and X (``u``, shape (n, 2),
    k = 2), R and X taken as uncorrelated; NaN where ``u`` is unknown or None."""
    if u is None:
        return {k: np.full(f.shape, np.nan) for k in KEYS}
    sr, sx = u[:, 0] / 2.0, u[:, 1] / 2.0
    cov = np.zeros(f.shape + (2, 2))
    cov[:, 0, 0], cov[:, 1, 1] = sr * sr, sx * sx
    return quantity_uncertainty(f, z, cov, KEYS)


def shown(panel: Panel, y: np.ndarray) -> np.ndarray:
    """``y`` as drawn on the panel: NaN where it is not finite, or not above zero on a log axis."""
    y = np.asarray(y, dtype=float)
    keep = np.isfinite(y) & ((y > 0) if panel.log else True)
    return np.where(keep, y, np.nan)


def tick_text(value: float, unit: str) -> str:
    """A tick's label with an SI prefix and the unit: ``1 kHz``, ``300 µH``; a plain number
    (``0.1``, ``1000``) for a quantity without a unit such as Q."""
    if value == 0 or not math.isfinite(value):
        return f"0 {unit}".strip() if value == 0 else ""
    if not unit:
        return f"{value:.6g}"
    scale, prefix = si_prefix(value)
    number = f"{value / scale:.3g}"
    return f"{number} {prefix}{unit}".strip()


def _log_ticks(ax: Axes, axis: str, unit: str, low: float, high: float) -> None:
    """SI-prefixed ticks on a log axis: decades labelled; 2 and 5 too over less than two
    decades, and 3 too over less than one and a half."""
    which = ax.xaxis if axis == "x" else ax.yaxis
    which.set_major_locator(LogLocator(base=10.0, numticks=12))
    which.set_major_formatter(FuncFormatter(lambda v, _: tick_text(v, unit)))
    which.set_minor_locator(LogLocator(base=10.0, subs=tuple(range(2, 10)), numticks=12))
    span = math.log10(high / low)
    if span < 2.0:
        labelled = (2.0, 3.0, 5.0) if span < 1.5 else (2.0, 5.0)

        def minor(v: float, _: Any) -> str:
            mantissa = round(v / 10 ** math.floor(math.log10(v) + 1e-9), 6)
            return tick_text(v, unit) if mantissa in labelled else ""

        which.set_minor_formatter(FuncFormatter(minor))
    else:
        which.set_minor_formatter(NullFormatter())


def frequency_axis(ax: Axes, f_low: float, f_high: float, label: bool) -> None:
    """The log frequency axis from ``f_low`` to ``f_high`` (Hz), ticks like ``10 kHz``."""
    ax.set_xscale("log")
    ax.set_xlim(f_low, f_high)
    _log_ticks(ax, "x", "Hz", f_low, f_high)
    if label:
        ax.set_xlabel("frequency (log scale)")


def value_axis(
    ax: Axes, panel: Panel, curves: Sequence[np.ndarray], cap: float | None = None
) -> tuple[float, float]:
    """Scale, limits and label of the panel's value axis from the curves drawn on it; returns
    the limits. A log axis spans the curves' positive values with a margin, up to ``cap`` if
    given (curves then run off the top); the phase axis is fixed from −90° to +90°."""
    unit = f" ({panel.unit})" if panel.unit else ""
    ax.set_ylabel(f"{panel.label}{unit}")
    if not panel.log:
        ax.set_ylim(-100.0, 100.0)
        ax.yaxis.set_major_locator(FixedLocator([-90.0, -45.0, 0.0, 45.0, 90.0]))
        ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:+.0f}°" if v else "0°"))
        ax.axhline(0.0, color="0.6", linewidth=0.6, zorder=1)
        return -100.0, 100.0
    ax.set_yscale("log")
    data = np.concatenate([np.ravel(c) for c in curves]) if curves else np.empty(0)
    data = data[np.isfinite(data) & (data > 0)]
    if data.size == 0:
        low, high = 1e-3, 1.0
    else:
        low, high = float(data.min()), float(data.max())
        if cap is not None and low < cap < high:
            high = cap
    pad = max(math.log10(high / low) * 0.06, 0.15)
    low, high = low / 10**pad, high * 10**pad
    ax.set_ylim(low, high)
    _log_ticks(ax, "y", panel.unit, low, high)
    return low, high


def band(ax: Axes, panel: Panel, f: np.ndarray, y: np.ndarray, u: np.ndarray, floor: float):
    """Fill ``y ± u`` (where both are known); on a log axis a lower edge at or below zero is
    drawn at ``floor`` (the axis' bottom): the value is then consistent with zero."""
    lo, hi = y - u, y + u
    if panel.log:
        lo = np.where(np.isfinite(lo) & (lo > 0), lo, floor)
    known = np.isfinite(y) & np.isfinite(u)
    return ax.fill_between(f, lo, hi, where=known, zorder=2, label="± U (k = 2)", **BAND)


def style_axes(ax: Axes) -> None:
    """The plain look of one panel: light grid, ticks inside, small text."""
    ax.grid(True, which="major", color="0.88", linewidth=0.6)
    ax.grid(True, which="minor", color="0.94", linewidth=0.4)
    ax.set_axisbelow(True)
    ax.tick_params(which="both", direction="in", top=True, right=True, labelsize=FONT_SIZE - 1)
    for spine in ax.spines.values():
        spine.set_linewidth(0.8)


def resonance_line(ax: Axes, frequency: float, style: dict[str, Any] | None = None) -> None:
    """The self-resonance as a vertical line at ``frequency`` (Hz)."""
    ax.axvline(frequency, zorder=4, **(style or RESONANCE))


def resonance_label(ax: Axes, frequency: float, text: str) -> None:
    """``text`` just above the panel's top edge, ending at the self-resonance line, where no
    curve can hide it."""
    ax.text(frequency, 1.01, text, transform=ax.get_xaxis_transform(), va="bottom", ha="right",
            fontsize=FONT_SIZE - 1)  # fmt: skip


def low_frequency_value(y: np.ndarray, share: float = 0.1) -> float | None:
    """The median of the finite positive values among the lowest ``share`` of the points (a
    coil's Ls before it starts to rise toward its self-resonance), or None."""
    head = y[: max(int(y.size * share), 3)]
    head = head[np.isfinite(head) & (head > 0)]
    return float(np.median(head)) if head.size else None
