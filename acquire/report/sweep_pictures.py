"""Pictures of stored sweeps: Ls, Rs, Q, |Z| and phase against log frequency.

:func:`sweep_figure` draws one sweep from arrays (no store): raw readings thin and grey, the
corrected values black with their band of ± U (k = 2), the fitted equivalent circuit dashed and
the self-resonance as a dotted vertical line with its frequency. :func:`overlay_figure` puts the
corrected curves of several sweeps on the same panels, each in its own line style and marker.
:func:`sweep_figures` reads sweeps from a store and returns the PNGs.

The band comes from each point's stored expanded uncertainties of R and X (k = 2):
``U(Ls) = U(X)/ω`` and ``U(Rs) = U(R)`` exactly; U(Q), U(|Z|) and U(θ) are propagated from R and
X taken as uncorrelated (JCGM 100:2008, 5.1.2), since the store keeps only their two variances.
The self-resonance is where the corrected reactance turns from inductive to capacitive
(:func:`acquire.resonance.self_resonance`). matplotlib is used through its object API with the
Agg canvas only: nothing here touches pyplot's global state or a display.
"""

from __future__ import annotations

import io
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.lines import Line2D

from acquire.coil import CoilFit, fit_sweep
from acquire.errors import InputError, ModelError
from acquire.report import sweep_panels as sp
from acquire.resonance import self_resonance
from acquire.units import format_si

if TYPE_CHECKING:
    from acquire.store.core import Store

#: Points of the fitted circuit's curve (log-spaced over the sweep's band).
FIT_POINTS = 600
#: What the overlay shows, under its legend.
OVERLAY_NOTE = (
    "corrected values (raw where a sweep has no correction); vertical lines: each sweep's "
    "self-resonance in its line style; each sweep's own figure shows its band and fit"
)
#: Markers on a line of the overlay: about this many per sweep.
MARKS_PER_LINE = 14


@dataclass(frozen=True, eq=False)
class Trace:
    """One sweep's arrays for a picture: frequency (Hz), raw and corrected impedance (ohm;
    corrected None when no reference set was applied), U of (R, X) with k = 2 (shape (n, 2),
    or None), each point's flag words, and its label (sweep id and DUT)."""

    frequency: np.ndarray
    raw: np.ndarray
    corrected: np.ndarray | None
    u: np.ndarray | None
    label: str
    flags: tuple[str, ...] = ()


def _new_figure() -> tuple[Figure, list[Axes], Axes]:
    fig = Figure(figsize=sp.FIGURE_SIZE, dpi=sp.DPI, layout="constrained")
    FigureCanvasAgg(fig)
    grid = fig.subplots(3, 2)
    axes = [grid[0, 0], grid[0, 1], grid[1, 0], grid[1, 1], grid[2, 0]]
    notes = grid[2, 1]
    notes.set_axis_off()
    for ax in axes:
        sp.style_axes(ax)
    return fig, axes, notes


def _frequency_limits(frequencies: Sequence[np.ndarray]) -> tuple[float, float]:
    f = np.concatenate([np.ravel(x) for x in frequencies])
    f = f[np.isfinite(f) & (f > 0)]
    if f.size == 0:
        raise InputError("the sweep has no frequencies to draw: choose a sweep with points")
    low, high = float(f.min()), float(f.max())
    if high <= low:
        low, high = low / 1.5, high * 1.5
    return low, high


def _write_notes(ax: Axes, handles: list[Any], lines: Sequence[str]) -> None:
    """The legend and the notes in the empty sixth panel."""
    legend = ax.legend(
        handles=handles,
        loc="upper left",
        frameon=False,
        fontsize=sp.FONT_SIZE,
        borderaxespad=0.0,
        handlelength=3.0,
    )
    legend.set_in_layout(False)
    wrapped = "\n\n".join(textwrap.fill(line, width=72) for line in lines if line)
    ax.text(0.0, 0.0, wrapped, transform=ax.transAxes, va="bottom", ha="left",
            fontsize=sp.FONT_SIZE - 1, linespacing=1.3)  # fmt: skip


