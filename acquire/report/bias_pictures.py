"""Pictures of a bias sweep (inductance against DC bias current) and of a temperature-rise run.

:func:`bias_figure`: the upper panel is Ls against the bias current read back from the supply
(µH or mH as fits), with a dotted horizontal line at each drop level asked (``−10 %`` below the
zero-bias inductance), an open square where the interpolated saturation current meets it, and a
note for each drop the sweep did not reach (``−30 %: above 6 A``); the lower panel is Q against
the same current. :func:`rise_figure`: the winding's temperature rise (resistance method)
against time, with a dashed line at the last (settled) rise and, when a rise was searched for,
a dotted line at the target.

Lines carry ``gid`` names (``Ls``, ``Q``, ``rise``, ``drop:0.1``, ...) so that tests can read a
figure's data instead of its pixels. matplotlib through its object API on the Agg canvas only,
in the reports' look (:mod:`acquire.report.look`).
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from acquire.bias.records import BiasSweepResult, RiseResult
from acquire.errors import InputError
from acquire.report import look
from acquire.report.bias_export import percent
from acquire.units import format_si

#: The figure sizes (inches): a bias sweep's two panels, and a temperature-rise run's one.
BIAS_SIZE = look.TALL
RISE_SIZE = look.WIDE
MINUS = "\u2212"


def _name(dut: str) -> str:
    """The DUT's name on one line (line breaks and other spacing as single spaces)."""
    return " ".join(dut.split()) or "no DUT named"


def bias_current(result: BiasSweepResult) -> np.ndarray:
    """The current each point is drawn at: the bias read back, else (NaN) the setpoint."""
    applied = np.asarray(result.curve.applied, dtype=float)
    return np.where(np.isfinite(applied), applied, np.asarray(result.curve.setpoint, dtype=float))


def bias_figure(result: BiasSweepResult, title: str = "") -> Figure:
    """Ls and Q against bias current, with the drop levels and currents marked."""
    current = bias_current(result)
    ls = np.asarray(result.curve.ls, dtype=float)
    q = np.asarray(result.curve.q, dtype=float)
    if current.size == 0:
        raise InputError("the bias sweep has no points to draw: choose one that has some")
    s = result.settings
    with look.styled():
        fig = look.new_figure(BIAS_SIZE)
        top, bottom = fig.subplots(2, 1, sharex=True, height_ratios=(3, 1))
        heading = title or f"{_name(s.dut)}: Ls against DC bias at "
        if not title:
            heading += f"{look.frequency_text(s.frequency)} ({result.status})"
        fig.suptitle(look.plain(" ".join(heading.split())), x=0.01, ha="left")
        top.plot(current, ls, gid="Ls", label="Ls", marker="o", markersize=3,
                 **look.LINES["data"])  # fmt: skip
        levels = _drop_lines(top, result, ls)
        look.si_axis(top.yaxis, "Ls", "H", np.concatenate([ls, levels]))
        bottom.plot(current, q, gid="Q", marker="o", markersize=3, **look.LINES["data"])
        bottom.set_ylabel("Q")
        look.si_axis(bottom.xaxis, "DC bias current", "A", current)
        top.set_xlim(left=0.0)
        missed = [f"{MINUS}{percent(d.drop)}: {d.text()}" for d in result.drops if not d.reached]
        found = [f"{MINUS}{percent(d.drop)}: {d.text()}" for d in result.drops if d.reached]
        lines = []
        if found:
            lines.append("saturation current " + ", ".join(found))
        if missed:
            lines.append("not reached: " + ", ".join(missed))
        if lines:
            top.text(0.99, 0.97, look.plain("\n".join(lines)), transform=top.transAxes,
                     ha="right", va="top", fontsize=8,
                     bbox={"facecolor": "white", "edgecolor": look.LIGHT})  # fmt: skip
    return fig


def _drop_lines(ax, result: BiasSweepResult, ls: np.ndarray) -> np.ndarray:
    """Draw each drop's level and its current; return the levels (H)."""
    finite = ls[np.isfinite(ls)]
    if finite.size == 0 or not np.isfinite(ls[0]):
        return np.array([])
    zero_bias = float(ls[0])
    levels = []
    for d in result.drops:
        level = zero_bias * (1.0 - d.drop)
        levels.append(level)
        ax.axhline(level, gid=f"drop:{d.drop:g}", **look.LINES["mean"])
        ax.annotate(f"{MINUS}{percent(d.drop)}", (0.0, level), xytext=(2, 2),
                    textcoords="offset points", fontsize=8, va="bottom")  # fmt: skip
        if d.current is not None:
            ax.plot([d.current], [level], gid=f"saturation:{d.drop:g}", **look.MARKERS["broken"])
            ax.annotate(format_si(d.current, "A", 3), (d.current, level), xytext=(6, -10),
                        textcoords="offset points", fontsize=8)  # fmt: skip
    return np.array(levels)


def rise_figure(result: RiseResult, title: str = "") -> Figure:
    """The temperature rise against time, with the settled (last) rise and any target."""
    t = np.asarray(result.times, dtype=float)
    rise = np.asarray(result.rise, dtype=float)
    if t.size == 0:
        raise InputError("the temperature-rise run has no readings to draw: choose one with some")
    s = result.settings
    with look.styled():
        fig = look.new_figure(RISE_SIZE)
        ax = fig.subplots()
        heading = title or (
            f"{_name(s.dut)}: temperature rise at {format_si(result.current, 'A', 3)}"
            f" ({result.status})"
        )
        fig.suptitle(look.plain(" ".join(heading.split())), x=0.01, ha="left")
        ax.plot(t, rise, gid="rise", marker="o", markersize=3, **look.LINES["data"])
        final = result.final_rise
        if final is not None:
            word = "settled" if result.settled else "last reading, not settled"
            ax.axhline(final, gid="final", label=f"{word}: {final:.1f} K", **look.LINES["fit"])
        if s.target_rise is not None:
            ax.axhline(s.target_rise, gid="target", label=f"target: {s.target_rise:g} K",
                       **look.LINES["mean"])  # fmt: skip
        if final is not None or s.target_rise is not None:
            ax.legend(loc="lower right")
        ax.set_xlabel("time since the current started [s]")
        ax.set_ylabel("temperature rise [K]")
        ax.set_xlim(left=0.0)
    return fig


def bias_png(result: BiasSweepResult, title: str = "") -> bytes:
    """:func:`bias_figure` as PNG bytes."""
    return look.png_bytes(bias_figure(result, title))


def rise_png(result: RiseResult, title: str = "") -> bytes:
    """:func:`rise_figure` as PNG bytes."""
    return look.png_bytes(rise_figure(result, title))
