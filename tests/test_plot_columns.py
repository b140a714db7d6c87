"""The live view draws a few points per plot column, and the picture stays the full picture.

The reference drawing is :func:`acquire.textplot.draw` given every point (each point's dot and
straight lines between neighbours); the column picks must draw exactly the same dots. The
self-resonance found point by point is compared with :func:`acquire.resonance.self_resonance`
of all the points and with the tank-circuit formula.
"""

from __future__ import annotations

import io
import math

import numpy as np
import pytest
from rich.console import Console

import acquire.dashboard as dashboard
from acquire.dashboard import DashboardView
from acquire.plan import linear_plan, log_plan
from acquire.plot_columns import ColumnPicks, ResonanceWatch
from acquire.resonance import self_resonance
from acquire.sweep_state import SweepState
from acquire.textplot import draw

L, R, C = 340e-6, 4.8, 1.5e-12  # demo data: a coil of our own invention
#: Self-resonance of (R + jwL) || C, where X = 0: w0^2 = 1/(LC) - (R/L)^2 (parallel tank
#: circuit, standard circuit theory); computed by hand from L, R, C above: 7.0475 MHz.
SRF = math.sqrt(1 / (L * C) - (R / L) ** 2) / (2 * math.pi)


def coil(f):
    """A lossy inductor with its self-capacitance across it: (R + jwL) || C."""
    w = 2 * np.pi * f
    return 1 / (1 / (R + 1j * w * L) + 1j * w * C)


def picked_plot(x, y, cells, rows, x_range, y_range, y_log, chunks):
    """The plot drawn from the column picks, the points fed in ``chunks`` pieces."""
    picks = ColumnPicks(x_range, 2 * cells)
    for part in np.array_split(np.arange(x.size), chunks):
        picks.take(x[part], y[part])
    idx, links = picks.picks()
    return draw(x[idx], y[idx], cells, rows, x_range, y_range, y_log, links=links), idx


@pytest.mark.parametrize(
    ("points", "cells", "chunks"),
    [(50, 60, 1), (50, 60, 7), (3_000, 40, 1), (3_000, 40, 13), (20_001, 90, 5)],
)
@pytest.mark.parametrize("y_log", [False, True])
def test_column_picks_draw_the_same_dots_as_every_point(points, cells, chunks, y_log):
    rng = np.random.default_rng(points + cells)
    x = np.geomspace(100.0, 1e7, points)
    y = np.abs(coil(x)) * (1 + 0.05 * rng.standard_normal(points))  # |Z| with scatter
    y[points // 3 : points // 3 + 3] = np.nan  # invalid readings leave a gap
    y[points // 2] *= 50  # a spike one point wide
    y_range = (float(np.nanmin(y)), float(np.nanmax(y)) / 3)  # part of the spike is clipped
    full = draw(x, y, cells, 8, (100.0, 1e7), y_range, y_log)
    picked, idx = picked_plot(x, y, cells, 8, (100.0, 1e7), y_range, y_log, chunks)
    assert picked.rows == full.rows
    assert idx.size <= 4 * (2 * cells + 2)


def test_column_picks_of_a_linear_plan_with_gaps_between_columns():
    x = np.linspace(1e3, 1e6, 400)
    y = np.sin(x / 5e4)
    y[::37] = np.nan
    full = draw(x, y, 50, 6, (1e3, 1e6), (-1.0, 1.0), False)
    picked, _ = picked_plot(x, y, 50, 6, (1e3, 1e6), (-1.0, 1.0), False, 9)
    assert picked.rows == full.rows


def test_resonance_watch_matches_self_resonance_of_all_points():
    f = np.geomspace(100.0, 1e7, 20_001)
    z = coil(f)
    z[3] = z[3].real - 1e-6j  # a crossing in the noise at low frequency: no peak in |Z|
    z[5000] = complex(np.nan, np.nan)  # an invalid reading
    watch = ResonanceWatch()
    for end in (1, 2, 777, 5000, 5001, 19_000, 20_001):
        watch.take(z, end)
        assert watch.frequency(f[:end], z[:end]) == self_resonance(f[:end], z[:end])
    assert watch.frequency(f, z) == pytest.approx(SRF, rel=1e-6)


def frame(state, width=120, height=40):
    console = Console(file=io.StringIO(), width=width, height=height, color_system=None)
    console.print(DashboardView(state))
    return console.file.getvalue()


def spike_state(points, spike_at):
    plan = log_plan("100Hz", "10MHz", points)
    f = plan.frequencies
    z = R + 1j * 2 * np.pi * f * L  # no resonance: a plain lossy coil
    z[spike_at] = z[spike_at] * 1000  # one point a thousand times larger in |Z|
    state = SweepState(plan, quantities=("Z",))
    state.start()
    for part in np.array_split(np.arange(points), 11):
        state.add(f[part], z[part])
        frame(state)  # the view keeps up as the points arrive
    return state, f


def test_a_spike_one_point_wide_in_100001_points_shows_on_the_plot():
    points, spike_at = 100_001, 61_234
    state, f = spike_state(points, spike_at)
    text = frame(state)
    rows = [line for line in text.splitlines() if "│" in line][:12]
    plot_rows = [line.split("│", 1)[1][: 120 - 35 - 10] for line in rows]
    cells = len(plot_rows[0])
    # the spike's dot column: log position of its frequency on the plot (the axis of draw())
    col = round((math.log10(f[spike_at]) - 2) / 5 * (2 * cells - 1)) // 2
    assert 40 < col < cells - 5  # well inside the plot
    top = plot_rows[0]
    assert top[col] != " ", f"no dot at the spike's column {col}: {top!r}"
    assert top[: col - 1].strip() == "" and top[col + 2 :].strip() == ""  # nothing else so high


def test_a_frame_draws_a_few_points_per_column_whatever_the_sweep_length(monkeypatch):
    sizes = []
    real = dashboard.draw

    def counting(x, *args, **kwargs):
        sizes.append(np.asarray(x).size)
        return real(x, *args, **kwargs)

    monkeypatch.setattr(dashboard, "draw", counting)
    plan = linear_plan("1kHz", "10MHz", 100_001)
    state = SweepState(plan, quantities=("Ls", "Rs", "Q"))
    state.start()
    state.add(plan.frequencies, coil(plan.frequencies))
    frame(state, width=120)
    dots = 2 * (120 - 35 - 10)
    assert len(sizes) == 3 and max(sizes) <= 4 * (dots + 2)


def test_the_frame_at_many_points_matches_the_frame_of_every_point():
    """A 3,001-point plan fits the range sample whole: the view drawn from the column picks
    is the same text as the one drawn from every point (the old way, put together here)."""
    plan = log_plan("100Hz", "10MHz", 3_001)
    f = plan.frequencies
    state = SweepState(plan, quantities=("Ls", "Q", "Z"))
    state.start()
    state.add(f, coil(f))
    text = frame(state, width=100, height=60)
    cells = 100 - 35 - 10
    for name, y in (("Q", np.abs(coil(f).imag) / coil(f).real), ("Z", np.abs(coil(f)))):
        full = draw(f, y, cells, 12, (100.0, 1e7), markers=(self_resonance(f, coil(f)),))
        for row in full.rows:
            assert row in text, f"{name}: row {row!r} missing"
