"""Lot pictures and the report page: PNG files as the PNG specification defines them, limit
lines at the stored limits, rule-breaking points marked, and a self-contained, escaped page.

Sources named beside the checks: the PNG signature and IHDR layout from the PNG specification
(ISO/IEC 15948:2004, sections 5.2 "PNG signature" and 11.2.2 "IHDR Image header"); data URIs
from RFC 2397; base64 from RFC 4648; HTML escaping from the HTML Living Standard (the five
characters html.escape replaces). The limits are read from the SQLite file with the standard
library's sqlite3, not through the code under test.
"""

from __future__ import annotations

import base64
import io
import re
import sqlite3
import struct
from functools import cache

import numpy as np
import pytest
from rich.console import Console

from acquire.report import look
from acquire.report.control import individuals_chart
from acquire.report.lot_pictures import (
    control_figure,
    histogram_figure,
    lot_figures,
)
from acquire.report.page import Html, write_report
from acquire.report.statistics import LotFilter, quantity_series

LOT = "DEMO-LOT-1"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948:2004, 5.2


def png_size(data: bytes) -> tuple[int, int]:
    """Width and height from the IHDR chunk (ISO/IEC 15948:2004, 11.2.2): after the 8-byte
    signature, a 4-byte length (13), the type b"IHDR", then width and height as big-endian
    unsigned 32-bit integers."""
    assert data[:8] == PNG_SIGNATURE
    length, kind, width, height = struct.unpack(">I4sII", data[8:24])
    assert (length, kind) == (13, b"IHDR")
    return width, height


@cache
def demo_store(folder: str) -> str:
    from acquire.demo import run_demo

    url = f"sqlite:///{folder}/demo.db"
    run_demo(url, live=False, points=101, measure_time=0, console=Console(file=io.StringIO()))
    return url


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return demo_store(str(tmp_path_factory.mktemp("demo")))


def stored_limits(url: str, parameter: str, frequency: float) -> dict[str, list[float]]:
    """The limits stored for one quantity of the demo lot, read with sqlite3."""
    sql = (
        "SELECT m.low_limit, m.high_limit, m.tolerance_low, m.tolerance_high FROM measurements m "
        "JOIN lots l ON l.id = m.lot_id WHERE l.name = ? AND m.parameter = ? AND m.frequency = ?"
    )
    with sqlite3.connect(url.removeprefix("sqlite:///")) as conn:
        rows = conn.execute(sql, (LOT, parameter, frequency)).fetchall()
    names = ("low_limit", "high_limit", "tolerance_low", "tolerance_high")
    return {n: [r[i] for r in rows if r[i] is not None] for i, n in enumerate(names)}


def test_the_lot_pictures_are_png_files_of_the_figures_size(demo):
    from acquire.store import open_store

    with open_store(demo) as store:
        figures = lot_figures(store, LotFilter(lot=LOT))
    names = [n for n, _ in figures]
    # the demo plan judges Ls at 1, 10 and 100 kHz, Rs at 10 kHz, Q at three frequencies and
    # Rdc (acquire/examples/coil-plan.toml): a histogram and a control chart for each
    assert len(names) == 16 and len(set(names)) == 16
    assert "lot-Ls-10kHz-histogram.png" in names and "lot-Rdc-DC-control.png" in names
    for name, data in figures:
        size = look.TALL if name.endswith("control.png") else look.WIDE
        assert png_size(data) == (round(size[0] * look.DPI), round(size[1] * look.DPI)), name


@pytest.mark.parametrize(("parameter", "frequency"), [("Ls", 1e4), ("Rdc", 0.0), ("Q", 1e5)])
def test_the_histograms_limit_lines_sit_at_the_stored_limits(demo, parameter, frequency):
    from acquire.store import open_store

    with open_store(demo) as store:
        series = quantity_series(store, LotFilter(lot=LOT), parameter, frequency or None)
    unit = {"Ls": "H", "Rdc": "Ω", "Q": ""}[parameter]
    figure = histogram_figure(series, parameter, unit, "title")
    ax = figure.axes[0]
    lines = {
        kind: sorted(line.get_xdata()[0] for line in ax.lines if line.get_gid() == kind)
        for kind in ("tolerance", "acceptance")
    }
    stored = stored_limits(demo, parameter, frequency)
    # tolerance limits are the plan's: one value per side; acceptance limits follow each
    # unit's uncertainty and are drawn at the median of those applied
    want_tolerance = sorted({*stored["tolerance_low"], *stored["tolerance_high"]})
    want_acceptance = sorted(
        float(np.median(stored[k])) for k in ("low_limit", "high_limit") if stored[k]
    )
    assert lines["tolerance"] == pytest.approx(want_tolerance, rel=1e-12)
    assert lines["acceptance"] == pytest.approx(want_acceptance, rel=1e-12)
    # every stored value is counted once in the bars
    heights = sum(p.get_height() for p in ax.patches)
    assert heights == len(stored["tolerance_low"] or stored["tolerance_high"])


