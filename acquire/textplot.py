"""A small character-cell plot against log frequency, drawn with Unicode braille dots.

Each character cell holds 2 x 4 dots, so a plot ``width`` cells wide and ``height`` cells tall
has ``2 * width`` by ``4 * height`` dots. Points are joined by straight lines in dot space;
non-finite values leave a gap. The drawing is vectorised with numpy; the live view hands it only
the few points per dot column that draw the same picture as all of them
(:mod:`acquire.plot_columns`), so a frame costs the same at any length of sweep.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from acquire.units import format_si

#: Dot bit of the braille cell for (row 0..3, column 0..1), as in the Unicode braille block.
_BITS = np.array([[0x01, 0x08], [0x02, 0x10], [0x04, 0x20], [0x40, 0x80]], dtype=np.uint8)
_GLYPHS = np.array([" "] + [chr(0x2800 + i) for i in range(1, 256)])
MARKER = "┊"


@dataclass(frozen=True)
class Plot:
    """A drawn plot: ``rows`` of ``width`` characters, and the ranges the axes were given."""

    rows: list[str]
    x_range: tuple[float, float]
    y_range: tuple[float, float]
    y_log: bool
    marker_columns: tuple[int, ...]


def y_limits(y: np.ndarray, log: bool, lowest: float | None = None) -> tuple[float, float] | None:
    """Axis limits that keep the bulk of ``y`` readable: a spike (a resonance) is clipped.

    Linear axes span the 5th to 95th percentile of the finite values, padded by 5 % (down to 0
    when all values are positive); log axes span the full positive range. ``None`` when there is
    nothing finite to show. When ``y`` is a sample of the values, ``lowest`` is the lowest of
    them all.
    """
    v = y[np.isfinite(y)]
    if log:
        v = v[v > 0]
    if v.size == 0:
        return None
    if log:
        lo, hi = float(v.min()), float(v.max())
        if hi <= lo * 1.0001:
            lo, hi = lo / 1.1, hi * 1.1
        return lo, hi
    lo, hi = (float(q) for q in np.percentile(v, [5, 95]))
    if hi - lo <= 1e-12 * max(abs(lo), abs(hi), 1e-300):
        pad = abs(lo) * 0.01 or 1.0
        return lo - pad, hi + pad
    pad = 0.05 * (hi - lo)
    least = float(v.min()) if lowest is None else lowest
    low = lo - pad if lo - pad >= 0 or least < 0 else 0.0
    return low, hi + pad


def wants_log(y: np.ndarray) -> bool:
    """A log axis suits values that are all positive and span more than a decade."""
    v = y[np.isfinite(y)]
    return bool(v.size) and bool(np.all(v > 0)) and float(v.max()) > 10 * float(v.min())


def draw(
    x: np.ndarray,
    y: np.ndarray,
    width: int,
    height: int,
    x_range: tuple[float, float],
    y_range: tuple[float, float] | None = None,
    y_log: bool | None = None,
    markers: tuple[float, ...] = (),
    links: np.ndarray | None = None,
    x_log: bool = True,
) -> Plot:
    """Draw ``y`` against ``x`` (log x axis over ``x_range``, linear with ``x_log=False``) into
    ``width`` x ``height`` cells.

    ``markers`` are x values marked with a dotted vertical line (for example a self-resonance).
    Values beyond the y range are drawn on its edge. ``links`` says for each point but the last
    whether a line joins it to the next (default: every two neighbours with finite values).
    """
    width, height = max(int(width), 2), max(int(height), 1)
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if y_log is None:
        y_log = wants_log(y)
    if y_range is None:
        y_range = y_limits(y, y_log) or (0.0, 1.0)
    grid = np.zeros((height, width), dtype=np.uint8)
    xs = math.log10 if x_log else float
    lx0, lx1 = xs(x_range[0]), xs(x_range[1])
    if lx1 <= lx0:
        lx1 = lx0 + 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        lx = np.log10(x) if x_log else x.copy()
        ly = np.log10(y) if y_log else y.copy()
    y0, y1 = (math.log10(v) for v in y_range) if y_log else y_range
    ok = np.isfinite(lx) & np.isfinite(ly)
    px = (lx - lx0) / (lx1 - lx0) * (2 * width - 1)
    py = (y1 - np.clip(ly, y0, y1)) / ((y1 - y0) or 1.0) * (4 * height - 1)
    px, py = _join(px, py, ok, links)
    ix = np.rint(px).astype(np.int64)
    iy = np.rint(py).astype(np.int64)
    keep = (ix >= 0) & (ix < 2 * width) & (iy >= 0) & (iy < 4 * height)
    ix, iy = ix[keep], iy[keep]
    np.bitwise_or.at(grid, (iy // 4, ix // 2), _BITS[iy % 4, ix % 2])
    rows = _GLYPHS[grid]
    columns = []
    for m in markers:
        if m and (m > 0 or not x_log) and math.isfinite(m):
            col = int(round((xs(m) - lx0) / (lx1 - lx0) * (2 * width - 1))) // 2
            if 0 <= col < width:
                column = rows[:, col]
                column[grid[:, col] == 0] = MARKER
                columns.append(col)
    # Each row's cells side by side in memory read as one string of ``width`` characters (no
    # cell is NUL, the only character such a string drops at its end).
    lines = rows.view(f"<U{width}").ravel().tolist()
    return Plot(lines, x_range, (y_range[0], y_range[1]), y_log, tuple(columns))


def _join(
    px: np.ndarray, py: np.ndarray, ok: np.ndarray, links: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Dots along straight segments between consecutive finite points (or those ``links``
    joins), and at every finite point."""
    idx = np.flatnonzero(ok)
    if idx.size == 0:
        return np.empty(0), np.empty(0)
    if links is None:
        pair = idx[:-1][np.diff(idx) == 1]
    else:
        pair = np.flatnonzero(np.asarray(links, dtype=bool) & ok[:-1] & ok[1:])
    if pair.size == 0:
        return px[idx], py[idx]
    dx = px[pair + 1] - px[pair]
    dy = py[pair + 1] - py[pair]
    n = np.maximum(np.ceil(np.maximum(np.abs(dx), np.abs(dy))), 1).astype(np.int64)
    n = np.minimum(n, 4096)
    seg = np.repeat(np.arange(pair.size), n)
    t = (np.arange(seg.size) - np.repeat(np.cumsum(n) - n, n)) / n[seg]
    sx = px[pair][seg] + t * dx[seg]
    sy = py[pair][seg] + t * dy[seg]
    return np.concatenate([sx, px[idx]]), np.concatenate([sy, py[idx]])


