"""The saturation current: where a choke's inductance has dropped by a stated fraction.

The measured curve L(I) (ascending bias currents, the first at zero bias) is turned into the
ratio r(I) = L(I)/L(0). For each requested drop d the saturation current is where r first
falls to 1 − d, found by inverse linear interpolation between the two measured points that
bracket it. Piecewise-linear interpolation is monotone between the points (it never invents a
wiggle the data do not have) and never leaves the measured range: a drop not reached by the
largest current measured is reported as "above" that current, not extrapolated.

Its error is bounded: on a bracket of width h, linear interpolation of a smooth r differs from
r by at most h²/8 · max|r''| (the standard error term of linear interpolation, e.g. Burden and
Faires, *Numerical Analysis*, theorem 3.3), so the current found differs from the true one by
at most h²/8 · max|r''| / min|r'| over the bracket (plus the readings' own noise divided by
|r'|). :func:`interpolation_bound` computes it for a known curve.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from acquire.errors import BiasError


@dataclass(frozen=True)
class DropCurrent:
    """The current (A) at which the inductance had dropped by ``drop`` (a fraction).

    ``current`` is None when the drop was not reached up to ``highest``, the largest current
    measured.
    """

    drop: float
    current: float | None
    highest: float

    @property
    def reached(self) -> bool:
        return self.current is not None

    def text(self, digits: int = 3) -> str:
        """``"2.31 A"``, or ``"above 6 A"`` when the drop was not reached."""
        if self.current is None:
            return f"above {self.highest:.{digits}g} A"
        return f"{self.current:.{digits}g} A"


def check_curve(current: np.ndarray, inductance: np.ndarray) -> None:
    """Refuse a curve that cannot give a saturation current (ValueError, saying why)."""
    if current.ndim != 1 or current.shape != inductance.shape or current.size < 2:
        raise BiasError("a bias curve needs at least two points of current and inductance")
    if not (np.all(np.isfinite(current)) and np.all(np.isfinite(inductance))):
        raise BiasError("a bias curve must hold finite numbers only")
    if current[0] != 0.0:
        raise BiasError("a bias curve must start at zero bias (its reference inductance)")
    if np.any(np.diff(current) <= 0):
        raise BiasError("a bias curve's currents must increase from point to point")
    if inductance[0] <= 0:
        raise BiasError("the zero-bias inductance must be positive")


def drop_currents(
    current: np.ndarray, inductance: np.ndarray, drops: Sequence[float]
) -> tuple[DropCurrent, ...]:
    """The saturation current at each drop (fractions in (0, 1)), from a measured curve."""
    current = np.asarray(current, dtype=float)
    inductance = np.asarray(inductance, dtype=float)
    check_curve(current, inductance)
    ratio = inductance / inductance[0]
    found = []
    for drop in drops:
        if not 0 < drop < 1:
            raise BiasError(f"a drop must be between 0 and 100 %, not {drop:g}")
        level = 1.0 - drop
        below = np.flatnonzero(ratio <= level)
        if below.size == 0:
            found.append(DropCurrent(drop, None, float(current[-1])))
            continue
        k = int(below[0])
        i0, i1, r0, r1 = current[k - 1], current[k], ratio[k - 1], ratio[k]
        at = i1 if r0 == r1 else i0 + (r0 - level) * (i1 - i0) / (r0 - r1)
        found.append(DropCurrent(drop, float(at), float(current[-1])))
    return tuple(found)


def interpolation_bound(
    ratio: Callable[[np.ndarray], np.ndarray], left: float, right: float, samples: int = 2001
) -> float:
    """h²/8 · max|r''| / min|r'| on [left, right]: the bound on the interpolated current.

    ``ratio`` is the true curve r(I) (vectorised); its derivatives are taken numerically on a
    fine grid of the bracket.
    """
    grid = np.linspace(left, right, samples)
    step = grid[1] - grid[0]
    values = ratio(grid)
    first = np.gradient(values, step)
    second = np.gradient(first, step)
    h = right - left
    return float(h * h / 8 * np.max(np.abs(second)) / np.min(np.abs(first)))
