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
import importlib.util
import io
import re
import sqlite3
import struct
import sys
import types
from dataclasses import dataclass, field
from datetime import datetime
from functools import cache

import numpy as np
import pytest
from rich.console import Console

# ---------------------------------------------------------------------------------------------
# A private stand-in for helper "stats"'s acquire.report.statistics / control and helper
# "sweeppics"'s acquire.report.sweep_pictures, written in parallel with this module. It is
# installed only when the real module is missing, so once they are merged it is never used
# (and the integrator may delete it). It follows the contract's names and fields.
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _LotFilter:
    lot: str | None = None
    since: datetime | None = None
    until: datetime | None = None
    station: str | None = None
    plan_hash: str | None = None


@dataclass(frozen=True)
class _Quantity:
    parameter: str
    frequency: float | None
    unit: str
    count: int
    valid: int
    passed: int
    mean: float
    std: float
    minimum: float
    maximum: float
    tolerance_low: float | None = None
    tolerance_high: float | None = None
    acceptance_low: float | None = None
    acceptance_high: float | None = None
    sigma_within: float = float("nan")
    cp: float = float("nan")
    cpk: float = float("nan")
    pp: float = float("nan")
    ppk: float = float("nan")


@dataclass(frozen=True)
class _LotStatistics:
    filter: _LotFilter
    units: int
    attempts: int
    passed: int
    first_pass: int
    yield_: float
    first_pass_yield: float
    bins: dict = field(default_factory=dict)
    failing: dict = field(default_factory=dict)
    quantities: tuple = ()


@dataclass(frozen=True, eq=False)
class _ControlChart:
    values: np.ndarray
    center: float
    sigma: float
    ucl: float
    lcl: float
    moving_range: np.ndarray
    mr_center: float
    mr_ucl: float
    broken: tuple = ()


def _stand_in_rows(store, filter):
    import pandas as pd

    sql = (
        "SELECT u.serial, u.attempt, u.finished_at, u.outcome, u.bin, m.parameter, m.frequency, "
        "m.si_unit, m.value, m.uncertainty, m.low_limit, m.high_limit, m.tolerance_low, "
        "m.tolerance_high, m.verdict FROM units u JOIN lots l ON l.id = u.lot_id "
        "LEFT JOIN measurements m ON m.unit_id = u.id WHERE l.name = ? "
        "ORDER BY u.finished_at, u.id, m.seq"
    )
    with sqlite3.connect(store.path) as conn:
        return pd.read_sql_query(sql, conn, params=(filter.lot,))


def _stand_in_series(store, filter, parameter, frequency):
    rows = _stand_in_rows(store, filter)
    f = 0.0 if frequency is None else frequency
    rows = rows[(rows.parameter == parameter) & (rows.frequency == f)]
    columns = ["serial", "attempt", "finished_at", "value", "uncertainty", "low_limit"]
    columns += ["high_limit", "tolerance_low", "tolerance_high", "verdict"]
    return rows[columns].reset_index(drop=True).astype({"value": float})


def _stand_in_statistics(store, filter):
    rows = _stand_in_rows(store, filter)
    units = rows.drop_duplicates(["serial", "attempt"])
    latest = units.sort_values("attempt").groupby("serial").tail(1)
    first = units[units.attempt == 1]
    quantities = []
    for (p, f, unit), g in rows.dropna(subset=["parameter"]).groupby(
        ["parameter", "frequency", "si_unit"]
    ):
        v = g.value.to_numpy(dtype=float)
        quantities.append(
            _Quantity(
                p,
                None if f == 0 else float(f),
                unit,
                len(v),
                len(v),
                int((g.verdict == "pass").sum()),
                v.mean(),
                v.std(ddof=1),
                v.min(),
                v.max(),
            )  # fmt: skip
        )
    n = latest.serial.nunique()
    passed = int((latest.outcome == "pass").sum())
    fp = int((first.outcome == "pass").sum())
    return _LotStatistics(
        filter, n, len(units), passed, fp, passed / n, fp / n,
        latest.bin.value_counts().to_dict(), {}, tuple(quantities),
    )  # fmt: skip


def _stand_in_chart(values):
    """Individuals chart, NIST/SEMATECH e-Handbook 6.3.2 (d2 = 1.128, D4 = 3.267); beyond 3
    sigma only (Western Electric rule 1)."""
    v = np.asarray(values, dtype=float)
    mr = np.abs(np.diff(v))
    sigma = mr.mean() / 1.128
    c = v.mean()
    broken = tuple((int(i), "beyond 3 sigma") for i in np.flatnonzero(np.abs(v - c) > 3 * sigma))
    return _ControlChart(v, c, sigma, c + 3 * sigma, c - 3 * sigma, mr, mr.mean(),
                         3.267 * mr.mean(), broken)  # fmt: skip


def _stand_in_sweep_figures(store, ids):
    from acquire.report import look

    out = []
    for i in ids:
        points = store.sweep_points(i)
        with look.styled():
            figure = look.new_figure()
            ax = figure.add_subplot()
            ax.semilogx(points["frequency"], points["corrected_x"], **look.LINES["data"])
            out.append((f"sweep-{i}.png", look.png_bytes(figure)))
    return out


def install_stand_ins() -> list[str]:
    """Put the stand-ins in sys.modules where the real modules are missing; their names."""
    parts = {
        "acquire.report.statistics": {
            "LotFilter": _LotFilter,
            "QuantityStatistics": _Quantity,
            "LotStatistics": _LotStatistics,
            "lot_statistics": _stand_in_statistics,
            "quantity_series": _stand_in_series,
        },
        "acquire.report.control": {
            "ControlChart": _ControlChart,
            "individuals_chart": _stand_in_chart,
        },
        "acquire.report.sweep_pictures": {"sweep_figures": _stand_in_sweep_figures},
    }
    installed = []
    for name, members in parts.items():
        if name in sys.modules or importlib.util.find_spec(name) is not None:
            continue
        module = types.ModuleType(name)
        module.__dict__.update(members)
        sys.modules[name] = module
        installed.append(name)
    return installed


install_stand_ins()

from acquire.report.control import individuals_chart  # noqa: E402
from acquire.report.statistics import LotFilter, quantity_series  # noqa: E402

from acquire.report import look  # noqa: E402
from acquire.report.lot_pictures import (  # noqa: E402
    control_figure,
    histogram_figure,
    lot_figures,
)
from acquire.report.page import Html, write_report  # noqa: E402

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
