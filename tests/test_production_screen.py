"""The station screen, rendered for real: large letters, counts, names as text, widths.

Widths are measured with the Unicode Standard's East Asian Width property (UAX #11, read
through Python's ``unicodedata``): wide and fullwidth characters take two terminal cells,
combining marks none, the rest one (█ is "ambiguous", narrow outside East Asian contexts).
Colours are checked as the ECMA-48 (5th edition, 8.3.117) SGR parameters a terminal receives:
31 red, 32 green, 33 yellow foreground, 1 bold. Serials, names and bins are our own invented
demo data.
"""

from __future__ import annotations

import io
import math
import re
import sys
import unicodedata
from dataclasses import replace
from datetime import datetime, timedelta

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from rich.console import Console

from acquire.production import big_letters
from acquire.production.big_letters import GLYPHS, HEIGHT, INK, banner, banner_width, fit
from acquire.production.plan import CONDITIONAL_FAIL, CONDITIONAL_PASS, ERROR, FAIL, PASS
from acquire.production.screen import ShownUnit, StationScreen, StationStatus, render, summary

T0 = datetime(2031, 5, 4, 12, 0, 0)  # naive: local time, shown as written
ESC = "\x1b"
#: ECMA-48 SGR foreground colours.
SGR = {"red": "31", "green": "32", "yellow": "33"}
EXPECTED_COLOUR = {
    PASS: "green",
    CONDITIONAL_PASS: "yellow",
    CONDITIONAL_FAIL: "red",
    FAIL: "red",
    ERROR: "yellow",
}
WORD = {
    PASS: "PASS",
    CONDITIONAL_PASS: "COND PASS",
    CONDITIONAL_FAIL: "COND FAIL",
    FAIL: "FAIL",
    ERROR: "ERROR",
}
#: Texts that rich would read as markup if they were not shown as text.
MARKUP = ("[/]", "[bold red]x", "[red]", "[link=http://example.invalid]p[/link]", "[/bold]")


def cells(line: str) -> int:
    """Terminal cells of ``line`` by UAX #11 (East Asian Width)."""
    n = 0
    for c in line:
        if unicodedata.combining(c):
            continue
        n += 2 if unicodedata.east_asian_width(c) in ("W", "F") else 1
    return n


def unit(serial="EXAMPLE-0012", attempt=1, outcome=PASS, bin="1%", failing=(), recorded=True, m=0):
    return ShownUnit(
        serial, attempt, outcome, bin, tuple(failing), recorded, T0 + timedelta(minutes=m)
    )


def status(**changes):
    base = StationStatus(
        station="bench 2",
        operator="Ana",
        lot="LOT-0042",
        plan="demo coil final test v1",
        tested=12,
        passed=10,
        first_pass=9,
        bins={"1%": 4, "2%": 5, "3%": 1, "reject": 1},
        outcomes={PASS: 10, FAIL: 1, ERROR: 1},
        waiting=0,
        blocked="",
        override="",
        last=(),
        current=unit(),
        message="",
    )
    return replace(base, **changes)


def shown(renderable, width=80, colour=False) -> str:
    """What a terminal ``width`` cells wide shows of ``renderable`` (markup on, as by default)."""
    console = Console(
        file=io.StringIO(),
        width=width,
        record=True,
        color_system="standard" if colour else None,
        force_terminal=colour,
    )
    console.print(renderable)
    if colour:
        return console.file.getvalue()
    return console.export_text(styles=False)


def plain(text: str) -> str:
    """``text`` without its ECMA-48 control sequences."""
    return re.sub(r"\x1b\[[0-9;?]*[A-Za-z]", "", text)


# --- the large font -----------------------------------------------------------------------------


def test_every_glyph_is_a_rectangle_of_ink_and_space():
    for c, rows in GLYPHS.items():
        assert len(rows) == HEIGHT, c
        assert len({len(r) for r in rows}) == 1, c
        assert set("".join(rows)) <= {INK, " "}, c
        if c != " ":
            assert INK in "".join(rows), c


def test_no_two_glyphs_look_alike():
    # Legibility (common practice, no published source): two glyphs of the same width differ
    # in at least two cells, so one stray cell never turns one character into another.
    chars = [c for c in GLYPHS if c != " "]
    for i, a in enumerate(chars):
        for b in chars[i + 1 :]:
            ra, rb = "".join(GLYPHS[a]), "".join(GLYPHS[b])
            if len(ra) == len(rb):
                assert sum(x != y for x, y in zip(ra, rb, strict=True)) >= 2, (a, b)


