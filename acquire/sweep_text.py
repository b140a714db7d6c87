"""What a sweep prints without the live view: plain progress lines, and the pieces of text the
live view and the end summary share. Nothing here imports rich, so a sweep run with
``--no-live`` into a pipe or a file does not load it (see :mod:`acquire.plain_console`)."""

from __future__ import annotations

import math
import sys
import time
from typing import IO

import numpy as np

from acquire.display import format_duration, format_measured
from acquire.impedance import quantities
from acquire.sweep_state import SweepState
from acquire.uncertainty import quantity_uncertainty
from acquire.units import format_si


def override_line(state: SweepState) -> str:
    """The line saying the reference set failed its check and was used anyway, and why."""
    return f"reference set used despite failing its check; reason given: {state.reference_override}"


def point_u(state: SweepState, f: np.ndarray, z: np.ndarray, part, names):
    """Expanded uncertainty of ``names`` at the points ``part`` of ``f`` and the shown ``z`` (the
    state's first ``f.size`` points), or None when the view does not show uncertainty."""
    if not state.show_uncertainty:
        return None
    return quantity_uncertainty(f[part], z[part], state.cov[: f.size][part], names)


class PlainProgress:
    """Plain progress lines for pipes and scripts, at most one every ``interval`` seconds."""

    def __init__(
        self, state: SweepState, out: IO[str] | None = None, interval: float = 2.0
    ) -> None:
        self.state = state
        self.out = out or sys.stdout
        self.interval = interval
        self._last = -math.inf

    def __enter__(self) -> PlainProgress:
        self.out.write(f"sweep: {self.state.plan.describe()}\n")
        self.out.flush()
        return self

    def __exit__(self, *exc: object) -> None:
        self.line()

    def update(self) -> None:
        now = time.monotonic()
        if now - self._last >= self.interval:
            self._last = now
            self.line()

    def line(self) -> None:
        """Print one progress line for the state as it stands."""
        s = self.state
        text = f"{s.count}/{s.planned} points ({100.0 * s.count / max(s.planned, 1):.0f} %)"
        f, raw, corrected = s.points()
        if f.size:
            z = raw if corrected is None else corrected
            q = quantities(f[-1:], z[-1:])
            last = slice(f.size - 1, f.size)
            u = point_u(s, f, z, last, s.quantities)
            values = "  ".join(
                f"{n}="
                + format_measured(
                    n,
                    float(q[n][0]),
                    None if u is None else float(u[n][0]),
                    bool(s.hidden_at(n, last)[0]),
                )
                for n in s.quantities
            )
            text += f"  f={format_si(float(f[-1]), 'Hz')}  {values}"
        left = s.remaining()
        if left is not None:
            text += f"  about {format_duration(left)} left"
        self.out.write(text + "\n")
        self.out.flush()
