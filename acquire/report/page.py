"""The report page: one self-contained HTML file with its pictures embedded, and the sections
that go on it (a lot's statistics and pictures, sweeps' pictures).

:func:`write_report` writes each picture as a PNG file beside ``report.html`` and also embeds it
in the page as a ``data:image/png;base64,...`` URI (RFC 2397), so the page alone can be mailed or
archived and still shows everything: it loads nothing from anywhere. Every name that reaches the
page (title, headings, lot and DUT names, file names) is escaped with :func:`html.escape`; a
section's text is escaped too unless it is :class:`Html` (as :func:`table` and :func:`paragraph`
make it, escaping each cell).
"""

from __future__ import annotations

import base64
import html
import math
import os
import re
from collections.abc import Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from acquire.units import format_si, si_prefix

if TYPE_CHECKING:
    from acquire.report.statistics import LotFilter, LotStatistics

#: A section of the page: heading, pictures as (file name, PNG bytes), and text or :class:`Html`.
Section = tuple[str, list[tuple[str, bytes]], str]

PAGE_NAME = "report.html"

_STYLE = """
body { font-family: "DejaVu Sans", Arial, sans-serif; color: #000; background: #fff;
       margin: 2em auto; max-width: 64em; padding: 0 1em; line-height: 1.4; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; border-bottom: 1px solid #808080; }
figure { margin: 1em 0; } figure img { max-width: 100%; height: auto; border: 1px solid #e4e4e4; }
figcaption { font-size: 0.85em; color: #404040; }
table { border-collapse: collapse; font-size: 0.9em; margin: 0.5em 0; }
th, td { border: 1px solid #b0b0b0; padding: 0.2em 0.5em; text-align: right; }
th { background: #e4e4e4; } td:first-child, th:first-child { text-align: left; }
.made { color: #404040; font-size: 0.85em; }
"""


class Html(str):
    """Text the page puts in as it is: HTML whose names were already escaped."""


def escape(value: object) -> str:
    """``value`` as text safe anywhere in the page, attribute values included."""
    return html.escape(str(value), quote=True)


def paragraph(text: str) -> Html:
    """``text`` as one escaped paragraph."""
    return Html(f"<p>{escape(text)}</p>")


def table(header: Sequence[str], rows: Sequence[Sequence[object]], caption: str = "") -> Html:
    """A small table; every cell and heading escaped."""
    head = "".join(f"<th>{escape(h)}</th>" for h in header)
    body = "".join("<tr>" + "".join(f"<td>{escape(c)}</td>" for c in r) + "</tr>" for r in rows)
    cap = f"<caption>{escape(caption)}</caption>" if caption else ""
    return Html(f"<table>{cap}<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>")


def _file_name(name: str, taken: set[str]) -> str:
    """A safe, unused PNG file name made from ``name``."""
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "-", Path(name).stem).strip("-.") or "picture"
    candidate, n = f"{stem}.png", 1
    while candidate in taken:
        n += 1
        candidate = f"{stem}-{n}.png"
    taken.add(candidate)
    return candidate


def _figure(file_name: str, data: bytes) -> str:
    uri = "data:image/png;base64," + base64.b64encode(data).decode("ascii")
    name = escape(file_name)
    return f'<figure><img src="{uri}" alt="{name}"><figcaption>{name}</figcaption></figure>'


def write_report(out_dir: Path | str, title: str, sections: list[Section]) -> Path:
    """Write every section's PNGs and ``report.html`` to ``out_dir``; the page's path.

    PNG files are named after the pictures' own names (made safe, and numbered if two share a
    name); a file of the same name already in ``out_dir`` is replaced.
    """
    folder = Path(out_dir)
    folder.mkdir(parents=True, exist_ok=True)
    made = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{escape(title)}</title><style>{_STYLE}</style></head><body>",
        f"<h1>{escape(title)}</h1>",
        f'<p class="made">made {made} by acquire report</p>',
    ]
    taken: set[str] = {PAGE_NAME}
    for heading, pictures, text in sections:
        parts.append(f"<section><h2>{escape(heading)}</h2>")
        if text:
            parts.append(text if isinstance(text, Html) else str(paragraph(text)))
        for name, data in pictures:
            file_name = _file_name(name, taken)
            (folder / file_name).write_bytes(data)
            parts.append(_figure(file_name, data))
        parts.append("</section>")
    parts.append("</body></html>\n")
    page = folder / PAGE_NAME
    partial = folder / f".{PAGE_NAME}.{os.getpid()}.part"
    partial.write_text("\n".join(parts), encoding="utf-8")
    partial.replace(page)
    return page