def test_a_point_breaking_a_rule_is_ringed_and_labelled():
    import pandas as pd

    # 20 values alternating about 1.0 mH with one far outlier at position 12: the moving
    # ranges make sigma small, so the outlier lies beyond 3 sigma (Western Electric
    # Statistical Quality Control Handbook (1956), rule 1)
    values = np.array([1.000e-3 + (1e-6 if i % 2 else -1e-6) for i in range(20)])
    values[12] = 1.02e-3
    series = pd.DataFrame({"value": values, "attempt": [1] * 20})
    chart = individuals_chart(values)
    assert any(i == 12 for i, _ in chart.broken)
    figure = control_figure(series, chart, "Ls", "H", "title")
    top = figure.axes[0]
    ringed = [line for line in top.lines if line.get_gid() == "broken"]
    assert len(ringed) == 1
    points = sorted({i for i, _ in chart.broken})
    assert list(ringed[0].get_xdata()) == [i + 1 for i in points]
    assert list(ringed[0].get_ydata()) == list(values[points])
    labels = [t.get_text() for t in top.texts]
    assert "1" in labels  # rule number 1, beyond 3 sigma, beside the point
    centers = [line.get_ydata()[0] for line in top.lines if line.get_gid() == "center"]
    assert centers == [pytest.approx(chart.center)]


def data_uris(page: str) -> list[bytes]:
    """The bytes of each ``<img src="data:image/png;base64,...">`` (RFC 2397, RFC 4648)."""
    return [base64.b64decode(m) for m in re.findall(r'src="data:image/png;base64,([^"]+)"', page)]


def test_the_page_embeds_every_picture_and_escapes_names(tmp_path):
    with look.styled():
        figure = look.new_figure()
        figure.add_subplot().plot([1, 2], [3, 4])
        first = look.png_bytes(figure)
        figure.axes[0].plot([1, 2], [4, 3])
        second = look.png_bytes(figure)
    hostile = "<b>&x</b>"
    sections = [
        (f"lot {hostile}", [("a.png", first), (f"{hostile}.png", second)], f"text {hostile}"),
        ("second", [], Html("<table><tr><td>kept</td></tr></table>")),
    ]
    path = write_report(tmp_path / "out", f"report {hostile}", sections)
    page = path.read_text(encoding="utf-8")
    assert path.name == "report.html"
    assert data_uris(page) == [first, second]
    assert hostile not in page
    # html.escape's replacements (HTML Living Standard: &, <, > and quotes)
    assert "&lt;b&gt;&amp;x&lt;/b&gt;" in page
    assert "<td>kept</td>" in page
    assert "<script" not in page and "http" not in page.replace("http-equiv", "")
    written = sorted(p.name for p in path.parent.glob("*.png"))
    assert len(written) == 2
    assert {p.read_bytes() for p in path.parent.glob("*.png")} == {first, second}


def test_a_figure_keeps_its_values_in_si_units_and_labels_the_prefix():
    with look.styled():
        figure = look.new_figure()
        ax = figure.add_subplot()
        ax.plot([1e3, 1e4], [344e-6, 346e-6])
        look.si_axis(ax.yaxis, "Ls", "H", [344e-6, 346e-6])
        figure.canvas.draw()
    assert ax.get_ylabel() == "Ls [µH]"
    assert list(ax.lines[0].get_ydata()) == [344e-6, 346e-6]
    shown = [t.get_text() for t in ax.get_yticklabels() if t.get_text()]
    # the ticks read in microhenry: between 343 and 347 (SI Brochure, 9th edition, Table 7: µ)
    assert shown and all(343 <= float(t.replace("\u2212", "-")) <= 347 for t in shown)


def test_pictures_leave_matplotlibs_settings_as_they_were():
    import matplotlib

    before = dict(matplotlib.rcParams)
    with look.styled():
        assert matplotlib.rcParams["font.size"] == look.STYLE["font.size"]
    assert dict(matplotlib.rcParams) == before