def _ls_cap(curves: Sequence[np.ndarray]) -> float | None:
    """Where the Ls axis stops: :data:`sweep_panels.LS_CAP` times the largest low-frequency Ls."""
    lows = [v for c in curves if (v := sp.low_frequency_value(c)) is not None]
    return sp.LS_CAP * max(lows) if lows else None


def sweep_figure(
    frequency: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None,
    u: np.ndarray | None,
    title: str,
    fit: CoilFit | None = None,
    *,
    flags: Sequence[str] | None = None,
    notes: Sequence[str] = (),
) -> Figure:
    """One sweep's figure: panels Ls, Rs, Q, |Z| and phase against log frequency.

    ``frequency`` (Hz), ``raw`` and ``corrected`` (complex ohm; ``corrected`` None or all NaN
    when no reference set was applied), ``u``: U of (R, X) per point, k = 2, shape (n, 2), or
    None. ``fit``: the equivalent circuit fitted to the corrected points, drawn dashed.
    ``flags``: each point's flag words (points past the meter's stated accuracy are marked);
    ``notes``: lines printed under the legend.
    """
    f = np.asarray(frequency, dtype=float)
    zr = np.asarray(raw, dtype=complex)
    zc = None if corrected is None else np.asarray(corrected, dtype=complex)
    if zc is not None and not np.isfinite(zc).any():
        zc = None
    uu = None if u is None or zc is None else np.asarray(u, dtype=float).reshape(f.size, 2)
    f_low, f_high = _frequency_limits([f])
    fig, axes, notes_ax = _new_figure()
    fig.suptitle(title, fontsize=sp.FONT_SIZE + 2, x=0.01, ha="left")
    raw_q = sp.values(f, zr)
    main = raw_q if zc is None else sp.values(f, zc)
    band = sp.expanded(f, zc, uu) if zc is not None else None
    fit_f = np.geomspace(f_low, f_high, FIT_POINTS)
    fit_q = sp.values(fit_f, fit.impedance(fit_f)) if fit is not None else None
    srf = self_resonance(f, zc if zc is not None else zr)
    srf_name = "self-resonance" if zc is not None else "raw X = 0 at"
    flagged = np.array([bool(s.strip()) for s in flags]) if flags is not None else None
    words = sorted({w.strip() for s in flags or () for w in s.split(",") if w.strip()})
    handles: list[Any] = []
    for i, (ax, panel) in enumerate(zip(axes, sp.PANELS, strict=True)):
        y_main = sp.shown(panel, main[panel.key])
        curves = [y_main, sp.shown(panel, raw_q[panel.key])]
        if fit_q is not None:
            curves.append(sp.shown(panel, fit_q[panel.key]))
        cap = _ls_cap(curves[:1]) if panel.key == "Ls" else None
        low, high = sp.value_axis(ax, panel, curves, cap)
        if cap is not None and high < np.nanmax(np.concatenate(curves), initial=0.0):
            cut = f"Ls axis cut at {sp.LS_CAP:g} × the low-frequency Ls: Ls grows without bound "
            notes = [*notes, cut + "toward the self-resonance"]
        sp.frequency_axis(ax, f_low, f_high, label=i >= 3)
        drawn = []
        if band is not None:
            drawn.append(sp.band(ax, panel, f, y_main, band[panel.key], low / 10.0))
        if zc is not None:
            (line,) = ax.plot(f, curves[1], zorder=3, label="raw reading", **sp.RAW)
            drawn.append(line)
        name = "corrected" if zc is not None else "raw reading (no correction applied)"
        (line,) = ax.plot(f, y_main, zorder=5, label=name, gid=f"corrected:{panel.key}",
                          **sp.CORRECTED)  # fmt: skip
        drawn.insert(0, line)
        if flagged is not None and flagged.any():
            (marks,) = ax.plot(f[flagged], y_main[flagged], zorder=6, **sp.FLAGGED,
                               label="point flagged " + ", ".join(words))  # fmt: skip
            drawn.append(marks)
        if fit_q is not None:
            (line,) = ax.plot(fit_f, curves[-1], zorder=4, label="fitted equivalent circuit",
                              **sp.FIT)  # fmt: skip
            drawn.append(line)
        if srf is not None:
            sp.resonance_line(ax, srf)
            sp.resonance_label(ax, srf, f"{srf_name} {format_si(srf, 'Hz')}")
        if i == 0:
            handles = drawn
    if srf is not None:
        what = (
            "self-resonance"
            if zc is not None
            else "resonance of the raw readings, fixture included"
        )
        text = f"{what} (X = 0): {format_si(srf, 'Hz')}"
        handles.append(Line2D([], [], label=text, **sp.RESONANCE))
    lines = list(notes)
    if band is not None:
        lines.append(sp.BAND_NOTE)
    if fit is not None:
        lines.append(_fit_text(fit))
    _write_notes(notes_ax, handles, lines)
    return fig


