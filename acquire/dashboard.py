"""The live terminal view of a sweep, and its plain-text and end-of-sweep counterparts.

:class:`DashboardView` renders a :class:`acquire.sweep_state.SweepState` as it stands: the chosen
quantities plotted against log frequency, the latest point, progress and time left, the meter,
the reference set and its age, warnings, and a marker at a self-resonance (where the reactance
turns from inductive to capacitive). It is a pure function of the state; :class:`LiveDashboard`
redraws it on a timer thread at a bounded rate, so acquisition never waits for the screen.
Without a terminal, :class:`PlainProgress` prints a progress line at most every few seconds.
At the end, :func:`summary` shows selected points raw and corrected.

A value the sweep flagged beyond the tool's accuracy is never printed as a number: the latest
point, the summary table and the progress lines say "beyond accuracy" instead, the plots leave
it out, and a warning line says how many points were flagged and from which frequency. With
``state.show_uncertainty`` the values carry their expanded uncertainty (k = 2): ``± U``.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
from rich.console import Console, ConsoleOptions, RenderResult
from rich.live import Live
from rich.progress_bar import ProgressBar
from rich.segment import Segment
from rich.table import Table
from rich.text import Text

from acquire.dashboard_side import latest_rows, side_column, side_lines
from acquire.display import UNITS, format_duration
from acquire.impedance import quantities
from acquire.sweep_state import SweepState
from acquire.sweep_text import PlainProgress, override_line
from acquire.textplot import draw, x_axis, y_labels, y_limits

__all__ = ["DashboardView", "LiveDashboard", "PlainProgress", "open_view", "reference_age"]

COLOURS = ("cyan", "magenta", "green", "yellow", "blue", "red")
SIDE_WIDTH = 34


def reference_age(state: SweepState, now: datetime | None = None) -> float | None:
    """Seconds since the reference set was captured, or None without one."""
    if state.reference_captured_at is None:
        return None
    now = now or datetime.now(UTC)
    return (now - state.reference_captured_at).total_seconds()


class DashboardView:
    """A rich renderable drawing ``state`` afresh each time it is rendered."""

    def __init__(self, state: SweepState, now: datetime | None = None) -> None:
        self.state = state
        self.now = now

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        width = options.max_width
        height = options.height or console.height
        # each part laid out once; the plots and the side column are put side by side line by
        # line (as a two-column grid would place them, without measuring one each frame)
        state, now = self.state, self.now
        f, raw, corrected = state.points()
        z = raw if corrected is None else corrected
        q = quantities(f[-1:], z[-1:]) if f.size else None
        srf = state.resonance(f.size) if f.size else None
        side = width >= 80
        plot_width = width - (SIDE_WIDTH + 1 if side else 0)
        rows = latest_rows(state, f, z, q)
        opts = options.update(width=width, height=None)
        parts: list = [_header(state, now), _progress(state, width)]
        warnings = state.all_warnings()
        if warnings:
            parts.append(Text("\n".join(f"warning: {w}" for w in warnings), style="yellow"))
        lines = [line for part in parts for line in console.render_lines(part, opts, pad=False)]
        room = height - len(lines)
        if side:
            right = side_lines(console, opts.update_width(SIDE_WIDTH), rows, srf)
        else:
            right = console.render_lines(side_column(rows, srf), opts, pad=False)
            room -= len(right)
        plots = _plots(state, f, z, srf, plot_width, room)
        left = plots.rendered(console, plot_width, pad=side)
        if side:
            blank = [Segment(" " * SIDE_WIDTH)]
            left += [[Segment(" " * plot_width)]] * (len(right) - len(left))
            right += [blank] * (len(left) - len(right))
            gap = Segment(" ")
            lines += [[*a, gap, *b] for a, b in zip(left, right, strict=True)]
        else:
            lines += left + right
        newline = Segment.line()
        for line in lines:
            yield from line
            yield newline


def _header(state: SweepState, now: datetime | None) -> Text:
    title = f"Sweep of {state.dut}" if state.dut else "Sweep"
    text = Text(f"{title} · {state.plan.describe()}", style="bold")
    text.append(f"\nmeter: {state.meter or 'unknown'}")
    if state.reference:
        age = reference_age(state, now)
        when = f", captured {format_duration(age)} ago" if age is not None else ""
        text.append(f"\nreference set: {state.reference}{when}")
        if state.reference_override:
            text.append(f"\n{override_line(state)}", style="bold red")
    else:
        text.append("\nreference set: none (raw readings, fixture not removed)", style="yellow")
    if state.destination:
        text.append(f"\npoints go to: {state.destination}")
    if state.show_uncertainty and state.uncertainty_note:
        text.append(f"\n{state.uncertainty_note}", style="dim")
    return text


def _progress(state: SweepState, width: int) -> Table:
    done = state.count
    share = 100.0 * done / max(state.planned, 1)
    words = {"waiting": "waiting", "running": "measuring"}.get(state.status, state.status)
    line = f"{words} {done}/{state.planned} · {share:.0f} % · {format_duration(state.elapsed())}"
    left = state.remaining()
    if state.status == "running":
        line += " elapsed · " + (
            "estimating" if left is None else f"about {format_duration(left)} left"
        )
    elif state.reason:
        line += f" · {state.reason}"
    grid = Table.grid(padding=(0, 1))
    # the bar gives way to the words, so that they stay on one line
    grid.add_column(width=max(min(width // 3, 40, width - len(line) - 1), 10))
    grid.add_column()
    grid.add_row(ProgressBar(total=max(state.planned, 1), completed=done), Text(line))
    return grid


def _plots(
    state: SweepState,
    f: np.ndarray,
    z: np.ndarray,
    srf: float | None,
    width: int,
    height: int,
) -> Lines:
    names = state.quantities
    # ``height`` is what is left below the header: each plot has a title and an axis line
    rows_each = max(min(height // max(len(names), 1) - 2, 12), 2)
    x_range = (
        state.plan.start,
        state.plan.stop if state.plan.stop > state.plan.start else state.plan.start * 10,
    )
    which = "corrected" if state.corrected is not None else "raw"
    label_width = 9
    cells = width - label_width - 1
    picks = state.plot_columns(names, 2 * max(cells, 2), x_range, f.size)
    sample = state.range_sample()[: f.size] if f.size else np.empty(0, dtype=np.int64)
    q_sample = quantities(f[sample], z[sample]) if sample.size else None
    parts: list[list[tuple[str, str]]] = []
    for k, name in enumerate(names):
        colour = COLOURS[k % len(COLOURS)]
        unit = UNITS.get(name, "")
        idx, links = picks[name].picks()
        y = quantities(f[idx], z[idx])[name] if idx.size else np.empty(0)
        y_log, y_range = _y_axis(state, name, picks[name].extremes(), sample, q_sample)
        plot = draw(
            f[idx], y, cells, rows_each, x_range, y_range, y_log,
            markers=(srf,) if srf else (), links=links,
        )  # fmt: skip
        labels = y_labels(plot, unit)
        title = [(f"{name} ({which})", f"bold {colour}")]
        if plot.y_log:
            title.append(("  log scale", "dim"))
        lines = [title]
        for lab, row in zip(labels, plot.rows, strict=True):
            lines.append([(lab.rjust(label_width)[-label_width:] + "│", "dim"), (row, colour)])
        lines.append([(" " * (label_width + 1) + x_axis(x_range, cells), "dim")])
        parts.extend(lines)
    return Lines(parts)


class Lines:
    """Lines of styled pieces drawn as given, cropped to the width (never wrapped): the plots'
    rows are laid out already, so rich need not divide them into words."""

    def __init__(self, lines: list[list[tuple[str, str]]]) -> None:
        self.lines = lines

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        for line in self.rendered(console, options.max_width, pad=False):
            yield from line
            yield Segment.line()

    def rendered(self, console: Console, width: int, pad: bool = True) -> list[list[Segment]]:
        """Each line as segments, cropped (and with ``pad``, padded) to ``width`` cells."""
        style = console.get_style
        return [
            Segment.adjust_line_length([Segment(t, style(s)) for t, s in line], width, pad=pad)
            for line in self.lines
        ]


def _y_axis(
    state: SweepState,
    name: str,
    extremes: tuple[float, float] | None,
    sample: np.ndarray,
    q_sample: dict[str, np.ndarray] | None,
) -> tuple[bool, tuple[float, float]]:
    """Log or linear, and the value range, as :func:`acquire.textplot.draw` would choose them
    from all the points: a log axis from the extremes (exact), a linear one from the
    percentiles of an evenly spread sample (every point of a plan of up to 4,096)."""
    if extremes is None or q_sample is None:
        return False, (0.0, 1.0)
    lowest, highest = extremes
    if lowest > 0 and highest > 10 * lowest:
        return True, y_limits(np.array(extremes), True) or (0.0, 1.0)
    y = np.where(state.hidden_at(name, sample), np.nan, q_sample[name])
    return False, y_limits(y, False, lowest=lowest) or (0.0, 1.0)


class LiveDashboard:
    """Redraw a :class:`DashboardView` on rich's refresh thread, at most ``rate`` times a second.

    The acquiring thread only fills the state; :meth:`update` does nothing and exists so a live
    view and :class:`PlainProgress` can be driven alike.
    """

    def __init__(
        self, state: SweepState, console: Console | None = None, rate: float = 4.0
    ) -> None:
        self.state = state
        self.console = console or Console()
        self._live = Live(
            DashboardView(state),
            console=self.console,
            refresh_per_second=rate,
            auto_refresh=True,
            redirect_stdout=False,
            redirect_stderr=False,
        )

    def __enter__(self) -> LiveDashboard:
        self._live.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._live.stop()

    def update(self) -> None:
        """Nothing to do per chunk: the refresh thread redraws on its own timer."""


def open_view(
    state: SweepState, live: bool = True, console: Console | None = None, rate: float = 4.0
) -> LiveDashboard | PlainProgress:
    """A live view when ``live`` and the console is a terminal, else plain progress lines."""
    console = console or Console()
    if live and console.is_terminal:
        return LiveDashboard(state, console, rate)
    return PlainProgress(state, console.file)
