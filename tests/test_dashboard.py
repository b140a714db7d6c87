"""The live view, the plain progress lines and the end-of-sweep summary, rendered for real."""

from __future__ import annotations

import io
import math
import re
from datetime import UTC, datetime, timedelta

import numpy as np
import pytest
from rich.console import Console

from acquire.dashboard import DashboardView, LiveDashboard, PlainProgress, open_view
from acquire.display import format_duration, format_value
from acquire.plan import list_plan, log_plan
from acquire.resonance import self_resonance, summary_frequencies
from acquire.sweep_state import SweepState
from acquire.sweep_summary import summary
from acquire.textplot import MARKER, draw, x_axis

L, R, C = 340e-6, 4.8, 1.5e-12  # demo data: a coil of our own invention
LEAD_L, LEAD_C = 1.5e-6, 8e-12
NOW = datetime(2031, 5, 4, 12, 0, tzinfo=UTC)


def coil(f):
    """A lossy inductor with its self-capacitance across it: (R + jwL) || C."""
    w = 2 * np.pi * f
    return 1 / (1 / (R + 1j * w * L) + 1j * w * C)


def coil_ls(f):
    """Ls = X / w of (R + jwL) || C, from the closed form of X written out by hand (computed):
    X = w (L (1 - w^2 LC) - R^2 C) / ((1 - w^2 LC)^2 + (w R C)^2)."""
    w = 2 * math.pi * f
    a = 1 - w * w * L * C
    return (L * a - R * R * C) / (a * a + (w * R * C) ** 2)


#: Self-resonance of (R + jwL) || C, where X = 0: w0^2 = 1/(LC) - (R/L)^2 (parallel tank
#: circuit, standard circuit theory); computed by hand from L, R, C above: 7.0475 MHz.
SRF = math.sqrt(1 / (L * C) - (R / L) ** 2) / (2 * math.pi)

PREFIXES = {"p": 1e-12, "n": 1e-9, "µ": 1e-6, "u": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3, "M": 1e6}


def shown(text, unit):
    """Every number printed with ``unit`` (and an SI prefix) in ``text``, in SI units."""
    pattern = rf"(-?\d+(?:\.\d+)?) ?([pnµumkM]?){re.escape(unit)}(?![a-zA-Z])"
    return [float(v) * PREFIXES[p] for v, p in re.findall(pattern, text)]


def is_shown(text, unit, value, rel):
    return any(math.isclose(v, value, rel_tol=rel) for v in shown(text, unit))


def through_leads(f, z):
    w = 2 * np.pi * f
    return 1 / (1 / (z + 1j * w * LEAD_L) + 1j * w * LEAD_C)


class Clock:
    def __init__(self):
        self.t = 100.0

    def __call__(self):
        return self.t


def make_state(n_done=None, clock=None):
    plan = log_plan("100Hz", "10MHz", 201)
    f = plan.frequencies
    state = SweepState(
        plan,
        dut="demo-coil",
        meter="Bench Instruments,Sim-1,0042,1.0",
        reference="#3 bench fixture (open-short-load)",
        reference_captured_at=NOW - timedelta(minutes=5),
        destination="sweep 7 in sqlite:///bench.db",
        corrected_too=True,
        clock=clock or Clock(),
    )
    state.start()
    n = 201 if n_done is None else n_done
    state.add(f[:n], through_leads(f[:n], coil(f[:n])), coil(f[:n]))
    return state


def record(renderable, width=140, height=45):
    console = Console(record=True, width=width, height=height, force_terminal=False)
    console.print(renderable)
    return console.export_text()


def test_self_resonance_matches_the_lc_formula():
    # Parallel resonance of a lossy inductor and a capacitor: w0^2 = 1/(LC) - (R/L)^2
    # (standard circuit theory, e.g. any electrical engineering textbook on tank circuits).
    f = np.geomspace(1e6, 1e7, 4001)
    expected = math.sqrt(1 / (L * C) - (R / L) ** 2) / (2 * math.pi)
    found = self_resonance(f, coil(f))
    assert found == pytest.approx(expected, rel=1e-6)
    assert found == pytest.approx(7.0475e6, rel=1e-4)  # computed by hand from L, R, C
    assert 1 / (2 * math.pi * math.sqrt(L * C)) == pytest.approx(found, rel=1e-4)  # R/L tiny


