"""The live view of a bias sweep: Ls against the bias current, growing point by point.

:class:`BiasView` renders a :class:`BiasProgress` as it stands: a braille plot
(:mod:`acquire.textplot`, linear current axis) of Ls against the applied bias with a dotted line
at each drop level (1 − d)·L(0), and a line with the present setpoint, the current read back,
Ls, Rs, Q, the energy the part stores now (½·L·I², :mod:`acquire.bias.energy`) and the points
done. On a terminal :func:`open_bias_view` redraws it with rich's live display; elsewhere (a
pipe, a log file, ``--no-live``) it prints one plain line per point.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from typing import IO

import numpy as np
from rich.console import Console, ConsoleOptions, Group, RenderResult
from rich.live import Live
from rich.markup import escape
from rich.panel import Panel
from rich.text import Text

from acquire.bias.energy import stored_energy
from acquire.bias.sweep_run import BiasPoint
from acquire.display import format_value
from acquire.textplot import draw, y_labels
from acquire.units import format_si

LEVEL_MARK = "┈"


@dataclass
class BiasProgress:
    """What the view shows: the sweep's title line, its drops, and the points so far."""

    title: str
    drops: tuple[float, ...]
    total: int
    stop: float
    dut: str = ""
    points: list[BiasPoint] = field(default_factory=list)

    def add(self, point: BiasPoint) -> None:
        self.points.append(point)


def point_line(point: BiasPoint) -> str:
    """``point 5/25  set 1.00 A  applied 1.000 A  Ls 45.2 µH  Rs 31 mΩ  Q 94  stores 22.6 µJ``."""
    energy = float(stored_energy(point.ls, point.applied))
    return (
        f"point {point.i + 1}/{point.total}  set {point.setpoint:.3g} A  "
        f"applied {point.applied:.4g} A  Ls {format_value('Ls', point.ls)}  "
        f"Rs {format_value('Rs', point.rs)}  Q {format_value('Q', point.q)}  "
        f"stores {format_si(energy, 'J')}"
    )


def render(progress: BiasProgress, width: int, height: int) -> Group:
    """The view for a terminal ``width`` x ``height`` cells."""
    parts: list = [Text(progress.title, no_wrap=True, overflow="ellipsis")]
    pts = progress.points
    if pts:
        current = np.array([p.applied for p in pts])
        ls = np.array([p.ls for p in pts])
        levels = [(1 - d) * ls[0] for d in progress.drops]
        parts.append(_plot(current, ls, levels, progress.stop, width - 4, max(height - 8, 4)))
        parts.append(Text(point_line(pts[-1]), no_wrap=True, overflow="ellipsis"))
    else:
        parts.append(Text("measuring the zero-bias point…"))
    title = "bias sweep" + (f": {escape(progress.dut)}" if progress.dut else "")
    return Group(Panel(Group(*parts), title=title, border_style="cyan"))


def _plot(
    current: np.ndarray, ls: np.ndarray, levels: list[float], stop: float, width: int, height: int
) -> Text:
    low = min([*levels, float(np.nanmin(ls))]) * 0.95
    high = float(np.nanmax(ls)) * 1.02
    labels = y_labels(
        draw(current, ls, 2, height, (0.0, stop), (low, high), False, x_log=False), "H"
    )
    plot_width = max(width - len(labels[0]) - 2, 10)
    plot = draw(current, ls, plot_width, height, (0.0, stop), (low, high), False, x_log=False)
    rows = [list(r) for r in plot.rows]
    for level in levels:
        dot = (high - level) / (high - low) * (4 * height - 1)
        at = int(round(dot)) // 4
        if 0 <= at < height:
            rows[at] = [LEVEL_MARK if c == " " else c for c in rows[at]]
    text = Text(no_wrap=True)
    for label, cells in zip(labels, rows, strict=True):
        text.append(f"{label} │", style="dim")
        text.append("".join(cells), style="cyan")
        text.append("\n")
    axis = f"0 A{'':{max(plot_width - 8, 1)}}{stop:.3g} A"
    text.append(" " * (len(labels[0]) + 2) + axis, style="dim")
    return text


class BiasView:
    """A rich renderable drawing ``progress`` afresh each time it is rendered."""

    def __init__(self, progress: BiasProgress) -> None:
        self.progress = progress

    def __rich_console__(self, console: Console, options: ConsoleOptions) -> RenderResult:
        yield render(self.progress, options.max_width, options.height or console.height)


class LiveBiasView:
    """Redraw on rich's refresh thread; :meth:`add` only records the point."""

    def __init__(self, progress: BiasProgress, console: Console) -> None:
        self.progress = progress
        self._live = Live(BiasView(progress), console=console, refresh_per_second=4,
                          redirect_stdout=False, redirect_stderr=False)  # fmt: skip

    def __enter__(self) -> LiveBiasView:
        self._live.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._live.stop()

    def add(self, point: BiasPoint) -> None:
        self.progress.add(point)


class PlainBiasProgress:
    """One plain line per point, for pipes and scripts."""

    def __init__(self, progress: BiasProgress, out: IO[str] | None = None) -> None:
        self.progress = progress
        self.out = out or sys.stdout

    def __enter__(self) -> PlainBiasProgress:
        self.out.write(self.progress.title + "\n")
        self.out.flush()
        return self

    def __exit__(self, *exc: object) -> None:
        pass

    def add(self, point: BiasPoint) -> None:
        self.progress.add(point)
        self.out.write(point_line(point) + "\n")
        self.out.flush()


def open_bias_view(
    progress: BiasProgress, live: bool = True, console: Console | None = None
) -> LiveBiasView | PlainBiasProgress:
    """A live view when ``live`` and the console is a terminal, else plain progress lines."""
    console = console or Console()
    if live and console.is_terminal:
        return LiveBiasView(progress, console)
    return PlainBiasProgress(progress, console.file)
