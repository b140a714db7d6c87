"""Printable forms of a prediction, a fit and their comparison: rich tables, plain text, JSON.

Every number is shown with its method and accuracy (predictions) or its 1σ uncertainty (fits);
a quantity that is not predicted or not determined shows the reason instead of a number.

Imports run one way: this module reads the result objects of :mod:`acquire.coil.predict` and
:mod:`acquire.coil.fitresult`; neither of them imports it back. A fit is only read through its
attributes, so :mod:`acquire.coil.fitresult` is imported for type checking alone.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any

from acquire.coil.predict import CoilGeometry, Estimate, Prediction
from acquire.units import format_si

if TYPE_CHECKING:
    from acquire.coil.fitresult import CoilFit, FittedValue

_SIGMA_FACTOR = 2.0


def _number(value: float, unit: str) -> str:
    if unit:
        return format_si(value, unit, 4)
    return f"{value:.4g}"


def _percent(fraction: float) -> str:
    pct = fraction * 100.0
    if pct == 0:
        return "0 %"
    digits = max(0, 1 - int(math.floor(math.log10(abs(pct)))))
    return f"{pct:.{min(digits, 4)}f} %"


def describe_geometry(g: CoilGeometry) -> str:
    """One line naming the geometry, e.g. for a table title."""
    layers = "1 layer" if g.layers == 1 else f"{g.layers} layers"
    parts = [
        f"{g.turns:g} turns",
        f"former {format_si(g.former_diameter, 'm')}",
        f"winding {format_si(g.length, 'm')}",
        f"wire {format_si(g.wire_diameter, 'm')}",
        layers,
        f"leads {format_si(g.lead_length, 'm')}",
        f"{g.temperature:g} °C",
    ]
    return ", ".join(parts)


def estimate_value(e: Estimate) -> str:
    """The predicted value as text (``—`` when not predicted)."""
    if e.value is None:
        return "not predicted"
    prefix = "≥ " if e.bound == "at least" else ""
    return prefix + _number(e.value, e.unit)


def estimate_accuracy(e: Estimate) -> str:
    """The accuracy column: ``± 5 %``, ``lower bound`` or blank."""
    if e.value is None:
        return ""
    if e.bound == "at least":
        return "lower bound"
    if e.bound == "geometry":
        return "geometric"
    if e.accuracy is None:
        return "not stated"
    return f"± {_percent(e.accuracy)}"


def estimate_record(e: Estimate) -> dict[str, Any]:
    """One estimate as the JSON record: name, label, value, unit, accuracy or bound, method."""
    method = "; ".join(filter(None, (e.method, e.note)))
    if e.bound == "geometry":
        method += "; follows from the geometry, no accuracy stated"
    return {
        "name": e.key,
        "label": e.label,
        "value": e.value,
        "unit": e.unit,
        "relative_accuracy": e.accuracy if e.value is not None else None,
        "lower_bound": e.value if e.bound == "at least" else None,
        "method": method,
    }


def prediction_json(prediction: Prediction) -> dict[str, Any]:
    """The prediction as a JSON-ready dict: ``{"command": "predict", "quantities": [...]}``."""
    return {
        "command": "predict",
        "quantities": [estimate_record(e) for e in prediction.estimates],
    }


def fitted_value(v: FittedValue) -> str:
    """The fitted value as text (``not determined`` when the data does not support one)."""
    return "not determined" if v.value is None else _number(v.value, v.unit)


def fitted_sigma(v: FittedValue) -> str:
    """The 1σ column: relative for dimensioned values, absolute for pure numbers."""
    if v.value is None or v.sigma is None:
        return ""
    if v.unit:
        rel = v.relative_sigma
        return "" if rel is None else f"± {_percent(rel)}"
    return f"± {v.sigma:.2g}"


def fit_summary(fit: CoilFit) -> str:
    """One line: points, range, resistance law, core loss, residual."""
    lo, hi = fit.frequency_range
    law = {
        "constant": "constant R",
        "skin": "R = Rdc·(1+(f/fc)²)^(n/2), n = 1/2",
        "power": "R = Rdc·(1+(f/fc)²)^(n/2), n free",
        "wire": "round wire (Bessel functions), proximity factor kp",
    }[fit.resistance_law]
    core = "with a core loss tangent" if fit.core_loss else "no core-loss term"
    return (
        f"{fit.points} points, {format_si(lo, 'Hz')} to {format_si(hi, 'Hz')}; {law}; {core}; "
        f"residual {_percent(fit.residual)} rms of |Z|"
    )


def prediction_table(prediction: Prediction):
    """A rich table: quantity, predicted value, accuracy, method (and why, where relevant)."""
    from rich.table import Table

    table = Table(title=f"Predicted from geometry: {describe_geometry(prediction.geometry)}")
    table.add_column("quantity")
    table.add_column("predicted", justify="right")
    table.add_column("accuracy", justify="right")
    table.add_column("method")
    for e in prediction.estimates:
        method = "\n".join(filter(None, (e.method, f"[dim]{e.note}[/dim]" if e.note else "")))
        table.add_row(e.label, estimate_value(e), estimate_accuracy(e), method)
    return table


def prediction_text(prediction: Prediction) -> str:
    """The prediction as plain text, two lines per quantity (value, then method and note)."""
    lines = [f"Predicted from geometry: {describe_geometry(prediction.geometry)}"]
    width = max(len(e.label) for e in prediction.estimates)
    for e in prediction.estimates:
        lines.append(f"  {e.label:<{width}}  {estimate_value(e):>14}  {estimate_accuracy(e)}")
        if e.method:
            lines.append(f"  {'':<{width}}  method: {e.method}")
        if e.note:
            lines.append(f"  {'':<{width}}  note:   {e.note}")
    return "\n".join(lines)


def fit_table(fit: CoilFit):
    """A rich table of the fitted circuit: quantity, value, 1σ, note."""
    from rich.table import Table

    table = Table(title="Equivalent circuit fitted to the sweep", caption=fit_summary(fit))
    table.add_column("quantity")
    table.add_column("fitted", justify="right")
    table.add_column("1σ", justify="right")
    table.add_column("note")
    for v in fit.values:
        table.add_row(f"{v.label} ({v.key})", fitted_value(v), fitted_sigma(v), v.note)
    for note in fit.notes:
        table.add_row("", "", "", f"[dim]{note}[/dim]")
    return table


def fit_text(fit: CoilFit) -> str:
    """The fit as plain text, one line per quantity, then the summary and notes."""
    lines = ["Equivalent circuit fitted to the sweep", f"  {fit_summary(fit)}"]
    width = max(len(v.label) + len(v.key) + 3 for v in fit.values)
    for v in fit.values:
        name = f"{v.label} ({v.key})"
        row = f"  {name:<{width}}  {fitted_value(v):>14}  {fitted_sigma(v):<10}"
        lines.append((row + ("  " + v.note if v.note else "")).rstrip())
    lines += [f"  note: {note}" for note in fit.notes]
    return "\n".join(lines)


_PAIRS = (("L", "L"), ("Rdc", "Rdc"), ("C", "Cp"), ("SRF", "SRF"))
_AGREEMENT = "agrees: |difference| ≤ √(accuracy² + (2σ)²); differs: by that many times"


def comparison_rows(prediction: Prediction, fit: CoilFit) -> list[tuple[str, str, str, str, str]]:
    """Rows of (quantity, predicted ± accuracy, fitted ± 1σ, difference, agreement)."""
    rows: list[tuple[str, str, str, str, str]] = []
    for pkey, fkey in _PAIRS:
        e, v = prediction.get(pkey), fit.get(fkey)
        predicted = estimate_value(e)
        if e.value is not None and e.accuracy is not None:
            predicted += f" ± {_percent(e.accuracy)}"
        fitted = fitted_value(v)
        if v.value is not None and v.relative_sigma is not None:
            fitted += f" ± {_percent(v.relative_sigma)}"
        if e.value is None or v.value is None:
            reason = "not predicted" if e.value is None else "not determined by the fit"
            rows.append((fkey, predicted, fitted, "", reason))
            continue
        diff = v.value / e.value - 1.0
        tolerance = math.hypot(e.accuracy or 0.0, _SIGMA_FACTOR * (v.relative_sigma or 0.0))
        if e.accuracy is None:
            verdict = "no accuracy stated"
        elif abs(diff) <= tolerance:
            verdict = "agrees"
        else:
            verdict = f"differs: {abs(diff) / tolerance:.1f}×"
        rows.append((fkey, predicted, fitted, f"{diff * 100:+.2f} %", verdict))
    return rows


def compare(prediction: Prediction, fit: CoilFit):
    """A rich table of predicted beside fitted values for L, Rdc, C and the self-resonance."""
    from rich.table import Table

    table = Table(title="Predicted from geometry beside fitted from the sweep", caption=_AGREEMENT)
    table.add_column("quantity")
    for name in ("predicted", "fitted", "difference"):
        table.add_column(name, justify="right", no_wrap=True)
    table.add_column("agreement")
    for row in comparison_rows(prediction, fit):
        table.add_row(*row)
    return table


def compare_text(prediction: Prediction, fit: CoilFit) -> str:
    """The comparison as aligned plain text."""
    rows = comparison_rows(prediction, fit)
    header = ("quantity", "predicted", "fitted", "difference", "agreement")
    widths = [max(len(r[i]) for r in [*rows, header]) for i in range(5)]
    lines = ["Predicted from geometry beside fitted from the sweep"]
    for row in [header, *rows]:
        cells = [
            row[0].ljust(widths[0]),
            row[1].rjust(widths[1]),
            row[2].rjust(widths[2]),
            row[3].rjust(widths[3]),
            row[4],
        ]
        lines.append("  " + "  ".join(cells).rstrip())
    lines.append(f"  {_AGREEMENT}")
    return "\n".join(lines)