def test_pass_is_drawn_as_designed():
    # The design of the word, drawn by hand (# for ink) before the font was typed in.
    by_hand = [
        "####   ###   ####  ####",
        "#   # #   # #     #    ",
        "####  #####  ###   ### ",
        "#     #   #     #     #",
        "#     #   # ####  #### ",
    ]
    assert banner("pass") == [r.replace("#", INK) for r in by_hand]


def test_doubled_letters_repeat_each_cell_across():
    single, double = banner("COND FAIL"), banner("COND FAIL", scale=2)
    assert double == ["".join(c + c for c in row) for row in single]
    for word in ("PASS", "ERROR", "COND PASS", "0123456789 %-."):
        for scale in (1, 2):
            assert banner_width(word, scale) == len(banner(word, scale)[0])


def test_the_largest_drawing_that_fits_is_chosen():
    assert fit("PASS", 80) == banner("PASS", 2)  # 46 cells
    assert fit("COND PASS", 80) == banner("COND PASS", 1)  # 100 doubled, 50 single
    assert fit("ERROR", 40) == banner("ERROR", 1)
    split = fit("COND FAIL", 30)  # 50 on one band: one band per word
    assert split == [*banner("COND", 1), "", *banner("FAIL", 1)]
    assert fit("ERROR", 10) is None
    for word in WORD.values():
        for width in range(5, 121):
            drawn = fit(word, width)
            assert drawn is None or max(len(r) for r in drawn) <= width


def test_a_character_without_a_glyph_is_refused():
    assert not big_letters.can_draw("PASS!")
    with pytest.raises(ValueError, match="no glyph"):
        banner("PASS!")


# --- the screen ---------------------------------------------------------------------------------


def drawings(word):
    """Every way the font may draw ``word``: one band doubled or single, one band per word."""
    out = [banner(word, 2), banner(word, 1)]
    for scale in (2, 1):
        out.append([row for w in word.split() for row in banner(w, scale)])
    return out


@pytest.mark.parametrize("outcome", [PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL, ERROR])
@pytest.mark.parametrize("width", [80, 60])
def test_each_outcome_is_drawn_large_in_its_colour(outcome, width):
    s = status(current=unit(serial="EXAMPLE-0007", attempt=2, outcome=outcome, bin="2%"))
    text = shown(render(s, width), width)
    found = [d for d in drawings(WORD[outcome]) if all(row.rstrip() in text for row in d)]
    assert found, f"{WORD[outcome]} is not drawn in large letters"
    drawn = found[0]
    assert "EXAMPLE-0007" in text and "attempt 2" in text and "bin 2%" in text

    raw = shown(render(s, width), width, colour=True)
    for row in drawn:
        i = raw.index(row.rstrip())
        opened = raw.rfind(ESC + "[", 0, i)
        sgr = raw[opened + 2 : raw.index("m", opened)].split(";")
        assert "1" in sgr and SGR[EXPECTED_COLOUR[outcome]] in sgr, (outcome, sgr)


@pytest.mark.parametrize(
    "width, outcomes",
    [(80, [PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL, ERROR]), (60, [PASS, FAIL, ERROR])],
)
def test_the_serial_stands_beside_the_verdict(width, outcomes):
    for outcome in outcomes:
        s = status(current=unit(serial="EXAMPLE-0031", outcome=outcome))
        lines = shown(render(s, width), width).splitlines()
        first = next(k for k, ln in enumerate(lines) if INK in ln)
        assert "EXAMPLE-0031" in lines[first], (width, outcome)
        assert INK in lines[first + HEIGHT - 1] and INK not in lines[first + HEIGHT]


def test_at_80_columns_pass_fail_and_error_are_drawn_with_doubled_cells():
    for word in ("PASS", "FAIL", "ERROR"):
        text = shown(render(status(current=unit(outcome=word.lower())), 80))
        assert all(row.rstrip() in text for row in banner(word, 2)), word


