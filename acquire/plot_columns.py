"""What each dot column of a live plot shows, and where the self-resonance is, kept up to date
as a sweep's points arrive.

A plot against log frequency ``dots`` dots wide puts every point into one dot column. Points
joined in order by straight lines mark, inside a column, every dot from the column's lowest to
its highest value, plus the lines to the neighbouring columns. So the first, the lowest, the
highest and the last point of each column, joined in order, draw the same dots as all the
points: a frame costs the plot's width, not the sweep's length, and a peak one point wide (a
self-resonance) still shows. :class:`ColumnPicks` takes the points in as they arrive, and
:class:`ResonanceWatch` finds the same self-resonance as
:func:`acquire.resonance.self_resonance` of all the points, looking at each point once.
"""

from __future__ import annotations

import math

import numpy as np

from acquire.resonance import self_resonance


def dot_positions(x: np.ndarray, x_range: tuple[float, float], dots: int) -> np.ndarray:
    """Horizontal dot position (not rounded) of each frequency ``x`` on a log axis over
    ``x_range`` that is ``dots`` dots wide (the mapping :func:`acquire.textplot.draw` uses)."""
    lx0, lx1 = math.log10(x_range[0]), math.log10(x_range[1])
    if lx1 <= lx0:
        lx1 = lx0 + 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return (np.log10(np.asarray(x, dtype=float)) - lx0) / (lx1 - lx0) * (dots - 1)


class ColumnPicks:
    """Per dot column: the index of the first, last, lowest and highest finite value in it.

    Points come in order through :meth:`take`; their indices count from 0. Frequencies left
    and right of ``x_range`` go into one extra column each side.
    """

    def __init__(self, x_range: tuple[float, float], dots: int) -> None:
        self.x_range = x_range
        self.dots = dots
        self.taken = 0
        size = dots + 2
        self.first = np.full(size, -1, dtype=np.int64)
        self.last = np.full(size, -1, dtype=np.int64)
        self.low = np.full(size, -1, dtype=np.int64)
        self.high = np.full(size, -1, dtype=np.int64)
        self.low_value = np.full(size, np.inf)
        self.high_value = np.full(size, -np.inf)
        self.finite = np.zeros(size, dtype=np.int64)

    def take(self, x: np.ndarray, y: np.ndarray) -> None:
        """Take in the next points: frequencies ``x`` (Hz) and the plotted values ``y``
        (non-finite values are gaps)."""
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        start, self.taken = self.taken, self.taken + x.size
        px = dot_positions(x, self.x_range, self.dots)
        ok = np.isfinite(y) & np.isfinite(px)
        if not ok.any():
            return
        idx = np.flatnonzero(ok) + start
        col = np.clip(np.rint(px[ok]), -1, self.dots).astype(np.int64) + 1
        v = y[ok]
        order = np.lexsort((idx, col))
        cols, starts, counts = _runs(col[order])
        ends = starts + counts - 1
        self.first[cols] = np.where(self.first[cols] < 0, idx[order][starts], self.first[cols])
        self.last[cols] = idx[order][ends]
        self.finite[cols] += counts
        low = np.lexsort((idx, v, col))[starts]
        better = v[low] < self.low_value[cols]
        self.low[cols[better]] = idx[low][better]
        self.low_value[cols[better]] = v[low][better]
        high = np.lexsort((idx, -v, col))[starts]
        better = v[high] > self.high_value[cols]
        self.high[cols[better]] = idx[high][better]
        self.high_value[cols[better]] = v[high][better]

    def picks(self) -> tuple[np.ndarray, np.ndarray]:
        """The indices to draw, in order, and for each but the last whether it is joined to the
        next: within a column when the column's points follow one another without a gap,
        across columns when the two points are neighbours in the sweep."""
        used = np.flatnonzero(self.first >= 0)
        if used.size == 0:
            return np.empty(0, dtype=np.int64), np.empty(0, dtype=bool)
        four = np.stack([self.first[used], self.low[used], self.high[used], self.last[used]])
        idx, where = np.unique(four.T.reshape(-1), return_index=True)
        column = used[where // 4]
        links = (column[1:] == column[:-1]) | (np.diff(idx) == 1)
        return idx, links

    def extremes(self) -> tuple[float, float] | None:
        """The lowest and highest finite value taken in, or None before there is one."""
        if not np.isfinite(self.low_value).any():
            return None
        return float(self.low_value.min()), float(self.high_value.max())


def _runs(sorted_values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The distinct values of a sorted array, where each run starts and how long it is."""
    starts = np.flatnonzero(np.r_[True, sorted_values[1:] != sorted_values[:-1]])
    counts = np.diff(np.r_[starts, sorted_values.size])
    return sorted_values[starts], starts, counts


class ResonanceWatch:
    """The self-resonance of the points so far, as :func:`acquire.resonance.self_resonance`
    finds it over all of them: the X turn (from above 0 to 0 or below, between finite
    neighbours) with the largest |Z|, if that |Z| is at least a tenth of the largest finite |Z|."""

    def __init__(self) -> None:
        self.taken = 0
        self.largest = -np.inf
        self.best = -1
        self.best_size = -np.inf

    def take(self, z: np.ndarray, count: int) -> None:
        """Look at the points of ``z`` (all so far, in order) from the last seen to ``count``."""
        if count <= self.taken:
            return
        new = z[self.taken : count]
        finite = new[np.isfinite(new)]
        if finite.size:
            self.largest = max(self.largest, float(np.max(np.abs(finite))))
        lo = max(self.taken - 1, 0)
        part = z[lo:count]
        self.taken = count
        if part.size < 2:
            return
        a, b = part[:-1], part[1:]
        turn = np.isfinite(a) & np.isfinite(b) & (a.imag > 0) & (b.imag <= 0)
        if not turn.any():
            return
        at = np.flatnonzero(turn)
        size = np.maximum(np.abs(a[at]), np.abs(b[at]))
        k = int(np.argmax(size))
        if size[k] > self.best_size:
            self.best, self.best_size = lo + int(at[k]), float(size[k])

    def frequency(self, f: np.ndarray, z: np.ndarray) -> float | None:
        """The self-resonance frequency (Hz) of the points seen, or None."""
        if self.best < 0 or self.best_size < 0.1 * self.largest:
            return None
        i = self.best
        return self_resonance(f[i : i + 2], z[i : i + 2])
