"""Pictures of stored sweeps, drawn from a store the demo filled (the simulated demo coil).

What is drawn is read back from the matplotlib Figure (its Line2D and fill data) before it is
saved, and checked against the stored points through the textbook definitions: Ls = X/ω and its
expanded uncertainty U(X)/ω, the self-resonance where X turns from positive to negative, and the
resonance of the simulated coil's own L and C, f = 1/(2π√(LC)).
"""

from __future__ import annotations

import io
import math
import struct
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
from matplotlib.collections import PolyCollection
from rich.console import Console

from acquire.demo import SWEEP_STEPS, run_demo
from acquire.errors import InputError, StoreError
from acquire.impedance import quantities
from acquire.report.sweep_panels import DPI, FIGURE_SIZE, tick_text
from acquire.report.sweep_pictures import (
    overlay_figure,
    read_trace,
    sweep_figure,
    sweep_figures,
)
from acquire.resonance import self_resonance
from acquire.store import open_store

ROOT = Path(__file__).resolve().parent.parent
#: PNG signature and the IHDR chunk (PNG, ISO/IEC 15948:2004, sections 5.2 and 11.2.2).
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


@pytest.fixture(scope="module")
def store(tmp_path_factory):
    """The demo's store (sweep 1: the demo coil), plus sweep 2 (sweep 1's points with X 3 %
    higher, a second sample), sweep 3 (raw readings only) and sweep 4 (no points)."""
    url = f"sqlite:///{tmp_path_factory.mktemp('sweeppics') / 'demo.db'}"
    run_demo(
        url,
        live=False,
        points=101,
        measure_time=0,
        steps=SWEEP_STEPS,
        console=Console(file=io.StringIO()),
    )
    with open_store(url) as s:
        p = s.sweep_points(1)
        f = p["frequency"].to_numpy()
        raw = p["raw_r"].to_numpy() + 1j * p["raw_x"].to_numpy()
        cor = p["corrected_r"].to_numpy() + 1j * p["corrected_x"].to_numpy()
        u = p[["u_r", "u_x"]].to_numpy()
        with s.begin_sweep(dut="demo-coil, second sample") as w:
            w.add_points(f, raw, cor.real + 1.03j * cor.imag, u)
        with s.begin_sweep(dut="no references") as w:
            w.add_points(f, raw)
        s.begin_sweep(dut="empty").finish()
        yield s


def stored(store, sweep_id=1):
    p = store.sweep_points(sweep_id)
    f = p["frequency"].to_numpy()
    z = p["corrected_r"].to_numpy() + 1j * p["corrected_x"].to_numpy()
    return f, z, p["u_r"].to_numpy(), p["u_x"].to_numpy()


def figure_of(store, sweep_id=1, fit=None):
    trace, head = read_trace(store, sweep_id)
    return sweep_figure(
        trace.frequency, trace.raw, trace.corrected, trace.u, head, fit, flags=trace.flags
    )


def panel(fig, key):
    """The Axes whose corrected line carries ``gid`` corrected:<key>."""
    for ax in fig.axes:
        if any(line.get_gid() == f"corrected:{key}" for line in ax.lines):
            return ax
    raise AssertionError(f"no panel shows {key}")


def corrected_lines(ax):
    return [line for line in ax.lines if str(line.get_gid()).startswith("corrected:")]


def vertical_lines(ax):
    return [
        float(line.get_xdata()[0])
        for line in ax.lines
        if len(line.get_xdata()) == 2 and line.get_xdata()[0] == line.get_xdata()[1]
    ]


def test_the_pictures_are_png_files_of_the_stated_size(store):
    # PNG, ISO/IEC 15948:2004: the 8-byte signature (5.2), then IHDR first (11.2.2), whose data
    # begin with the width and the height as 4-byte big-endian integers.
    pictures = sweep_figures(store, [1])
    assert [name for name, _ in pictures] == ["sweep-1.png"]
    data = pictures[0][1]
    assert data[:8] == PNG_SIGNATURE
    length, kind = struct.unpack(">I4s", data[8:16])
    assert (length, kind) == (13, b"IHDR")
    width, height = struct.unpack(">II", data[16:24])
    assert (width, height) == (round(FIGURE_SIZE[0] * DPI), round(FIGURE_SIZE[1] * DPI))


