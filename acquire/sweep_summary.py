"""The end of a sweep for people: its outcome, raw against corrected values at a few points,
the self-resonance and the warnings (the same table `acquire sweep show` prints again).

:func:`summary` returns a :class:`SweepSummary`: rich draws it (``console.print``) and
:class:`acquire.plain_console.PlainConsole` prints the same text without importing rich."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from acquire.display import format_measured
from acquire.impedance import quantities
from acquire.plain_console import table_lines, wrap_text
from acquire.resonance import self_resonance, summary_frequencies
from acquire.sweep_state import SweepState
from acquire.sweep_text import override_line, point_u
from acquire.units import format_si

if TYPE_CHECKING:
    from rich.console import Group


@dataclass(frozen=True)
class SweepSummary:
    """The summary's parts as text with rich style names: the head (pieces of one text), the
    table of selected points (None without points), the resonance line and the warnings."""

    head: tuple[tuple[str, str], ...]
    title: str = ""
    headers: tuple[str, ...] = ()
    rows: tuple[tuple[str, ...], ...] = ()
    resonance: str | None = None
    warnings: str | None = None

    def __rich__(self) -> Group:
        from rich.console import Group
        from rich.table import Table
        from rich.text import Text

        (first, style), *more = self.head
        head = Text(first, style=style)
        for text, piece_style in more:
            head.append(text, style=piece_style or None)
        parts: list = [head]
        if self.headers:
            table = Table(title=self.title, title_justify="left")
            for name in self.headers:
                table.add_column(name, justify="right")
            for row in self.rows:
                table.add_row(*row)
            parts.append(table)
        if self.resonance is not None:
            parts.append(Text(self.resonance))
        if self.warnings is not None:
            parts.append(Text(self.warnings, style="yellow"))
        return Group(*parts)

    def plain_lines(self, width: int) -> list[str] | None:
        """The lines rich prints on a console ``width`` wide that is not a terminal, or None
        where its layout is beyond :mod:`acquire.plain_console` (then let rich print it)."""
        texts = ["".join(text for text, _ in self.head)]
        texts += [t for t in (self.resonance, self.warnings) if t is not None]
        wrapped = [wrap_text(t, width) for t in texts]
        table = table_lines(self.title, self.headers, self.rows, width) if self.headers else []
        if table is None or any(w is None for w in wrapped):
            return None
        lines = list(wrapped[0] or [])
        lines += table
        for more in wrapped[1:]:
            lines += more or []
        return lines


def summary(state: SweepState, count: int = 6) -> SweepSummary:
    """The end-of-sweep view: outcome, raw vs corrected at a few points, resonance, warnings."""
    f, raw, corrected = state.points()
    style = "green" if state.status == "complete" and not state.open_fixture else "yellow"
    head = [(f"Sweep {state.status}: {state.count} of {state.planned} points", f"bold {style}")]
    if state.reason:
        head.append((f" ({state.reason})", ""))
    if state.open_fixture:
        head.append((" (the readings look like an open fixture)", "bold red"))
    if state.reference_override:
        head.append((f"\n{override_line(state)}", "bold red"))
    if state.destination:
        head.append((f"\nstored in {state.destination}", ""))
    table: dict = {}
    resonance = None
    if f.size:
        table = _summary_table(state, f, raw, corrected, count)
        srf_raw = self_resonance(f, raw)
        # the points measured, not the plan: an interrupted sweep may stop short of a resonance
        none = f"none between {format_si(float(f[0]), 'Hz')} and {format_si(float(f[-1]), 'Hz')}"
        if corrected is not None:
            srf_cor = self_resonance(f, corrected)
            resonance = (
                f"self-resonance: raw {format_si(srf_raw, 'Hz') if srf_raw else none}, "
                f"corrected {format_si(srf_cor, 'Hz') if srf_cor else none}"
            )
        else:
            resonance = f"self-resonance: {format_si(srf_raw, 'Hz') if srf_raw else none}"
    warnings = state.all_warnings()
    shown = "\n".join(f"warning: {w}" for w in warnings) if warnings else None
    return SweepSummary(tuple(head), resonance=resonance, warnings=shown, **table)


def _summary_table(
    state: SweepState,
    f: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None,
    count: int,
) -> dict:
    picks = summary_frequencies(f, count)
    fp = f[picks]
    qr = quantities(fp, raw[picks])
    qc = quantities(fp, corrected[picks]) if corrected is not None else None
    u = point_u(state, f, raw if corrected is None else corrected, picks, state.quantities)
    hidden = {name: state.hidden(name, f.size)[picks] for name in state.quantities}
    title = "raw vs corrected" if qc is not None else "selected points (raw)"
    headers = ["f"]
    for name in state.quantities:
        headers += [name] if qc is None else [f"{name} raw", f"{name} corrected"]
    rows = []
    for j in range(fp.size):
        row = [format_si(float(fp[j]), "Hz")]
        for name in state.quantities:
            shown = format_measured(
                name,
                float((qr if qc is None else qc)[name][j]),
                None if u is None else float(u[name][j]),
                bool(hidden[name][j]),
            )
            if qc is None:
                row.append(shown)
            else:
                row += [format_measured(name, float(qr[name][j])), shown]
        rows.append(tuple(row))
    return {"title": title, "headers": tuple(headers), "rows": tuple(rows)}
