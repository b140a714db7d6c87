"""Plain printing without rich prints what rich (the reference library) prints off a terminal.

Every expected text here is rich's own output for the same strings, tables and sweep summaries
(a ``rich.console.Console`` that is not a terminal, as ``acquire.display.text_console`` makes
it), so :mod:`acquire.plain_console` cannot drift from it unnoticed.
"""

from __future__ import annotations

import io
import random

import numpy as np
import pytest
from rich.console import Console
from rich.table import Table
from rich.text import Text

from acquire.plain_console import PlainConsole, plain_console, table_lines, wrap_text
from acquire.plan import log_plan
from acquire.sweep_state import SweepState
from acquire.sweep_summary import summary


def by_rich(item, width: int, soft_wrap: bool = False) -> str:
    out = io.StringIO()
    console = Console(file=out, width=width, markup=False, emoji=False, force_terminal=False)
    console.print(item, soft_wrap=soft_wrap)
    return out.getvalue()


def joined(lines) -> str:
    return "".join(line + "\n" for line in lines)


WORDS = ["a", "Ls", "10.33 µH", "beyond", "accuracy,", "±", "0.31", "the", "sweep", "1.000 MHz:"]


@pytest.mark.parametrize("seed", range(40))
def test_wrapping_is_rich_s(seed):
    rng = random.Random(seed)

    def line() -> str:
        words = (
            rng.choice(WORDS) + " " * rng.choice([1, 1, 1, 2]) for _ in range(rng.randint(0, 30))
        )
        text = " " * rng.choice([0, 0, 2]) + "".join(words)
        return text.rstrip(" ") if rng.random() < 0.5 else text

    text = "\n".join(line() for _ in range(rng.randint(1, 3)))
    for width in (12, 20, 33, 80, 200):
        lines = wrap_text(text, width)
        if lines is None:  # only a word longer than the line is left to rich
            assert any(len(w) > width for w in text.split())
            continue
        assert joined(lines) == by_rich(Text(text), width), (text, width)


def test_the_sweep_warning_wraps_as_rich_wraps_it():
    text = (
        "warning: 149 point(s) beyond the tool's accuracy, the first at 1.000 MHz: their "
        "flagged values are not shown as numbers"
    )
    for width in (40, 79, 80, 81, 119, 120):
        assert joined(wrap_text(text, width)) == by_rich(Text(text), width)


@pytest.mark.parametrize("rows", [1, 3, 6])
def test_a_table_is_drawn_as_rich_draws_it(rows):
    headers = ("f", "Ls raw", "Ls corrected", "Q")
    body = [
        (f"{10**k:.1f} Hz", "341.5 µH", "340.0 µH ± 0.31 µH", "beyond accuracy" if k else "∞")
        for k in range(rows)
    ]
    for title in ("raw vs corrected", "selected points (raw)"):
        table = Table(title=title, title_justify="left")
        for name in headers:
            table.add_column(name, justify="right")
        for row in body:
            table.add_row(*row)
        assert joined(table_lines(title, headers, body, 120)) == by_rich(table, 120)


def test_a_table_too_wide_is_left_to_rich():
    assert table_lines("t", ("f", "Q"), [("1.000 kHz", "12.5")], 10) is None


def sweep_state(n: int, corrected: bool, status: str, reason: str = "") -> SweepState:
    """A coil of our own invention (340 µH, 4.8 ohm, 1.5 pF across it) behind bench leads."""
    plan = log_plan("100Hz", "10MHz", 201)
    f = plan.frequencies[:n]
    w = 2 * np.pi * f
    coil = 1 / (1 / (4.8 + 1j * w * 340e-6) + 1j * w * 1.5e-12)
    state = SweepState(
        plan, dut="demo coil", meter="Bench,Sim-1,0042,1.0", corrected_too=corrected,
        destination="sweep 7 in sqlite:///bench.db", reference_override=reason,
    )  # fmt: skip
    state.start()
    if n:
        state.add(f, coil + 1j * w * 1.5e-6, coil if corrected else None)
    state.finish(status, "stopped with Ctrl-C" if status == "interrupted" else "")
    return state


@pytest.mark.parametrize(
    ("n", "corrected", "status", "reason"),
    [
        (201, True, "complete", ""),
        (201, False, "complete", ""),
        (30, True, "interrupted", "open re-taken tomorrow"),
        (0, False, "interrupted", ""),
    ],
)
def test_the_sweep_summary_prints_as_rich_prints_it(n, corrected, status, reason):
    shown = summary(sweep_state(n, corrected, status, reason))
    for width in (60, 80, 120, 160):
        expected = by_rich(shown, width)
        lines = shown.plain_lines(width)
        if lines is None:  # rich narrows the table: only when it cannot fit
            assert max(len(line) for line in expected.splitlines()) == width
            continue
        assert joined(lines) == expected


def test_the_plain_console_prints_as_rich_and_hands_the_rest_to_rich(monkeypatch):
    monkeypatch.setenv("COLUMNS", "50")
    for name in ("TTY_COMPATIBLE", "FORCE_COLOR"):
        monkeypatch.delenv(name, raising=False)
    out = io.StringIO()
    console = plain_console(out)
    assert isinstance(console, PlainConsole)
    items = [
        ("sweep complete: 1601 points saved as sweep 12 in sqlite:////tmp/a long name.db", True),
        ("sweep complete: 1601 points saved as sweep 12 in sqlite:////tmp/a long name.db", False),
        ("a name with a\ttab and a [red]tag[/red] :x: and a bell \a", True),
        (summary(sweep_state(201, True, "complete")), False),
    ]
    for item, soft in items:
        console.print(item, soft_wrap=soft)
    assert out.getvalue() == "".join(by_rich(item, 50, soft) for item, soft in items)


def test_a_terminal_or_forced_colour_gets_rich(monkeypatch):
    monkeypatch.delenv("TTY_COMPATIBLE", raising=False)
    monkeypatch.setenv("FORCE_COLOR", "1")
    assert plain_console(io.StringIO()) is None
    monkeypatch.delenv("FORCE_COLOR")
    assert isinstance(plain_console(io.StringIO()), PlainConsole)
    latin = io.TextIOWrapper(io.BytesIO(), encoding="latin-1")
    assert plain_console(latin) is None  # rich draws an ASCII box there


def test_every_character_taken_as_one_cell_is_one_cell_for_rich():
    from rich.cells import cell_len

    from acquire.plain_console import _NARROW, narrow

    assert all(cell_len(c) == 1 for c in _NARROW)
    assert all(cell_len(chr(i)) == 1 for i in range(0x20, 0x300) if narrow(chr(i)))
    assert not narrow("\t") and not narrow("\r") and not narrow("\u0301") and not narrow("漢")