def test_the_corrected_ls_line_is_the_stored_reactance_over_omega(store):
    # Series inductance Ls = X/ω (standard circuit theory; acquire.impedance's definition):
    # the line holds every stored point with X > 0 (the log axis shows only those).
    f, z, _, _ = stored(store)
    (line,) = corrected_lines(panel(figure_of(store), "Ls"))
    x, y = np.asarray(line.get_xdata(), float), np.asarray(line.get_ydata(), float)
    by_hand = np.where(z.imag > 0, z.imag / (2 * math.pi * f), np.nan)
    np.testing.assert_array_equal(x, f)
    np.testing.assert_allclose(y, by_hand, rtol=1e-12)
    np.testing.assert_allclose(y, np.where(z.imag > 0, quantities(f, z)["Ls"], np.nan), rtol=0)
    assert np.count_nonzero(np.isfinite(y)) > 0.8 * f.size


def test_the_resonance_line_stands_where_the_reactance_changes_sign(store):
    f, z, _, _ = stored(store)
    found = self_resonance(f, z)
    assert found is not None
    fig = figure_of(store)
    for ax in (panel(fig, key) for key in ("Ls", "Rs", "Q", "Z", "theta")):
        assert vertical_lines(ax) == [found]
    # Between the two stored points where X turns from inductive to capacitive...
    turn = np.flatnonzero((z.imag[:-1] > 0) & (z.imag[1:] <= 0))
    assert any(f[i] <= found <= f[i + 1] for i in turn)
    # ...and at the resonance of the simulated coil's own L and C, f = 1/(2π√(LC)) (the
    # Thomson formula of any circuit textbook), within 1 % (meter noise, 101 log points).
    coil = tomllib.loads((ROOT / "sim_profiles" / "demo-coil.toml").read_text())
    lc = 1 / (2 * math.pi * math.sqrt(coil["inductance"] * coil["capacitance"]))
    assert found == pytest.approx(lc, rel=0.01)