def _ratio(value: float) -> str:
    return "—" if value is None or not math.isfinite(value) else f"{value:.2f}"


def value_text(value: float | None, unit: str, digits: int = 4) -> str:
    """``344.0 µH`` with an SI prefix; a number without a unit (Q) has no prefix."""
    if unit or value is None or not math.isfinite(value):
        return format_si(value, unit, digits)  # type: ignore[arg-type]
    return f"{value:.{digits}g}"


def quantity_text(parameter: str, frequency: float | None) -> str:
    """``Ls at 10 kHz``, or ``Rdc (DC)``."""
    if frequency is None:
        return f"{parameter} (DC)"
    scale, prefix = si_prefix(frequency)
    return f"{parameter} at {frequency / scale:.4g} {prefix}Hz"


def _limits(low: float | None, high: float | None, unit: str) -> str:
    show = [value_text(v, unit) if v is not None else "open" for v in (low, high)]
    return " to ".join(show) if (low, high) != (None, None) else "—"


def lot_text(statistics: LotStatistics) -> Html:
    """The lot's counts, yields and bins, and a table of its quantities' statistics."""
    from acquire.report.statistics import key_name

    s = statistics
    bins = ", ".join(f"{name or '(no bin)'}: {n}" for name, n in sorted(s.bins.items())) or "—"
    failing = ", ".join(f"{key_name(k)}: {n}" for k, n in sorted(s.failing.items())) or "none"
    counts = (
        f"{s.units} units in {s.attempts} attempts; passed (latest attempt per unit) "
        f"{s.passed}; first-pass yield {s.first_pass_yield:.1%}, final yield {s.yield_:.1%}. "
        f"Bins: {bins}. Failing quantities (latest attempts): {failing}."
    )
    header: tuple[str, ...] = (
        "quantity",
        "n",
        "mean",
        "std",
        "min",
        "max",
        "tolerance",
        "acceptance (median)",
    )
    header += ("Cp", "Cpk", "Pp", "Ppk")
    rows = []
    for q in s.quantities:
        u = q.unit
        rows.append(
            (quantity_text(q.parameter, q.frequency), q.count, value_text(q.mean, u),
             value_text(q.std, u, 3), value_text(q.minimum, u), value_text(q.maximum, u),
             _limits(q.tolerance_low, q.tolerance_high, q.unit),
             _limits(q.acceptance_low, q.acceptance_high, q.unit),
             _ratio(q.cp), _ratio(q.cpk), _ratio(q.pp), _ratio(q.ppk))
        )  # fmt: skip
    note = (
        "Statistics count every attempt's values in test order; yields and bins count each "
        "unit's latest attempt. Cp and Cpk use the within-lot sigma (average moving range / "
        "1.128), Pp and Ppk the overall standard deviation."
    )
    return Html(str(paragraph(counts)) + table(header, rows) + str(paragraph(note)))


def lot_section(store: Any, filter: LotFilter) -> Section:
    """The lot's heading, pictures and statistics."""
    from acquire.report.lot_pictures import lot_figures, selection_name
    from acquire.report.statistics import lot_statistics

    statistics = lot_statistics(store, filter)
    return selection_name(filter), lot_figures(store, filter), lot_text(statistics)


def sweep_section(store: Any, sweep_ids: Sequence[int]) -> Section:
    """The sweeps' heading, pictures and a table of what each sweep was."""
    from acquire.report.sweep_pictures import sweep_figures

    rows = []
    for i in sweep_ids:
        info = store.sweep_info(i)
        rows.append(
            (i, info.dut or "—", f"{info.started_at:%Y-%m-%d %H:%M:%S}", info.points,
             info.status, info.reference_set_id or "none")
        )  # fmt: skip
    header = ("sweep", "DUT", "started", "points", "status", "reference set")
    heading = ("sweep " if len(sweep_ids) == 1 else "sweeps ") + ", ".join(map(str, sweep_ids))
    return heading, sweep_figures(store, list(sweep_ids)), table(header, rows)