def test_self_resonance_ignores_noise_around_zero():
    f = np.geomspace(10, 1e7, 301)
    z = coil(f)
    z[1] = z[1].real - 1e-6j  # a reading that crosses zero in the noise at low frequency
    assert self_resonance(f, z) == pytest.approx(7.0475e6, rel=1e-3)
    assert self_resonance(f[:200], z[:200]) is None  # only the noise crossing, no peak in |Z|
    assert self_resonance(np.array([1e3]), np.array([1.0j])) is None
    assert self_resonance(f, z.real + 1j * np.abs(z.imag)) is None


def test_live_view_shows_latest_point_progress_meter_and_reference():
    state = make_state(n_done=180)
    text = record(DashboardView(state, now=NOW))
    # Point 180 of a 201-point log plan from 100 Hz to 10 MHz: 100 Hz * 10^(179/40) (computed).
    f_last = 100 * 10 ** (179 / 40)
    assert "2.985 MHz" in text
    assert "Sweep of demo-coil · 201 points, log, 100.0 Hz to 10.00 MHz" in text
    assert "meter: Bench Instruments,Sim-1,0042,1.0" in text
    assert "reference set: #3 bench fixture (open-short-load), captured 5 min 0 s ago" in text
    assert "points go to: sweep 7 in sqlite:///bench.db" in text
    assert "measuring 180/201 · 90 %" in text
    assert is_shown(text, "H", coil_ls(f_last), rel=6e-4)  # 4 digits shown
    w = 2 * math.pi * f_last
    a = 1 - w * w * L * C
    rs = R / (a * a + (w * R * C) ** 2)  # Re of (R + jwL) || C, closed form (computed)
    assert is_shown(text, "Ω", rs, rel=6e-4)
    assert "Ls (corrected)" in text and "Rs (corrected)" in text and "Q (corrected)" in text
    assert "┴1kHz" in text and "┴10MHz" in text
    assert "self-resonance" not in text  # 2.98 MHz reached so far, below the 7 MHz resonance


def test_live_view_marks_the_self_resonance_and_warnings():
    state = make_state()
    state.warn("open reference close to the coil's impedance above 5 MHz")
    state.add(np.empty(0), np.empty(0, complex), np.empty(0, complex))
    text = record(DashboardView(state, now=NOW))
    assert "self-resonance" in text
    marked = re.search(r"≈ (\d+\.\d+) MHz", text)
    assert marked and float(marked.group(1)) * 1e6 == pytest.approx(SRF, rel=1e-3)
    assert MARKER in text
    assert "open reference close to the coil's impedance" in text


def test_overrange_points_are_counted_and_warned():
    plan = list_plan("1k, 10k, 100k")
    state = SweepState(plan, clock=Clock())
    state.start()
    z = np.array([1 + 2j, complex(np.inf, np.inf), complex(np.nan, np.nan)])
    state.add(plan.frequencies, z)
    assert state.overrange == 1 and state.invalid == 1
    text = record(DashboardView(state, now=NOW))
    assert "1 point(s) overrange, the first at 10.00 kHz" in text
    assert "1 point(s) invalid" in text
    assert "reference set: none" in text
    assert "Ls (raw)" in text


def test_time_left_follows_the_rate_so_far():
    clock = Clock()
    state = make_state(n_done=50, clock=clock)
    clock.t += 5.0
    assert state.remaining() == pytest.approx(5.0 / 50 * 151)
    assert "about 15 s left" in record(DashboardView(state, now=NOW))
    assert format_duration(0.42) == "0.4 s"
    assert format_duration(200) == "3 min 20 s"
    assert format_duration(7200) == "2.0 h"
    assert format_duration(None) == "—"


def test_narrow_terminal_stacks_the_side_panel_below():
    text = record(DashboardView(make_state(n_done=20), now=NOW), width=70, height=40)
    assert "latest point" in text
    assert max(len(line) for line in text.splitlines()) <= 70


