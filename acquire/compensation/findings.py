"""A finding about a reference set, and the small helpers every rule uses to word one."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np

from acquire.units import format_si

#: Two readings closer than this fraction of the larger |Z| (plus their scatter) read "the same".
ALIKE_RELATIVE = 0.05
#: Coverage factor on the Type A standard uncertainty when comparing readings (this tool's
#: choice: with 3 repeats the scatter itself is known only roughly).
SCATTER_COVERAGE = 5.0

#: How serious a finding is.
Severity = Literal["error", "warning"]


@dataclass(frozen=True)
class Finding:
    """One thing wrong with a reference set or with a DUT measured through it.

    ``severity`` is ``"error"`` or ``"warning"``; ``standard`` names what it concerns
    (``"open"``, ``"short"``, ``"load"``, ``"load_true"``, ``"frequency"`` for the grid,
    ``"dut"``, or ``"set"``); ``frequency`` is the worst (or first) frequency concerned in Hz,
    or None when the finding is not about one frequency.
    """

    severity: Severity
    standard: str
    message: str
    frequency: float | None = None

    def __str__(self) -> str:
        return f"{self.severity}: {self.standard}: {self.message}"


def where(mask: np.ndarray, f: np.ndarray, worst: int | None = None) -> tuple[str, float]:
    """``("at 3 of 51 frequencies (1 MHz to 2 MHz)", worst frequency)`` for the points of mask."""
    n = int(mask.sum())
    hit = f[mask]
    span = hz(hit[0]) if n == 1 else f"{hz(hit.min())} to {hz(hit.max())}"
    at = int(np.flatnonzero(mask)[0]) if worst is None else worst
    return f"at {n} of {mask.size} frequencies ({span})", float(f[at])


def worst(mask: np.ndarray, score: np.ndarray, largest: bool = False) -> int:
    """Index of the smallest (or largest) ``score`` among the points of ``mask``."""
    masked = np.where(mask, score, np.nan)
    return int(np.nanargmax(masked) if largest else np.nanargmin(masked))


def most(mask: np.ndarray) -> bool:
    """True when ``mask`` holds at more than half of its points."""
    return 2 * int(np.count_nonzero(mask)) > mask.size


def alike(a: np.ndarray, b: np.ndarray, ua=None, ub=None) -> np.ndarray:
    """Where readings ``a`` and ``b`` cannot be told apart: finite, and closer than
    :data:`ALIKE_RELATIVE` of the larger ``|Z|`` plus :data:`SCATTER_COVERAGE` times the
    standard uncertainty of their difference (``ua``, ``ub``: per component, ohm, or None)."""
    ua = 0.0 if ua is None else np.nan_to_num(np.asarray(ua, dtype=float))
    ub = 0.0 if ub is None else np.nan_to_num(np.asarray(ub, dtype=float))
    with np.errstate(invalid="ignore", over="ignore"):
        spread = np.sqrt(2.0 * (np.square(ua) + np.square(ub)))
        tolerance = ALIKE_RELATIVE * np.maximum(np.abs(a), np.abs(b)) + SCATTER_COVERAGE * spread
        return np.isfinite(a) & np.isfinite(b) & (np.abs(a - b) <= tolerance)


def ohm(z: complex) -> str:
    """``"1.5 kΩ at -89.9°"``: a reading's magnitude and phase, for messages."""
    degrees = round(float(np.degrees(np.angle(z))), 1) + 0.0  # no "-0.0"
    return f"{format_si(float(abs(z)), 'Ω')} at {degrees:.1f}°"


#: The 10x rule of thumb for losing accuracy (common practice, no published source): a part
#: within 10x of the short residual, or an open within 10x of the part (or of the short).
ACCURACY_RATIO = 10.0


def hz(value: float) -> str:
    """A frequency for messages."""
    return format_si(float(value), "Hz")
