"""The line overview as HTML, rendered on the server.

Every name that comes from the store (station, operator, lot, plan, serial, bin, reason, the
reference and check-standard problems) passes through :func:`html.escape` before it is put in
the page, text or attribute alike, so markup in a name is shown as text and never runs. The
page holds no inline script or style: ``/line.js`` and ``/line.css`` come from the same server,
and the response's Content-Security-Policy allows nothing else.
"""

from __future__ import annotations

import math
from datetime import datetime
from html import escape

from acquire.web.overview import LineOverview, LotView, StationView
from acquire.web.picture import yield_picture

#: Seconds between the page's requests for fresh content (``line.js`` reads it from the page).
REFRESH_S = 2.0


def percent(value: float) -> str:
    """A yield for people: one decimal, "—" when there is none."""
    return "—" if math.isnan(value) else f"{value:.1%}"


def _time(t: datetime) -> str:
    return t.astimezone().strftime("%H:%M:%S")


def _field(label: str, value: str, kind: str = "") -> str:
    shown = escape(value) if value else "—"
    label = f'<span class="label">{label}</span>'
    return f'<div class="field field-{kind}">{label} <span class="value">{shown}</span></div>'


def _big(label: str, kind: str, value: str) -> str:
    label = f'<span class="label">{label}</span>'
    return f'<div class="big">{label} <span class="{kind}">{value}</span></div>'


def _recent(view: StationView) -> str:
    if not view.recent:
        return '<p class="recent none">no units yet</p>'
    items = []
    for unit in view.recent:
        outcome = unit.outcome if unit.outcome in ("pass", "fail", "error") else "other"
        again = f" (#{unit.attempt})" if unit.attempt > 1 else ""
        bin_ = f' <span class="bin">{escape(unit.bin)}</span>' if unit.bin else ""
        items.append(
            f'<li class="unit {outcome}"><span class="serial">{escape(unit.serial)}{again}</span>'
            f' <span class="outcome">{escape(unit.outcome.upper())}</span>{bin_}</li>'
        )
    return f'<ol class="recent">{"".join(items)}</ol>'


def _problems(view: StationView) -> str:
    lines = []
    if view.state.references:
        lines.append(f"<p>references: {escape(view.state.references)}</p>")
    if view.state.check_standard:
        lines.append(f"<p>check standard: {escape(view.state.check_standard)}</p>")
    return f'<div class="problems">{"".join(lines)}</div>' if lines else ""


def station_card(view: StationView, now: datetime) -> str:
    """One station's card."""
    s = view.state
    shown = view.shown_state
    why = s.reason
    if view.silent:
        quiet = int((now - s.updated_at).total_seconds())
        why = f"no word for {quiet} s (last: {s.state}{', ' + s.reason if s.reason else ''})"
    reason = f'<p class="reason">{escape(why)}</p>' if why else ""
    yield_ = "" if math.isnan(view.yield_) else f"{view.yield_:.6f}"
    return (
        f'<section class="station {shown}" data-station="{escape(s.station)}" '
        f'data-tested="{view.tested}" data-passed="{view.passed}" data-yield="{yield_}">'
        f'<header><h2 class="name">{escape(s.station)}</h2>'
        f'<span class="state">{shown.upper()}</span></header>{reason}'
        '<div class="numbers">'
        + _big("yield", "yield", percent(view.yield_))
        + _big("tested", "tested", str(view.tested))
        + _big("passed", "passed", str(view.passed))
        + "</div>"
        + '<div class="fields">'
        + _field("lot", s.lot, "lot")
        + _field("plan", s.plan, "plan")
        + _field("operator", s.operator, "operator")
        + "</div>"
        + _problems(view)
        + _recent(view)
        + f'<p class="updated">state of {_time(s.updated_at)} from {escape(s.host)}</p>'
        "</section>"
    )


def lot_panel(view: LotView) -> str:
    """One lot's yield and its yield-over-time picture."""
    title = f"final yield of lot {view.lot} over time"
    yield_ = "" if math.isnan(view.yield_) else f"{view.yield_:.6f}"
    return (
        f'<section class="lot" data-lot="{escape(view.lot)}" data-yield="{yield_}">'
        f'<h2>lot <span class="name">{escape(view.lot)}</span></h2>'
        f'<p class="lot-numbers"><span class="yield">{percent(view.yield_)}</span> final yield, '
        f"{view.passed} of {view.serials} units, all stations</p>"
        f"{yield_picture(view.times, view.yields, title)}</section>"
    )


def render_main(overview: LineOverview) -> str:
    """The part of the page that refreshes: stations, then lots."""
    now = overview.read_at
    if overview.stations:
        cards = "".join(station_card(v, now) for v in overview.stations)
    else:
        cards = '<p class="empty">no station has reported to this store yet</p>'
    lots = "".join(lot_panel(v) for v in overview.lots)
    return (
        f'<div class="stations">{cards}</div><div class="lots">{lots}</div>'
        f'<p class="read-at" data-read-at="{overview.read_at.isoformat()}">read at '
        f"{_time(now)} (this computer's local time)</p>"
    )


def render_problem(message: str) -> str:
    """What the refreshing part shows when the store cannot be read."""
    return f'<p class="store-problem">the store cannot be read: {escape(message)}</p>'


def render_page(main: str, store_shown: str) -> str:
    """The whole page around ``main`` (from :func:`render_main` or :func:`render_problem`)."""
    return (
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        "<title>Line overview</title>"
        '<link rel="stylesheet" href="/line.css"><script src="/line.js" defer></script></head>'
        f'<body data-refresh="{REFRESH_S:g}"><header class="top"><h1>Line overview</h1>'
        f'<p class="store">{escape(store_shown)} · read only</p></header>'
        f'<main id="main">{main}</main></body></html>'
    )
