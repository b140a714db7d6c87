"""Numbers and durations for people: SI prefixes, plain digits for Q and D, short durations.

Used by the live view, the plain progress lines, the end summary and the commands' tables;
values come in SI units and leave as text, so nothing here changes a number.
"""

from __future__ import annotations

import math

from acquire.units import format_si

#: The SI unit of each quantity of :func:`acquire.impedance.quantities`.
UNITS = {
    "Ls": "H", "Lp": "H", "Rs": "Ω", "Rp": "Ω", "Cs": "F", "Cp": "F", "Q": "", "D": "",
    "Z": "Ω", "theta": "°", "X": "Ω", "G": "S", "B": "S",
}  # fmt: skip


def format_value(name: str, value: float) -> str:
    """One quantity for people: SI prefixes for dimensioned values, plain digits for Q, D, θ."""
    if name == "theta":
        return "—" if not math.isfinite(value) else f"{value:.2f}°"
    if name in ("Q", "D"):
        if math.isnan(value):
            return "—"
        if math.isinf(value):
            return "∞"
        return f"{value:.0f}" if abs(value) >= 1e4 else f"{value:.4g}"
    return format_si(value, UNITS.get(name, ""))


def format_duration(seconds: float | None) -> str:
    """``0.4 s``, ``12 s``, ``3 min 20 s``, ``2.0 h``, ``3.5 days``; ``—`` for None."""
    if seconds is None:
        return "—"
    s = max(float(seconds), 0.0)
    if s < 10:
        return f"{s:.1f} s"
    if s < 60:
        return f"{s:.0f} s"
    if s < 3600:
        return f"{int(s // 60)} min {int(s % 60)} s"
    if s < 86400 * 2:
        return f"{s / 3600:.1f} h"
    return f"{s / 86400:.1f} days"