def test_the_last_units_give_way_so_the_screen_fits_its_height():
    last = tuple(unit(serial=f"EXAMPLE-{90 - k:04d}", m=-k) for k in range(8))
    s = status(current=unit(outcome=FAIL, failing=["Ls low", "Q low"]), last=last)
    tall = shown(render(s, 80), 80).splitlines()
    assert sum("EXAMPLE-00" in ln for ln in tall) == 1 + 8
    for height in (24, 20, 12):
        lines = shown(render(s, 80, height), 80).splitlines()
        assert len(lines) <= max(height, len(tall) - 3 - 8), height  # title, head, rule, rows
        assert banner("FAIL", 2)[0].rstrip() in lines[2]  # the verdict stays on top
    # 23 lines: 14 above the table, its title, head and rule, then 6 of the 8 units
    lines = shown(render(s, 80, 23), 80).splitlines()
    assert len(lines) == 23 and sum("EXAMPLE-00" in ln for ln in lines) == 1 + 6
    assert "EXAMPLE-0090" in lines[-6] and "EXAMPLE-0085" in lines[-1]


def test_counts_yield_bins_and_outcomes_are_shown():
    text = shown(render(status(), 80))
    # 10 of 12 serials passed: 83.3 %, computed by hand
    assert "12 tested" in text and "10 passed" in text and "83.3 %" in text
    assert "first pass 9" in text
    for name, n in (("1%", 4), ("2%", 5), ("3%", 1), ("reject", 1)):
        assert f"{name} {n}" in text
    for name, n in ((PASS, 10), (FAIL, 1), (ERROR, 1)):
        assert f"{name} {n}" in text
    assert "empty" in text


def test_before_the_first_unit_the_yield_is_unknown():
    s = status(tested=0, passed=0, first_pass=0, bins={}, outcomes={}, current=None)
    assert math.isnan(s.yield_) and math.isnan(s.first_pass_yield)
    text = shown(render(s, 80))
    assert "yield —" in text and "first serial" in text
    assert status().yield_ == pytest.approx(10 / 12)


def test_units_waiting_in_the_outbox_are_counted_in_a_warning_colour():
    s = status(waiting=3, current=unit(recorded=False))
    text = shown(render(s, 80))
    assert "3 units waiting in outbox" in text
    assert "waiting in outbox" in text.split("3 units")[0]  # the current unit says so too
    raw = shown(render(s, 80), colour=True)
    i = raw.index("3 units waiting")
    opened = raw.rfind(ESC + "[", 0, i)
    assert SGR["yellow"] in raw[opened + 2 : raw.index("m", opened)].split(";")


def test_a_blocked_station_and_an_override_are_shown():
    s = status(blocked="references are 9 h old (plan allows 8 h): capture open and short again")
    text = shown(render(s, 80))
    assert "STATION STOPPED" in text and "capture open and" in text and "short again" in text
    raw = shown(render(s, 80), colour=True)
    i = raw.index("STATION STOPPED")
    opened = raw.rfind(ESC + "[", 0, i)
    assert "41" in raw[opened + 2 : raw.index("m", opened)].split(";")  # ECMA-48: red background
    text = shown(render(status(override="supervisor approved until noon"), 80))
    assert "STATION STOPPED" not in text
    assert "despite a block; reason given: supervisor approved until noon" in text


def test_failing_lines_are_listed_and_the_rest_counted():
    failing = [f"check {k}: Ls @ 10 kHz 338.2 µH below 339.5 µH (low limit)" for k in range(9)]
    text = shown(render(status(current=unit(outcome=FAIL, failing=failing)), 80))
    assert "check 0: Ls @ 10 kHz 338.2 µH below 339.5 µH (low limit)" in text
    assert "check 5:" in text and "check 6:" not in text
    assert "and 3 more failing checks" in text


def test_the_last_units_table_shows_at_most_eight_newest_first():
    last = tuple(unit(serial=f"EXAMPLE-{90 - k:04d}", m=-k) for k in range(10))
    text = shown(render(status(last=last), 80))
    rows = [ln for ln in text.splitlines() if re.search(r"EXAMPLE-\d{4}", ln) and ":" in ln]
    serials = [re.search(r"EXAMPLE-\d{4}", ln).group(0) for ln in rows]
    assert serials[-8:] == [f"EXAMPLE-{90 - k:04d}" for k in range(8)]
    assert "EXAMPLE-0082" not in text and "EXAMPLE-0081" not in text


