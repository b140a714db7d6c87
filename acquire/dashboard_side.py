"""The live view's side column: the latest point (each quantity plotted, |Z| and θ, with ± U
when the view shows uncertainty) and the self-resonance, if any.

The latest point's panel changes with every point, so :func:`side_lines` draws it segment by
segment as rich draws a panel holding a two-column grid (the same characters and styles), and
leaves anything that would not fit, and the self-resonance panel, to rich.
"""

from __future__ import annotations

import numpy as np
from rich.cells import cell_len
from rich.console import Console, ConsoleOptions, Group
from rich.panel import Panel
from rich.segment import Segment
from rich.style import Style
from rich.table import Table
from rich.text import Text

from acquire.display import format_measured
from acquire.sweep_state import SweepState
from acquire.sweep_text import point_u
from acquire.units import format_si

LATEST = "latest point"


def latest_rows(
    state: SweepState, f: np.ndarray, z: np.ndarray, q: dict[str, np.ndarray] | None
) -> list[tuple[str, str]]:
    """The latest point's rows: what (f, the plotted quantities, |Z|, θ) and its value."""
    if q is None or not f.size:
        return [("", "no points yet")]
    rows = [("f", format_si(float(f[-1]), "Hz"))]
    names = tuple(dict.fromkeys((*state.quantities, "Z", "theta")))
    last = slice(f.size - 1, f.size)
    u = point_u(state, f, z, last, names)
    for name in names:
        value = format_measured(
            name,
            float(q[name][-1]),
            None if u is None else float(u[name][0]),
            bool(state.hidden_at(name, last)[0]),
        )
        rows.append(("|Z|" if name == "Z" else "θ" if name == "theta" else name, value))
    return rows


def side_column(rows: list[tuple[str, str]], srf: float | None) -> Group:
    latest = Table.grid(padding=(0, 1))
    latest.add_column(style="bold")
    latest.add_column(justify="right")
    for row in rows:
        latest.add_row(*row)
    parts: list = [Panel(latest, title=LATEST, title_align="left")]
    if srf is not None:
        parts.append(resonance_panel(srf))
    return Group(*parts)


def resonance_panel(srf: float) -> Panel:
    return Panel(
        Text(f"≈ {format_si(srf, 'Hz')}\nreactance turns capacitive here (┊ on the plots)"),
        title="self-resonance",
        title_align="left",
        border_style="magenta",
    )


def side_lines(
    console: Console, options: ConsoleOptions, rows: list[tuple[str, str]], srf: float | None
) -> list[list[Segment]]:
    """:func:`side_column` laid out ``options.max_width`` wide: the latest point's panel drawn here
    as rich draws it (a frame's one panel that changes with every point), the rest by rich."""
    width = options.max_width
    names = [cell_len(name) for name, _ in rows]
    values = [cell_len(value) for _, value in rows]
    left, right = max(names), max(values)
    spare = width - 4 - left - 1 - right
    if left == 0 or spare < 0 or width < len(LATEST) + 6:
        return console.render_lines(side_column(rows, srf), options)
    plain, bold = Style(), console.get_style("bold")
    edge = Segment("│", plain)
    lines = [
        [
            Segment("╭─", plain),
            Segment(f" {LATEST} " + "─" * (width - len(LATEST) - 6)),
            Segment("─╮", plain),
        ]
    ]
    for (name, value), n, v in zip(rows, names, values, strict=True):
        lines.append([
            edge,
            Segment(" ", plain),
            Segment(name + " " * (left - n), bold),
            Segment(" ", bold),
            Segment(" " * (right - v) + value),
            Segment(" " * spare, plain),
            Segment(" ", plain),
            edge,
        ])  # fmt: skip
    lines.append([Segment("╰" + "─" * (width - 2) + "╯", plain)])
    if srf is not None:
        lines += console.render_lines(resonance_panel(srf), options)
    return lines