def _fit_text(fit: CoilFit) -> str:
    """The fitted values worth printing under the legend, each with its 1σ uncertainty."""
    parts = []
    for key, unit in (("L", "H"), ("Rdc", "Ω"), ("Cp", "F"), ("SRF", "Hz")):
        value = fit.get(key)
        if value.value is None:
            continue
        sigma = f" ± {format_si(value.sigma, unit, 2)}" if value.sigma else ""
        parts.append(f"{key} = {format_si(value.value, unit)}{sigma}")
    return "fit (dashed, 1σ): " + ", ".join(parts) if parts else "fit: no value determined"


def overlay_figure(traces: Sequence[Trace], title: str) -> Figure:
    """Several sweeps' corrected curves (raw where a sweep has none) on the same five panels,
    each in its own line style and marker; each sweep's self-resonance as a vertical line in
    its style. No bands: :func:`sweep_figure` draws each sweep's own."""
    if not traces:
        raise InputError("no sweeps to overlay: give at least one sweep id")
    f_low, f_high = _frequency_limits([t.frequency for t in traces])
    fig, axes, notes_ax = _new_figure()
    fig.suptitle(title, fontsize=sp.FONT_SIZE + 2, x=0.01, ha="left")
    data = []
    for t in traces:
        corrected = t.corrected is not None and bool(np.isfinite(t.corrected).any())
        z = t.corrected if corrected and t.corrected is not None else t.raw
        srf = self_resonance(t.frequency, z)
        label = t.label if corrected else f"{t.label} (raw: no correction)"
        if srf is not None:
            what = "self-resonance" if corrected else "raw X = 0 at"
            label += f", {what} {format_si(srf, 'Hz')}"
        data.append((t, sp.values(t.frequency, z), srf, label))
    handles: list[Any] = []
    for i, (ax, panel) in enumerate(zip(axes, sp.PANELS, strict=True)):
        curves = [sp.shown(panel, q[panel.key]) for _, q, _, _ in data]
        sp.value_axis(ax, panel, curves, _ls_cap(curves) if panel.key == "Ls" else None)
        sp.frequency_axis(ax, f_low, f_high, label=i >= 3)
        for n, ((t, _, srf, label), y) in enumerate(zip(data, curves, strict=True)):
            dash, marker, shade = sp.OVERLAY_STYLES[n % len(sp.OVERLAY_STYLES)]
            every = max(t.frequency.size // MARKS_PER_LINE, 1)
            (line,) = ax.plot(t.frequency, y, linestyle=dash, marker=marker, color=shade,
                              markersize=4, markevery=(n % every, every), linewidth=1.2,
                              markerfacecolor="white", label=label, gid=f"corrected:{panel.key}",
                              zorder=5)  # fmt: skip
            if srf is not None:
                sp.resonance_line(ax, srf, {"color": shade, "linewidth": 0.9, "linestyle": dash})
            if i == 0:
                handles.append(line)
    _write_notes(notes_ax, handles, [OVERLAY_NOTE])
    return fig


def png_bytes(fig: Figure) -> bytes:
    """The figure as PNG bytes (Agg canvas, the figure's own resolution)."""
    buffer = io.BytesIO()
    FigureCanvasAgg(fig).print_png(buffer)
    return buffer.getvalue()


def fit_points(
    frequency: np.ndarray, corrected: np.ndarray, u: np.ndarray | None
) -> tuple[CoilFit | None, str]:
    """The equivalent circuit fitted to a sweep's corrected points, weighted by their stored
    uncertainty (U/2 as the standard uncertainty of R and X) where every point has one; or
    None and the reason it could not be fitted."""
    sigma = None
    if u is not None and np.all(np.isfinite(u) & (u > 0)):
        sigma = u / 2.0
    try:
        return fit_sweep(frequency, corrected, sigma=sigma), ""
    except ModelError as exc:
        return None, f"no equivalent circuit drawn: {exc}"


def read_trace(store: Store, sweep_id: int) -> tuple[Trace, str]:
    """A stored sweep as a :class:`Trace`, and its heading line (id, DUT, status, start)."""
    info = store.sweep_info(sweep_id)
    points = store.sweep_points(sweep_id)
    if len(points) == 0:
        raise InputError(f"sweep {sweep_id} has no stored points: choose a sweep that has some")
    f = points["frequency"].to_numpy(dtype=float)
    raw = points["raw_r"].to_numpy(dtype=float) + 1j * points["raw_x"].to_numpy(dtype=float)
    cor = points["corrected_r"].to_numpy(dtype=float) + 1j * points["corrected_x"].to_numpy(
        dtype=float
    )
    u = points[["u_r", "u_x"]].to_numpy(dtype=float)
    has_cor = bool(np.isfinite(cor).any())
    label = f"sweep {info.id}: {info.dut or 'no DUT named'}"
    trace = Trace(f, raw, cor if has_cor else None, u if np.isfinite(u).any() else None, label,
                  tuple(str(s) for s in points["flags"]))  # fmt: skip
    started = info.started_at.strftime("%Y-%m-%d %H:%M UTC") if info.started_at else ""
    head = f"{label} — {info.status}, {info.points} points, started {started}"
    return trace, head


def sweep_figures(store: Store, sweep_ids: Sequence[int]) -> list[tuple[str, bytes]]:
    """PNG pictures of stored sweeps: ``sweep-<id>.png`` for each (with its band, fit and
    self-resonance), then, for several ids, ``sweeps-<id>-<id>....png`` with their corrected
    curves overlaid. Raises StoreError for an unknown id, InputError for a sweep without
    points."""
    ids = list(dict.fromkeys(int(i) for i in sweep_ids))
    if not ids:
        raise InputError("no sweep ids given: name at least one stored sweep")
    out: list[tuple[str, bytes]] = []
    traces = []
    for sweep_id in ids:
        trace, head = read_trace(store, sweep_id)
        traces.append(trace)
        fit, why = None, "no equivalent circuit drawn: the sweep has no corrected points"
        if trace.corrected is not None:
            fit, why = fit_points(trace.frequency, trace.corrected, trace.u)
        fig = sweep_figure(trace.frequency, trace.raw, trace.corrected, trace.u, head, fit,
                           flags=trace.flags, notes=[why] if why else [])  # fmt: skip
        out.append((f"sweep-{sweep_id}.png", png_bytes(fig)))
    if len(ids) > 1:
        title = "sweeps " + ", ".join(str(i) for i in ids) + " overlaid"
        name = "sweeps-" + "-".join(str(i) for i in ids) + ".png"
        out.append((name, png_bytes(overlay_figure(traces, title))))
    return out
