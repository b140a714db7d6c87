"""The end of a sweep for people: its outcome, raw against corrected values at a few points,
the self-resonance and the warnings (the same table `acquire sweep show` prints again)."""

from __future__ import annotations

import numpy as np
from rich.console import Group
from rich.table import Table
from rich.text import Text

from acquire.dashboard import override_line, point_u
from acquire.display import format_measured
from acquire.impedance import quantities
from acquire.resonance import self_resonance, summary_frequencies
from acquire.sweep_state import SweepState
from acquire.units import format_si


def summary(state: SweepState, count: int = 6) -> Group:
    """The end-of-sweep view: outcome, raw vs corrected at a few points, resonance, warnings."""
    f, raw, corrected = state.points()
    style = "green" if state.status == "complete" and not state.open_fixture else "yellow"
    head = Text(
        f"Sweep {state.status}: {state.count} of {state.planned} points", style=f"bold {style}"
    )
    if state.reason:
        head.append(f" ({state.reason})")
    if state.open_fixture:
        head.append(" (the readings look like an open fixture)", style="bold red")
    if state.reference_override:
        head.append(f"\n{override_line(state)}", style="bold red")
    if state.destination:
        head.append(f"\nstored in {state.destination}")
    parts: list = [head]
    if f.size:
        parts.append(_summary_table(state, f, raw, corrected, count))
        srf_raw = self_resonance(f, raw)
        # the points measured, not the plan: an interrupted sweep may stop short of a resonance
        none = f"none between {format_si(float(f[0]), 'Hz')} and {format_si(float(f[-1]), 'Hz')}"
        lines = []
        if corrected is not None:
            srf_cor = self_resonance(f, corrected)
            lines.append(
                f"self-resonance: raw {format_si(srf_raw, 'Hz') if srf_raw else none}, "
                f"corrected {format_si(srf_cor, 'Hz') if srf_cor else none}"
            )
        else:
            lines.append(f"self-resonance: {format_si(srf_raw, 'Hz') if srf_raw else none}")
        parts.append(Text("\n".join(lines)))
    warnings = state.all_warnings()
    if warnings:
        parts.append(Text("\n".join(f"warning: {w}" for w in warnings), style="yellow"))
    return Group(*parts)


def _summary_table(
    state: SweepState,
    f: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None,
    count: int,
) -> Table:
    picks = summary_frequencies(f, count)
    fp = f[picks]
    qr = quantities(fp, raw[picks])
    qc = quantities(fp, corrected[picks]) if corrected is not None else None
    u = point_u(state, f, raw if corrected is None else corrected, picks, state.quantities)
    hidden = {name: state.hidden(name, f.size)[picks] for name in state.quantities}
    title = "raw vs corrected" if qc is not None else "selected points (raw)"
    table = Table(title=title, title_justify="left")
    table.add_column("f", justify="right")
    for name in state.quantities:
        if qc is None:
            table.add_column(name, justify="right")
        else:
            table.add_column(f"{name} raw", justify="right")
            table.add_column(f"{name} corrected", justify="right")
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
        table.add_row(*row)
    return table