def test_summary_shows_raw_against_corrected_at_decades():
    state = make_state()
    state.finish("complete")
    text = record(summary(state))
    assert "Sweep complete: 201 of 201 points" in text
    assert "stored in sweep 7 in sqlite:///bench.db" in text
    assert "raw vs corrected" in text
    # At 1 kHz the coil and leads are nearly ideal inductors in series (w^2 LC ~ 2e-8), so
    # raw Ls = L + LEAD_L = 341.5 µH and the corrected Ls is the coil's own 340.0 µH (computed).
    assert "341.5 µH" in text
    assert "340.0 µH" in text
    assert "self-resonance: raw" in text
    corrected = re.search(r"corrected (\d+\.\d+) MHz", text)
    assert corrected and float(corrected.group(1)) * 1e6 == pytest.approx(SRF, rel=1e-3)
    picks = state.plan.frequencies[summary_frequencies(state.plan.frequencies)]
    assert np.allclose(picks, [1e2, 1e3, 1e4, 1e5, 1e6, 1e7])


def test_summary_of_an_interrupted_sweep_says_so():
    state = make_state(n_done=30)
    state.finish("interrupted", "stopped with Ctrl-C")
    text = record(summary(state))
    assert "Sweep interrupted: 30 of 201 points (stopped with Ctrl-C)" in text


def test_plain_progress_prints_lines_with_values():
    state = make_state(n_done=100)
    out = io.StringIO()
    with PlainProgress(state, out, interval=0.0) as view:
        view.update()
    lines = out.getvalue().splitlines()
    assert lines[0] == "sweep: 201 points, log, 100.0 Hz to 10.00 MHz"
    assert lines[1].startswith("100/201 points (50 %)  f=")
    assert "Ls=" in lines[1] and "Rs=" in lines[1] and "Q=" in lines[1]
    f_100 = 100 * 10 ** (99 / 40)  # the 100th point of the plan (computed)
    assert is_shown(lines[1].split("Ls=")[1], "H", coil_ls(f_100), rel=6e-4)
    assert len(lines) == 3


def test_open_view_without_a_terminal_is_plain():
    state = make_state(n_done=3)
    console = Console(file=io.StringIO(), force_terminal=False)
    assert isinstance(open_view(state, live=True, console=console), PlainProgress)
    tty = Console(file=io.StringIO(), force_terminal=True)
    assert isinstance(open_view(state, live=False, console=tty), PlainProgress)
    assert isinstance(open_view(state, live=True, console=tty), LiveDashboard)


def test_live_dashboard_draws_the_last_frame_on_exit():
    state = make_state(n_done=10)
    console = Console(record=True, width=120, height=40, force_terminal=True)
    with LiveDashboard(state, console, rate=20):
        f = state.plan.frequencies[10:]
        state.add(f, through_leads(f, coil(f)), coil(f))
        state.finish("complete")
    text = console.export_text()
    assert "complete 201/201" in text


def test_format_value_rules():
    assert format_value("Q", 52345.2) == "52345"
    assert format_value("Q", 12.345) == "12.35"
    assert format_value("Q", math.inf) == "∞"
    assert format_value("theta", 89.123) == "89.12°"
    assert format_value("Ls", 340e-6) == "340.0 µH"


def test_plot_draws_a_flat_line_in_one_row_and_axis_labels():
    f = np.geomspace(100, 1e6, 50)
    plot = draw(f, np.full(50, 2.0), 40, 5, (100, 1e6), y_range=(1.0, 3.0), y_log=False)
    assert len(plot.rows) == 5 and all(len(r) == 40 for r in plot.rows)
    filled = [i for i, r in enumerate(plot.rows) if r.strip()]
    assert filled == [2]
    axis = x_axis((100, 1e6), 40)
    assert axis.startswith("┴100Hz") and "┴1MHz" in axis and len(axis) == 40


def test_live_view_reads_the_points_once_while_the_sweep_adds_more():
    # The live view renders on rich's refresh thread while the sweep thread keeps adding
    # points: frequencies and impedances must come from one read of the point count, or a chunk
    # arriving between two reads gives arrays of different lengths and the redraw fails.
    state = make_state(n_done=100)
    f = state.plan.frequencies
    taken = state.points

    def points_then_a_chunk_arrives():
        seen = taken()
        i = state.count
        if i < len(f):
            state.add(
                f[i : i + 1], through_leads(f[i : i + 1], coil(f[i : i + 1])), coil(f[i : i + 1])
            )
        return seen

    state.points = points_then_a_chunk_arrives
    text = record(DashboardView(state, now=NOW))
    assert "measuring" in text
