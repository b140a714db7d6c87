"""Frequency plans: which frequencies a sweep or a reference capture visits, and in what order.

A plan is log-spaced or linear from a start to a stop frequency with a number of points, or an
explicit list typed on the command line or read from a text file. Every plan is strictly
increasing, positive and finite, and is checked against the meter's frequency range with
:func:`check_range` before anything is sent to the meter. Text is parsed with
:mod:`acquire.units`, so ``100Hz``, ``1k`` and ``2.5MHz`` all work.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.errors import InputError
from acquire.units import format_si, parse_list, parse_quantity

#: The most points one plan may hold (a bound on memory and on the store, not on the meter).
MAX_POINTS = 1_000_001

SPACINGS = ("log", "linear", "list")


@dataclass(frozen=True, eq=False)
class FrequencyPlan:
    """An ordered set of test frequencies.

    ``frequencies`` is a read-only 1-D float array in hertz, strictly increasing; ``spacing`` is
    ``"log"``, ``"linear"`` or ``"list"`` and only describes how the plan was made.
    """

    frequencies: np.ndarray
    spacing: str = "list"

    def __post_init__(self) -> None:
        f = np.array(self.frequencies, dtype=float).reshape(-1)
        _validate(f)
        if self.spacing not in SPACINGS:
            raise InputError(f"unknown spacing {self.spacing!r}; use one of {', '.join(SPACINGS)}")
        f.setflags(write=False)
        object.__setattr__(self, "frequencies", f)

    def __len__(self) -> int:
        return int(self.frequencies.size)

    @property
    def start(self) -> float:
        return float(self.frequencies[0])

    @property
    def stop(self) -> float:
        return float(self.frequencies[-1])

    def describe(self) -> str:
        """One line for people: ``201 points, log, 100.0 Hz to 10.00 MHz``."""
        n = len(self)
        if n == 1:
            return f"1 point at {format_si(self.start, 'Hz')}"
        return (
            f"{n} points, {self.spacing}, {format_si(self.start, 'Hz')} to "
            f"{format_si(self.stop, 'Hz')}"
        )

    def chunks(self, size: int) -> Iterable[np.ndarray]:
        """The frequencies in consecutive blocks of at most ``size`` points."""
        if size < 1:
            raise InputError("a block must hold at least one point")
        for i in range(0, len(self), size):
            yield self.frequencies[i : i + size]


def _validate(f: np.ndarray) -> None:
    if f.size == 0:
        raise InputError("a frequency plan needs at least one frequency")
    if f.size > MAX_POINTS:
        raise InputError(f"{f.size} points is more than the {MAX_POINTS} a plan may hold")
    if not np.all(np.isfinite(f)):
        raise InputError("every frequency in a plan must be a finite number")
    if np.any(f <= 0):
        bad = f[f <= 0][0]
        raise InputError(f"frequencies must be above 0 Hz (got {bad:g} Hz)")
    steps = np.diff(f)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0))
        raise InputError(
            f"frequencies must be strictly increasing: {format_si(f[i], 'Hz')} is followed by "
            f"{format_si(f[i + 1], 'Hz')}; list them from lowest to highest without repeats"
        )


def _points(points: int | str) -> int:
    try:
        n = int(points)
    except (TypeError, ValueError):
        raise InputError(f"the number of points must be a whole number (got {points!r})") from None
    if n < 2:
        raise InputError(
            f"a swept plan needs at least 2 points (got {n}); for one frequency use a list"
        )
    return n


def _span(start: float | str, stop: float | str) -> tuple[float, float]:
    a, b = parse_quantity(start, "Hz"), parse_quantity(stop, "Hz")
    if a <= 0:
        raise InputError(f"the start frequency must be above 0 Hz (got {start!r})")
    if b <= a:
        raise InputError(
            f"the stop frequency ({format_si(b, 'Hz')}) must be above the start "
            f"({format_si(a, 'Hz')})"
        )
    return a, b


def log_plan(start: float | str, stop: float | str, points: int | str) -> FrequencyPlan:
    """``points`` frequencies evenly spaced on a log scale, start and stop included."""
    a, b = _span(start, stop)
    f = np.geomspace(a, b, _points(points))
    f[0], f[-1] = a, b
    return FrequencyPlan(f, "log")


def linear_plan(start: float | str, stop: float | str, points: int | str) -> FrequencyPlan:
    """``points`` frequencies evenly spaced on a linear scale, start and stop included."""
    a, b = _span(start, stop)
    return FrequencyPlan(np.linspace(a, b, _points(points)), "linear")


def list_plan(values: str | Sequence[float | str]) -> FrequencyPlan:
    """An explicit plan: ``"1k, 10k, 100kHz"`` or a sequence of numbers or quantity strings."""
    if isinstance(values, str):
        f = parse_list(values, "Hz")
    else:
        f = [parse_quantity(v, "Hz") for v in values]
    return FrequencyPlan(np.asarray(f, dtype=float), "list")


def plan_from_file(path: str | Path) -> FrequencyPlan:
    """Read a plan from a text file: frequencies separated by commas, spaces or new lines.

    Anything after ``#`` on a line is a comment. Values may carry SI prefixes and ``Hz``.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"frequency file {str(p)!r} does not exist") from None
    except UnicodeDecodeError:
        raise InputError(f"frequency file {str(p)!r} is not a text file") from None
    body = " ".join(line.split("#", 1)[0] for line in text.splitlines())
    if not body.strip():
        raise InputError(f"frequency file {str(p)!r} holds no frequencies")
    try:
        return list_plan(body)
    except InputError as exc:
        raise InputError(f"frequency file {str(p)!r}: {exc}") from None


def make_plan(
    start: float | str | None = None,
    stop: float | str | None = None,
    points: int | str | None = None,
    spacing: str = "log",
    values: str | None = None,
    file: str | Path | None = None,
) -> FrequencyPlan:
    """Build a plan from command-line style options: a span, a list, or a file (exactly one)."""
    given = [name for name, v in (("span", start or stop), ("list", values), ("file", file)) if v]
    if len(given) > 1:
        raise InputError("give either --start/--stop, --list or --file, not several")
    if values:
        return list_plan(values)
    if file:
        return plan_from_file(file)
    if start is None or stop is None:
        raise InputError("give --start and --stop (and --points), or --list, or --file")
    n = 201 if points is None else points
    if spacing == "log":
        return log_plan(start, stop, n)
    if spacing == "linear":
        return linear_plan(start, stop, n)
    raise InputError(f"unknown spacing {spacing!r}; use log or linear")


def check_range(
    plan: FrequencyPlan, frequency_range: tuple[float, float], who: str = "the meter"
) -> None:
    """Refuse a plan that reaches outside ``frequency_range`` (fmin, fmax in hertz), naming it."""
    fmin, fmax = frequency_range
    low, high = plan.start, plan.stop
    if low < fmin or high > fmax:
        raise InputError(
            f"the plan spans {format_si(low, 'Hz')} to {format_si(high, 'Hz')} but {who} "
            f"measures only from {format_si(fmin, 'Hz')} to {format_si(fmax, 'Hz')}; "
            "narrow the plan"
        )
