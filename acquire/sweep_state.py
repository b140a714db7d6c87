"""The state of a sweep in progress: what the live view and the plain progress lines show.

One :class:`SweepState` is filled by the sweep runner as points arrive (on the acquiring thread)
and read by a renderer (possibly on a timer thread). Appending only writes into preallocated
arrays and then moves ``count`` forward, so a reader that takes ``count`` first always sees whole
points; nothing is computed per point beyond counting overrange and invalid readings. What the
live view draws (per plot column, :mod:`acquire.plot_columns`) is brought up to date on the
reader's thread, from the points that arrived since its last frame.
"""

from __future__ import annotations

import math
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

import numpy as np

from acquire.impedance import quantities
from acquire.plan import FrequencyPlan
from acquire.plot_columns import ColumnPicks, ResonanceWatch
from acquire.uncertainty import BEYOND_ACCURACY
from acquire.units import format_si

STATUSES = ("waiting", "running", "complete", "interrupted")
#: Points converted to plotted quantities at a time when the live view catches up.
CATCH_UP = 8192
#: At most this many points (evenly spread over the plan) set a linear plot's value range.
RANGE_SAMPLE = 4096


@dataclass(eq=False)
class SweepState:
    """Everything shown about one sweep. Arrays are preallocated to the plan's length.

    ``corrected`` is None when the sweep runs without a reference set. ``meter`` is the meter's
    identity line, ``reference`` a one-line description of the reference set in use and
    ``reference_captured_at`` its capture time (timezone-aware), ``destination`` where the points
    are stored. ``quantities`` names the quantities plotted (keys of
    :func:`acquire.impedance.quantities`). ``reference_override`` is the operator's reason for
    using a reference set that fails its check ('' when it passes); ``open_fixture`` says why
    the readings look like an empty fixture ('' when they do not). ``show_uncertainty`` asks
    the view to print ± U beside values; ``uncertainty_note`` says what the uncertainty counts.
    """

    plan: FrequencyPlan
    dut: str = ""
    meter: str = ""
    reference: str = ""
    reference_captured_at: datetime | None = None
    reference_override: str = ""
    destination: str = ""
    quantities: tuple[str, ...] = ("Ls", "Rs", "Q")
    corrected_too: bool = False
    clock: Callable[[], float] = time.monotonic
    status: str = "waiting"
    reason: str = ""
    count: int = 0
    overrange: int = 0
    invalid: int = 0
    first_overrange: float | None = None
    started: float | None = None
    ended: float | None = None
    warnings: list[str] = field(default_factory=list)
    open_fixture: str = ""
    show_uncertainty: bool = False
    uncertainty_note: str = ""
    flagged: int = 0
    first_flagged: float | None = None
    frequency: np.ndarray = field(init=False, repr=False)
    raw: np.ndarray = field(init=False, repr=False)
    corrected: np.ndarray | None = field(init=False, repr=False)
    cov: np.ndarray = field(init=False, repr=False)
    flags: np.ndarray = field(init=False, repr=False)
    beyond: dict[str, np.ndarray] = field(init=False, repr=False)
    _columns: dict[tuple, ColumnPicks] = field(init=False, repr=False)
    _resonance: ResonanceWatch = field(init=False, repr=False)
    _reading: threading.Lock = field(init=False, repr=False)

    def __post_init__(self) -> None:
        n = len(self.plan)
        self.frequency = np.full(n, np.nan)
        self.raw = np.full(n, complex(np.nan, np.nan))
        self.corrected = np.full(n, complex(np.nan, np.nan)) if self.corrected_too else None
        self.cov = np.full((n, 2, 2), np.nan)
        self.flags = np.full(n, "", dtype=object)
        self.beyond = {}
        self._columns = {}
        self._resonance = ResonanceWatch()
        self._reading = threading.Lock()

    @property
    def planned(self) -> int:
        return len(self.plan)

    def start(self) -> None:
        """Mark the sweep as running from now."""
        self.started = self.clock()
        self.status = "running"

    def add(
        self,
        f: np.ndarray,
        raw: np.ndarray,
        corrected: np.ndarray | None = None,
        values: Any = None,
    ) -> None:
        """Append a chunk of points (frequency in Hz, raw and corrected complex Z in ohm).

        ``values`` is the chunk's :class:`acquire.sweep_uncertainty.PointValues` (None when
        its uncertainty was not evaluated: it stays unknown and nothing is flagged).
        """
        i, k = self.count, len(f)
        if i + k > self.planned:
            raise ValueError(f"{i + k} points received for a plan of {self.planned}")
        self.frequency[i : i + k] = f
        self.raw[i : i + k] = raw
        if self.corrected is not None and corrected is not None:
            self.corrected[i : i + k] = corrected
        if values is not None:
            self._add_values(i, k, np.asarray(f), values)
        over = np.isinf(raw.real) | np.isinf(raw.imag)
        if over.any():
            if self.first_overrange is None:
                self.first_overrange = float(np.asarray(f)[over][0])
            self.overrange += int(over.sum())
        self.invalid += int((np.isnan(raw.real) | np.isnan(raw.imag)).sum())
        self.count = i + k

    def _add_values(self, i: int, k: int, f: np.ndarray, values: Any) -> None:
        self.cov[i : i + k] = values.cov
        self.flags[i : i + k] = values.flags
        for name, bad in values.beyond.items():
            if name not in self.beyond:
                self.beyond[name] = np.zeros(self.planned, dtype=bool)
            self.beyond[name][i : i + k] = bad
        flagged = np.asarray(values.flags == BEYOND_ACCURACY, dtype=bool)
        if flagged.any():
            if self.first_flagged is None:
                self.first_flagged = float(f[flagged][0])
            self.flagged += int(flagged.sum())

    def hidden(self, name: str, n: int | None = None) -> np.ndarray:
        """Per point of the first ``n`` (default: all so far), True where ``name``'s value is
        beyond accuracy on a flagged point (shown as a marker, never as a number)."""
        n = self.count if n is None else n
        bad = self.beyond.get(name)
        if bad is None:
            return np.zeros(n, dtype=bool)
        return bad[:n] & (self.flags[:n] == BEYOND_ACCURACY)

    def hidden_at(self, name: str, index: np.ndarray | slice) -> np.ndarray:
        """:meth:`hidden` of only the points ``index`` (indices or a slice of those so far)."""
        bad = self.beyond.get(name)
        if bad is None:
            size = (
                len(range(*index.indices(self.planned)))
                if isinstance(index, slice)
                else np.asarray(index).size
            )
            return np.zeros(size, dtype=bool)
        return bad[index] & (self.flags[index] == BEYOND_ACCURACY)

    def plot_columns(
        self,
        names: tuple[str, ...],
        dots: int,
        x_range: tuple[float, float],
        upto: int | None = None,
    ) -> dict[str, ColumnPicks]:
        """Per quantity of ``names``, the points each dot column of a plot ``dots`` wide over
        ``x_range`` draws (hidden values are gaps), brought up to date with the points so far.

        Only the points that arrived since the last call are converted, :data:`CATCH_UP` at a
        time; a new width or range starts over once. ``upto`` stops at that many points (a
        count the caller read before). Call it from one reader (the live view).
        """
        n = self.count if upto is None else min(upto, self.count)
        with self._reading:
            keys = {name: (name, dots, x_range) for name in names}
            self._columns = {
                key: self._columns.get(key) or ColumnPicks(x_range, dots) for key in keys.values()
            }
            picks = {name: self._columns[key] for name, key in keys.items()}
            shown = self.raw if self.corrected is None else self.corrected
            while True:
                behind = [p.taken for p in picks.values() if p.taken < n]
                if not behind:
                    return picks
                a = min(behind)
                b = min(n, a + CATCH_UP)
                f = self.frequency[a:b]
                q = quantities(f, shown[a:b])
                for name, p in picks.items():
                    if p.taken == a:
                        p.take(f, np.where(self.hidden_at(name, slice(a, b)), np.nan, q[name]))

    def resonance(self, upto: int | None = None) -> float | None:
        """The self-resonance of the points so far (or of the first ``upto``), as
        :func:`acquire.resonance.self_resonance` finds it (see :class:`ResonanceWatch`)."""
        n = self.count if upto is None else min(upto, self.count)
        f = self.frequency[:n]
        z = (self.raw if self.corrected is None else self.corrected)[:n]
        with self._reading:
            if n < self._resonance.taken:
                self._resonance = ResonanceWatch()
            self._resonance.take(z, n)
            return self._resonance.frequency(f, z)

    def range_sample(self) -> np.ndarray:
        """Indices of at most :data:`RANGE_SAMPLE` of the points so far, evenly spread over the
        plan (every point of a plan no longer than that)."""
        step = max(math.ceil(self.planned / RANGE_SAMPLE), 1)
        return np.arange(0, self.count, step)

    def finish(self, status: str, reason: str = "") -> None:
        """Mark the sweep as ``complete`` or ``interrupted`` (with the reason shown)."""
        if status not in STATUSES:
            raise ValueError(f"unknown status {status!r}")
        self.status, self.reason = status, reason
        self.ended = self.clock()

    def warn(self, text: str) -> None:
        """Add a warning line once (repeats are ignored)."""
        if text not in self.warnings:
            self.warnings.append(text)

    def points(self) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
        """The points so far: frequency, raw Z, corrected Z (or None); views, not copies."""
        n = self.count
        corrected = None if self.corrected is None else self.corrected[:n]
        return self.frequency[:n], self.raw[:n], corrected

    def shown(self) -> np.ndarray:
        """The impedance the view shows: corrected when there is a reference set, else raw."""
        f, raw, corrected = self.points()
        return raw if corrected is None else corrected

    def elapsed(self) -> float:
        if self.started is None:
            return 0.0
        return (self.ended if self.ended is not None else self.clock()) - self.started

    def remaining(self) -> float | None:
        """Seconds left at the rate so far; None before there is a rate to go by."""
        if self.status != "running" or self.count == 0:
            return None
        return self.elapsed() / self.count * (self.planned - self.count)

    def all_warnings(self) -> list[str]:
        """The warnings, with overrange and invalid points summarised in one line each."""
        lines = ([self.open_fixture] if self.open_fixture else []) + list(self.warnings)
        if self.overrange:
            where = format_si(self.first_overrange or float("nan"), "Hz")
            lines.append(f"{self.overrange} point(s) overrange, the first at {where}")
        if self.invalid:
            lines.append(f"{self.invalid} point(s) invalid (the meter gave no reading)")
        if self.flagged:
            where = format_si(self.first_flagged or float("nan"), "Hz")
            lines.append(
                f"{self.flagged} point(s) beyond the tool's accuracy, the first at {where}: "
                "their flagged values are not shown as numbers"
            )
        return lines
