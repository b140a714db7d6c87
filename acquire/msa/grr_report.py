"""A gauge R&R study analysed, as text tables (rich) and as a JSON document.

:func:`analyse` runs both methods on a checked study (:mod:`acquire.msa.anova`,
:mod:`acquire.msa.average_range`); :func:`print_text` and :func:`to_json` show the result.
%GRR is judged by the bands in common use: under 10 % acceptable, 10 % to 30 % may be acceptable
depending on the application (the part's importance, the cost of the gauge), over 30 %
unacceptable (common practice, as the AIAG Measurement Systems Analysis manual, 4th edition,
gives them; from memory). An ndc of 5 or more is commonly asked for (the same manual).
Names (operators, quantities, files) are printed as text, never as markup.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from acquire.msa.anova import (
    POOL_ABOVE,
    SPREAD_SIGMAS,
    AnovaRow,
    AnovaStudy,
    crossed_anova,
    percent_tolerance,
    pooling_text,
)
from acquire.msa.average_range import AverageRange, average_range, not_covered
from acquire.msa.grr_data import StudyCube, study_cube
from acquire.msa.records import GrrData

#: (upper edge in %, verdict): the bands in common use for %GRR.
BANDS: tuple[tuple[float, str], ...] = (
    (10.0, "acceptable"),
    (30.0, "may be acceptable, depending on the application"),
    (math.inf, "unacceptable"),
)
BANDS_NOTE = (
    "bands: under 10 % acceptable; 10 % to 30 % may be acceptable, depending on the "
    "application; over 30 % unacceptable (common practice, as the AIAG MSA manual, 4th "
    "edition, gives them); ndc of 5 or more is commonly asked for"
)
#: The rows of the components table: name and how to get its standard deviation.
SOURCES = ("grr", "repeatability", "reproducibility", "operator", "interaction", "part_variation")
LABELS = {
    "grr": "gauge R&R", "repeatability": "  repeatability", "reproducibility": "  reproducibility",
    "operator": "    operator", "interaction": "    part x operator", "part_variation": "part",
    "total_variation": "total",
}  # fmt: skip


def shown(name: str) -> str:
    """``name`` as it may be printed: each character that is not printable (an escape, a
    control character) as its Python escape, so no name can drive a terminal."""
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in str(name))


def band(percent: float) -> str | None:
    """The common-practice verdict on a %GRR (10 % falls in the middle band, 30 % too)."""
    if not math.isfinite(percent):
        return None
    for edge, verdict in BANDS:
        if percent < edge or (edge == 30.0 and percent == 30.0):
            return verdict
    return BANDS[-1][1]


@dataclass(frozen=True)
class GrrAnalysis:
    """A study analysed: its measurements arranged, both methods' results, and the tolerance
    (USL − LSL, SI unit) with the spread it is compared with (``sigmas`` standard deviations)."""

    cube: StudyCube
    anova: AnovaStudy
    average_range: AverageRange | None
    tolerance: float | None
    sigmas: float
    quantity: str
    unit: str
    source: str

    def sigma(self, name: str) -> float:
        """The ANOVA standard deviation of a source (a :data:`SOURCES` name or total)."""
        return float(getattr(self.anova.components, name))

    def percent_tolerance(self, name: str) -> float:
        return percent_tolerance(self.sigma(name), self.tolerance, self.sigmas)


def analyse(
    data: GrrData,
    tolerance: float | None = None,
    sigmas: float = SPREAD_SIGMAS,
    pool_above: float = POOL_ABOVE,
    source: str = "",
) -> GrrAnalysis:
    """Check ``data`` and analyse it by both methods."""
    from acquire.errors import InputError

    if tolerance is not None and not (math.isfinite(tolerance) and tolerance > 0):
        raise InputError("the tolerance (USL - LSL) must be a positive number")
    cube = study_cube(data)
    return GrrAnalysis(
        cube=cube,
        anova=crossed_anova(cube.values, pool_above),
        average_range=average_range(cube.values),
        tolerance=tolerance,
        sigmas=sigmas,
        quantity=data.quantity,
        unit=data.unit,
        source=source,
    )


def _num(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _row_json(row: AnovaRow) -> dict[str, Any]:
    return {"source": row.source, "ss": _num(row.ss), "df": row.df, "ms": _num(row.ms),
            "f": _num(row.f), "p": _num(row.p)}  # fmt: skip


def to_json(a: GrrAnalysis) -> dict[str, Any]:
    """The JSON document: standard deviations in the SI unit ``unit``, variances in its square,
    percentages as numbers (0 to 100), null where undefined."""
    s = a.anova
    c = s.components
    names = (*SOURCES, "total_variation")
    variance = {n: (c.total_var if n == "total_variation" else a.sigma(n) ** 2) for n in names}
    ar = a.average_range
    doc: dict[str, Any] = {
        "command": "grr analyse",
        "source": a.source,
        "quantity": a.quantity,
        "unit": a.unit,
        "parts": list(a.cube.parts),
        "operators": list(a.cube.operators),
        "trials": len(a.cube.trials),
        "tolerance": _num(a.tolerance),
        "spread_sigmas": a.sigmas,
        "method": "ANOVA (AIAG MSA manual, 4th edition)",
        **{n: _num(a.sigma(n)) for n in names},
        "percent_grr_total": _num(s.percent_grr_total),
        "percent_grr_tolerance": _num(a.percent_tolerance("grr")),
        "ndc": s.ndc,
        "band_total": band(s.percent_grr_total),
        "band_tolerance": band(a.percent_tolerance("grr")),
        "variance_components": {n: _num(v) for n, v in variance.items()},
        "percent_contribution": {n: _num(s.percent_contribution(v)) for n, v in variance.items()},
        "percent_study_variation": {n: _num(s.percent_total(a.sigma(n))) for n in names},
        "percent_tolerance": {n: _num(a.percent_tolerance(n)) for n in names},
        "anova": {
            "full": [_row_json(r) for r in s.full],
            "pooled": None if s.pooled is None else [_row_json(r) for r in s.pooled],
        },
        "pooling": {
            "interaction_p": _num(s.interaction_p),
            "pool_above": s.pool_above,
            "pooled": s.pooled is not None,
            "rule": pooling_text(s),
        },
        "average_range": None
        if ar is None
        else {
            "repeatability": ar.repeatability,
            "reproducibility": ar.reproducibility,
            "grr": ar.grr,
            "part_variation": ar.part_variation,
            "total_variation": ar.total_variation,
            "percent_grr_total": _num(ar.percent_grr_total),
            "mean_range": ar.mean_range,
            "operator_difference": ar.operator_difference,
            "part_range": ar.part_range,
        },
        "average_range_not_given": not_covered(*a.cube.values.shape),
        "bands": [{"below": _num(edge), "verdict": v} for edge, v in BANDS],
        "bands_note": BANDS_NOTE,
    }
    return doc


def _show(value: float, unit: str) -> str:
    from acquire.report.look import value_text

    return "—" if not math.isfinite(value) else value_text(value, unit)


def _pct(value: float) -> str:
    return "—" if not math.isfinite(value) else f"{value:.1f} %"


def _g(value: float) -> str:
    return "—" if not math.isfinite(value) else f"{value:.4g}"


def _p(value: float) -> str:
    return "—" if not math.isfinite(value) else ("< 0.0001" if value < 1e-4 else f"{value:.4f}")


def anova_table(rows: tuple[AnovaRow, ...], title: str, unit: str) -> Any:
    from rich.table import Table

    square = f" [{unit}²]" if unit else ""
    table = Table(title=title, title_justify="left", show_edge=False)
    table.add_column("source")
    for name in ("df", f"SS{square}", f"MS{square}", "F", "p"):
        table.add_column(name, justify="right")
    for r in rows:
        table.add_row(r.source, str(r.df), _g(r.ss), _g(r.ms), _g(r.f), _p(r.p))
    return table


def print_text(a: GrrAnalysis, console: Any) -> None:
    """The analysis as text: the study, the operators, the ANOVA tables, the pooling decision,
    the variance components with their percentages, %GRR with its band, ndc, and the
    average-and-range method beside it."""
    from rich.table import Table
    from rich.text import Text

    s, u = a.anova, a.unit
    what = shown(a.quantity or "value")
    console.print(Text(f"gauge R&R study: {shown(a.source)}" if a.source else "gauge R&R study"))
    console.print(Text(f"{what}: {s.parts} parts x {s.operators} operators x {s.trials} trials "
                       f"= {a.cube.values.size} measurements"))  # fmt: skip
    ops = Table(title="operators", title_justify="left", show_edge=False)
    for name in ("operator", "mean", "mean range"):
        ops.add_column(name, justify="left" if name == "operator" else "right")
    for j, name in enumerate(a.cube.operators):
        values = a.cube.values[:, j, :]
        ops.add_row(Text(shown(name)), _show(float(values.mean()), u),
                    _show(float(np.ptp(values, axis=1).mean()), u))  # fmt: skip
    console.print(ops)
    console.print(anova_table(s.full, "ANOVA with the part x operator interaction", u))
    console.print(Text(pooling_text(s)))
    if s.pooled is not None:
        console.print(anova_table(s.pooled, "ANOVA with the interaction pooled", u))
    tol = a.tolerance is not None
    table = Table(title="variance components (ANOVA method)", title_justify="left",
                  show_edge=False)  # fmt: skip
    table.add_column("source")
    table.add_column(f"variance [{u}²]" if u else "variance", justify="right")
    table.add_column("σ", justify="right")
    table.add_column("% contribution", justify="right")
    table.add_column("% study variation", justify="right")
    if tol:
        table.add_column(f"% tolerance ({a.sigmas:g}σ)", justify="right")
    for name in (*SOURCES, "total_variation"):
        sigma = a.sigma(name)
        cells = [LABELS[name], _g(sigma**2), _show(sigma, u),
                 _pct(s.percent_contribution(sigma**2)), _pct(s.percent_total(sigma))]  # fmt: skip
        if tol:
            cells.append(_pct(a.percent_tolerance(name)))
        table.add_row(*cells)
    console.print(table)
    line = f"%GRR of total variation: {_pct(s.percent_grr_total)}"
    line += f" ({band(s.percent_grr_total) or 'undefined'})"
    console.print(Text(line))
    if tol:
        pt = a.percent_tolerance("grr")
        width = _show(a.tolerance or math.nan, u)
        verdict = band(pt) or "undefined"
        console.print(Text(f"%GRR of tolerance ({width}, {a.sigmas:g}σ spread): {_pct(pt)} "
                           f"({verdict})"))  # fmt: skip
    else:
        console.print(Text("%GRR of tolerance: not given (give --tolerance USL-LSL)"))
    ndc = "undefined (no measurement spread)" if s.ndc is None else str(s.ndc)
    console.print(Text(f"number of distinct categories ndc = floor(1.41 PV/GRR) = {ndc}"))
    ar = a.average_range
    if ar is None:
        reason = not_covered(*a.cube.values.shape)
        console.print(Text(f"average-and-range method: not given ({reason})"))
    else:
        console.print(Text(
            f"average-and-range method: EV {_show(ar.repeatability, u)}, AV "
            f"{_show(ar.reproducibility, u)}, GRR {_show(ar.grr, u)}, PV "
            f"{_show(ar.part_variation, u)}, TV {_show(ar.total_variation, u)}, %GRR "
            f"{_pct(ar.percent_grr_total)} (no interaction term)"
        ))  # fmt: skip
    console.print(Text(BANDS_NOTE))