def test_the_ls_band_is_u_of_x_over_omega(store):
    # U(Ls) = U(X)/ω exactly, since Ls = X/ω with ω exact (JCGM 100:2008, 5.1.2 with a
    # sensitivity coefficient of 1/ω); the band is Ls ± U(Ls).
    f, z, _, u_x = stored(store)
    ax = panel(figure_of(store), "Ls")
    fills = [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert len(fills) == 1
    vertices = np.concatenate([p.vertices for p in fills[0].get_paths()])
    ls, expected = z.imag / (2 * math.pi * f), u_x / (2 * math.pi * f)
    checked = 0
    for fi, li, ui in zip(f, ls, expected, strict=True):
        if not (np.isfinite(ui) and li - ui > 0):
            continue
        ys = vertices[np.isclose(vertices[:, 0], fi, rtol=1e-12, atol=0), 1]
        assert (ys.max() - ys.min()) / 2 == pytest.approx(ui, rel=1e-9)
        assert (ys.max() + ys.min()) / 2 == pytest.approx(li, rel=1e-9)
        checked += 1
    assert checked > 0.8 * f.size


def test_points_flagged_in_the_store_are_marked(store):
    flags = store.sweep_points(1)["flags"].to_numpy()
    f, _, _, _ = stored(store)
    ax = panel(figure_of(store), "Ls")
    marks = [
        line for line in ax.lines if line.get_marker() == "o" and line.get_linestyle() == "None"
    ]
    assert len(marks) == 1
    np.testing.assert_array_equal(marks[0].get_xdata(), f[flags != ""])
    assert "beyond-accuracy" in marks[0].get_label()


def test_the_fitted_circuit_is_dashed_and_finds_the_simulated_inductance(store):
    # The simulated coil is 344 µH at low frequency (sim_profiles/demo-coil.toml); the dashed
    # line of its fitted circuit starts there, within 1 %.
    from acquire.report.sweep_pictures import fit_points

    trace, _ = read_trace(store, 1)
    assert trace.corrected is not None
    fit, why = fit_points(trace.frequency, trace.corrected, trace.u)
    assert fit is not None, why
    ax = panel(figure_of(store, fit=fit), "Ls")
    dashed = [line for line in ax.lines if line.get_label() == "fitted equivalent circuit"]
    assert len(dashed) == 1 and dashed[0].get_linestyle() == "--"
    assert dashed[0].get_ydata()[0] == pytest.approx(344e-6, rel=0.01)


def test_two_sweeps_overlaid_have_two_corrected_lines_per_panel(store):
    pictures = sweep_figures(store, [1, 2])
    assert [n for n, _ in pictures] == ["sweep-1.png", "sweep-2.png", "sweeps-1-2.png"]
    assert all(data[:8] == PNG_SIGNATURE for _, data in pictures)
    fig = overlay_figure([read_trace(store, i)[0] for i in (1, 2)], "two")
    for key in ("Ls", "Rs", "Q", "Z", "theta"):
        lines = corrected_lines(panel(fig, key))
        assert len(lines) == 2
        # No colour carries meaning alone: the two differ in line style and in marker.
        assert lines[0].get_linestyle() != lines[1].get_linestyle()
        assert lines[0].get_marker() != lines[1].get_marker()
    labels = [t.get_text() for t in fig.legends[0].get_texts()] if fig.legends else []
    labels += [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().texts]
    assert any(t.startswith("sweep 1: demo-coil") for t in labels)
    assert any(t.startswith("sweep 2: demo-coil, second sample") for t in labels)


def test_a_sweep_without_correction_is_drawn_raw_without_band(store):
    fig = figure_of(store, 3)
    ax = panel(fig, "Ls")
    assert not [c for c in ax.collections if isinstance(c, PolyCollection)]
    (line,) = corrected_lines(ax)
    assert "raw" in line.get_label()


def test_sweeps_that_cannot_be_drawn_are_refused(store):
    with pytest.raises(StoreError, match="no sweep 99"):
        sweep_figures(store, [99])
    with pytest.raises(InputError, match="no stored points"):
        sweep_figures(store, [4])
    with pytest.raises(InputError, match="no sweep ids"):
        sweep_figures(store, [])


def test_tick_labels_carry_si_prefixes_and_units():
    # SI Brochure, 9th edition: prefixes of Table 7; a space between the number and the unit
    # (section 5.4.3). A quantity of dimension one (Q) is a plain number.
    assert tick_text(1e3, "Hz") == "1 kHz"
    assert tick_text(1e7, "Hz") == "10 MHz"
    assert tick_text(3e-4, "H") == "300 µH"
    assert tick_text(2.5e-3, "H") == "2.5 mH"
    assert tick_text(100.0, "Ω") == "100 Ω"
    assert tick_text(0.1, "") == "0.1"
    assert tick_text(1e4, "") == "10000"


def test_a_figure_is_drawn_without_pyplot_or_a_display():
    # A series R-L with a parallel C (standard circuit theory), drawn in a fresh interpreter:
    # pyplot's global state is never loaded.
    code = (
        "import sys, numpy as np\n"
        "from acquire.report.sweep_pictures import sweep_figure, png_bytes\n"
        "f = np.geomspace(1e3, 1e7, 60); w = 2 * np.pi * f\n"
        "z = 1 / (1 / (2 + 1j * w * 1e-4) + 1j * w * 10e-12)\n"
        "u = np.column_stack([np.full(60, 0.01), np.full(60, 0.01)])\n"
        "data = png_bytes(sweep_figure(f, z, z, u, 'synthetic'))\n"
        "assert data[:4] == b'\\x89PNG'\n"
        "assert 'matplotlib.pyplot' not in sys.modules\n"
    )
    env = {"MPLBACKEND": "", "DISPLAY": "", "PATH": "/usr/bin:/bin"}
    done = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
