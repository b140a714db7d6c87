"""A lot's yield over time as inline SVG, drawn on the server: our own plain look.

The final yield after each attempt (see :func:`acquire.web.overview.cumulative_yield`) as a
stepped line over the time the lot has run; the axis runs from 0 % to 100 %, with faint lines at
50 % and 90 %, the start and the latest time below. Colours come from the page's style sheet
(classes only, no inline style), so the picture follows the page's look.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime
from html import escape

import numpy as np

#: The drawing's size in SVG units (it scales to the width of its box).
WIDTH, HEIGHT = 640.0, 220.0
#: Room for the labels: left, right, top, bottom.
LEFT, RIGHT, TOP, BOTTOM = 70.0, 16.0, 14.0, 40.0
#: At most this many steps are drawn (a long lot is thinned evenly, the last point kept).
MAX_POINTS = 400


def _thin(count: int) -> np.ndarray:
    if count <= MAX_POINTS:
        return np.arange(count)
    return np.unique(np.linspace(0, count - 1, MAX_POINTS).round().astype(int))


def _clock(t: datetime, seconds: bool) -> str:
    return t.astimezone().strftime("%H:%M:%S" if seconds else "%H:%M")


def yield_picture(times: Sequence[datetime], yields: np.ndarray, title: str) -> str:
    """SVG of ``yields`` (fractions) at ``times``; ``title`` (escaped here) names it for
    screen readers. Without points, a frame saying that nothing was tested yet."""
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    parts = [
        f'<svg class="yield-picture" viewBox="0 0 {WIDTH:g} {HEIGHT:g}" role="img" '
        f'aria-label="{escape(title)}" xmlns="http://www.w3.org/2000/svg">',
        f"<title>{escape(title)}</title>",
        f'<rect class="frame" x="{LEFT:g}" y="{TOP:g}" width="{plot_w:g}" height="{plot_h:g}"/>',
    ]
    for level in (0.0, 0.5, 0.9, 1.0):
        y = TOP + plot_h * (1 - level)
        kind = "grid" if 0 < level < 1 else "edge"
        parts.append(
            f'<line class="{kind}" x1="{LEFT:g}" x2="{WIDTH - RIGHT:g}" y1="{y:.1f}" y2="{y:.1f}"/>'
        )
        at = f'x="{LEFT - 8:g}" y="{y + 6:.1f}"'
        parts.append(f'<text class="axis" {at} text-anchor="end">{level:.0%}</text>')
    if len(times) == 0:
        parts.append(
            f'<text class="axis" x="{LEFT + plot_w / 2:g}" y="{TOP + plot_h / 2:g}" '
            'text-anchor="middle">no units yet</text></svg>'
        )
        return "".join(parts)
    seconds = np.array([(t - times[0]).total_seconds() for t in times])
    span = max(float(seconds[-1]), 1.0)
    keep = _thin(len(times))
    xs = LEFT + plot_w * seconds[keep] / span
    ys = TOP + plot_h * (1 - np.asarray(yields, dtype=float)[keep])
    steps = [f"{xs[0]:.1f},{ys[0]:.1f}"]
    for k in range(1, len(keep)):
        steps.append(f"{xs[k]:.1f},{ys[k - 1]:.1f} {xs[k]:.1f},{ys[k]:.1f}")
    parts.append(f'<polyline class="yield-line" points="{" ".join(steps)}"/>')
    parts.append(f'<circle class="yield-end" cx="{xs[-1]:.1f}" cy="{ys[-1]:.1f}" r="5"/>')
    bottom, short = HEIGHT - 12, span < 600
    parts.append(f'<text class="axis" x="{LEFT:g}" y="{bottom:g}">{_clock(times[0], short)}</text>')
    parts.append(
        f'<text class="axis" x="{WIDTH - RIGHT:g}" y="{bottom:g}" text-anchor="end">'
        f"{_clock(times[-1], short)}</text></svg>"
    )
    return "".join(parts)
