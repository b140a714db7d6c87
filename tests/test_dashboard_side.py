"""The live view's latest-point panel, drawn segment by segment, against rich's own drawing of
the same panel (rich is the reference: the screen must not change)."""

import io

import pytest
from rich.console import Console

from acquire.dashboard_side import side_column, side_lines

ROWS = [
    [("f", "1.234 kHz"), ("Ls", "340.1 µH ± 1.2 µH"), ("Q", "beyond accuracy"), ("|Z|", "2.6 kΩ")],
    [("f", "10 MHz"), ("θ", "-89.9°")],
    [("", "no points yet")],
    # wider than the panel: rich wraps it, and so must the view
    [("f", "1 kHz"), ("Rs", "4.812345678901234567890123456789 Ω ± 0.1 Ω")],
]


def printed(lines_of, width, terminal):
    console = Console(file=io.StringIO(), width=width, force_terminal=terminal)
    for line in lines_of(console):
        for segment in line:
            console.print(segment.text, style=segment.style, end="", soft_wrap=True)
        console.print()
    return console.file.getvalue()


@pytest.mark.parametrize("rows", ROWS)
@pytest.mark.parametrize("srf", [None, 7.05e6])
@pytest.mark.parametrize("width", [20, 34, 50])
@pytest.mark.parametrize("terminal", [True, False])
def test_latest_panel_is_drawn_as_rich_draws_it(rows, srf, width, terminal):
    ours = printed(
        lambda c: side_lines(c, c.options.update_width(width), rows, srf), width, terminal
    )
    rich = printed(lambda c: c.render_lines(side_column(rows, srf), c.options), width, terminal)
    assert ours == rich
    assert "latest point" in ours