def markup_status():
    last = tuple(unit(serial=m, bin=m, m=-k, recorded=bool(k % 2)) for k, m in enumerate(MARKUP))
    return status(
        station=MARKUP[0],
        operator=MARKUP[1],
        lot=MARKUP[2],
        plan=MARKUP[3],
        bins={m: 1 for m in MARKUP},
        outcomes={PASS: 1},
        blocked=MARKUP[4],
        override=MARKUP[0],
        message=MARKUP[1],
        last=last,
        current=unit(serial=MARKUP[0], bin=MARKUP[1], outcome=FAIL, failing=MARKUP),
    )


@pytest.mark.parametrize("width", [80, 60])
def test_names_that_look_like_markup_show_as_written(width):
    s = markup_status()
    for part in (render(s, width), summary(s)):
        text = shown(part, width)
        joined = text.replace("\n", "")
        for m in MARKUP:
            assert m in text or m in joined, m


@pytest.mark.parametrize("width", [80, 60])
def test_never_wider_than_the_console(width):
    long = "EXAMPLE-" + "9" * 90
    s = status(
        station="final test bench with a very long name " * 3,
        operator="山田太郎 and María José Ñúñez-Öberg",
        current=unit(
            serial=long,
            bin="bin with a long name " * 4,
            outcome=CONDITIONAL_FAIL,
            failing=["Rs @ 100 kHz " + "x" * 150],
            recorded=False,
        ),
        last=(unit(serial=long, bin="ビン" * 20), unit(serial="短い")),
        bins={"bin with a long name " * 4: 3, "ビン": 2},
        waiting=12,
        blocked="the store cannot be reached " * 5,
        message="serial refused: " + long,
    )
    for part in (render(s, width), summary(s)):
        for line in shown(part, width).splitlines():
            assert cells(line) <= width, line
    verdict = shown(render(replace(s, last=(), message=""), width), width).split("tested ·")[0]
    assert long in re.sub(r"[\s█]", "", verdict)  # the serial beside or below, folded, not cut


@settings(max_examples=40, deadline=None)
@given(
    names=st.lists(
        st.text(
            st.characters(whitelist_categories=("L", "N", "P", "S", "Zs")), min_size=1, max_size=60
        ),
        min_size=4,
        max_size=4,
    ),
    width=st.sampled_from([60, 80]),
)
def test_any_names_fit_and_show(names, width):
    serial, operator, bin_, line = names
    s = status(
        operator=operator,
        current=unit(serial=serial, bin=bin_, outcome=FAIL, failing=[line]),
        last=(unit(serial=serial, bin=bin_),),
        bins={bin_: 1},
    )
    text = shown(render(s, width), width)
    for row in text.splitlines():
        assert cells(row) <= width
    # between the first line of ink and the failing line: the large letters and, beside or
    # below them, the serial (folded at the width, never cut)
    lines = text.splitlines()
    first = next(k for k, ln in enumerate(lines) if INK in ln)
    end = next(k for k, ln in enumerate(lines) if ln.startswith("✗"))
    squeeze = re.compile(rf"[\s{INK}]")
    assert squeeze.sub("", serial) in squeeze.sub("", "".join(lines[first:end]))


# --- the lot summary ----------------------------------------------------------------------------


@pytest.mark.parametrize("width", [80, 60])
def test_the_lot_summary_gives_totals_yields_and_shares(width):
    s = status(waiting=2)
    text = shown(summary(s), width)
    for line in text.splitlines():
        assert cells(line) <= width
    assert "LOT-0042" in text
    # shares of 12 serials, computed by hand: 10 -> 83.3 %, 9 -> 75.0 %, 4 -> 33.3 %,
    # 5 -> 41.7 %, 1 -> 8.3 %
    assert re.search(r"tested\s+12", text)
    assert re.search(r"final yield\)\s+10\s+83\.3 %", text)
    assert re.search(r"first-pass yield\)\s+9\s+75\.0 %", text)
    assert re.search(r"bin 1%\s+4\s+33\.3 %", text)
    assert re.search(r"bin 2%\s+5\s+41\.7 %", text)
    assert re.search(r"bin reject\s+1\s+8\.3 %", text)
    assert re.search(r"error\s+1\s+8\.3 %", text)
    assert "2 units still waiting in the" in text
    empty = shown(summary(status(tested=0, passed=0, first_pass=0, bins={}, outcomes={})))
    assert re.search(r"final yield\)\s+0\s+—", empty)