def x_axis(x_range: tuple[float, float], width: int, unit: str = "Hz") -> str:
    """A label line under a plot: decade ticks placed where they fall, never overlapping."""
    lx0, lx1 = math.log10(x_range[0]), math.log10(x_range[1])
    line = [" "] * width
    if lx1 <= lx0:
        return "".join(line)
    ticks = []
    for decade in range(math.ceil(lx0 - 1e-9), math.floor(lx1 + 1e-9) + 1):
        col = int(round((decade - lx0) / (lx1 - lx0) * (2 * width - 1))) // 2
        label = "┴" + format_si(10.0**decade, unit, 1).replace(" ", "")
        ticks.append((min(col, width - len(label)), label))
    last = ticks.pop() if ticks else None
    limit = last[0] - 1 if last else width
    end = -1
    for start, label in ticks:
        if start > end and start >= 0 and start + len(label) < limit:
            line[start : start + len(label)] = label
            end = start + len(label)
    if last is not None and last[0] >= 0:
        line[last[0] : last[0] + len(last[1])] = last[1]
    return "".join(line)


def y_labels(plot: Plot, unit: str, digits: int = 3) -> list[str]:
    """Labels for the top, middle and bottom rows of ``plot`` (others blank), right-aligned.

    ``digits`` significant digits, or up to three more where fewer would print the same label
    twice (a narrow range).
    """
    lo, hi = plot.y_range
    n = len(plot.rows)
    share = (4 * (n // 2) + 1.5) / max(4 * n - 1, 1)
    if plot.y_log:
        mid = 10 ** (math.log10(hi) - share * (math.log10(hi) - math.log10(lo)))
    else:
        mid = hi - share * (hi - lo)
    for d in range(digits, digits + 4):
        labels = [""] * n
        labels[0] = format_si(hi, unit, d)
        labels[-1] = format_si(lo, unit, d)
        if n >= 5:
            labels[n // 2] = format_si(mid, unit, d)
        shown = [s for s in labels if s]
        if len(set(shown)) == len(shown):
            break
    size = max(len(s) for s in labels)
    return [s.rjust(size) for s in labels]