# --- showing and asking -------------------------------------------------------------------------


def plain_screen(**options):
    console = Console(file=io.StringIO(), width=80, color_system=None, **options)
    return StationScreen(console, interactive=False), console


def test_non_interactive_prints_one_plain_line_per_unit():
    screen, console = plain_screen()
    first = status(current=unit(serial="EXAMPLE-0001"), last=())
    second = status(
        current=unit(
            serial="EXAMPLE-0002",
            attempt=2,
            outcome=FAIL,
            bin="reject",
            m=1,
            failing=["Ls @ 10 kHz 338.2 µH below 339.5 µH (low limit)", "Q " + "y" * 120],
            recorded=False,
        ),
    )
    third = status(
        current=unit(
            serial="EXAMPLE-0003", outcome=ERROR, bin="", m=2, failing=["meter fault: overload"]
        )
    )
    screen.show(first)
    screen.show(first)  # the same again: nothing new
    screen.show(second)
    screen.show(third)
    lines = console.file.getvalue().splitlines()
    assert len(lines) == 3
    assert lines[2] == "12:02:00  EXAMPLE-0003  attempt 1  error  error: meter fault: overload"
    assert lines[0] == "12:00:00  EXAMPLE-0001  attempt 1  pass  bin 1%"
    assert lines[1].startswith("12:01:00  EXAMPLE-0002  attempt 2  fail  bin reject  failing: ")
    assert "338.2 µH below 339.5 µH (low limit); Q yyy" in lines[1]
    assert lines[1].endswith("(waiting in outbox)")
    assert ESC not in console.file.getvalue()


def test_non_interactive_prints_blocks_once_and_messages():
    screen, console = plain_screen()
    blocked = status(blocked="references expired: capture them again")
    screen.show(blocked)
    screen.show(replace(blocked, message="serial [/] refused: it does not match the plan"))
    screen.show(replace(blocked, message=""))
    out = console.file.getvalue().splitlines()
    assert out.count("station stopped: references expired: capture them again") == 1
    assert "serial [/] refused: it does not match the plan" in out
    assert sum("EXAMPLE-0012" in ln for ln in out) == 1


def test_interactive_clears_and_draws_the_screen():
    console = Console(file=io.StringIO(), width=80, force_terminal=True, color_system="standard")
    screen = StationScreen(console, interactive=True)
    screen.show(status(current=unit(outcome=ERROR)))
    out = console.file.getvalue()
    assert out.startswith(ESC + "[2J")  # ECMA-48 8.3.39 ED: erase in page, 2 = the whole page
    assert banner("ERROR", 2)[2].rstrip() in plain(out)


def test_the_bell_rings_only_on_an_interactive_screen_with_the_bell_on():
    def rung(interactive, bell):
        console = Console(file=io.StringIO(), width=80)
        StationScreen(console, interactive=interactive, bell=bell).ring()
        return console.file.getvalue()

    assert rung(True, True) == "\a"
    assert rung(True, False) == ""
    assert rung(False, True) == ""


@pytest.mark.parametrize(
    "piped", ["EXAMPLE-0001\n[/]\r\n\nEXAMPLE-0003", "EXAMPLE-0001\n[/]\n\nEXAMPLE-0003\n"]
)
def test_ask_reads_piped_lines_until_the_end(monkeypatch, piped):
    monkeypatch.setattr(sys, "stdin", io.StringIO(piped))
    screen, console = plain_screen()
    got = [screen.ask("serial: ") for _ in range(5)]
    assert got == ["EXAMPLE-0001", "[/]", "", "EXAMPLE-0003", None]
    assert console.file.getvalue() == ""  # no prompt in a pipe


@pytest.mark.parametrize("typed", ["EXAMPLE-0001", "EXAMPLE-0001\n"])
def test_ask_on_a_terminal_shows_the_prompt_as_text(monkeypatch, typed):
    monkeypatch.setattr(sys, "stdin", io.StringIO(typed))
    console = Console(file=io.StringIO(), width=80, color_system=None)
    screen = StationScreen(console, interactive=True)
    assert screen.ask("[bold]serial[/]: ") == "EXAMPLE-0001"
    assert screen.ask("[/]") is None
    assert console.file.getvalue() == "[bold]serial[/]: [/]\n"  # a new line after the end
