"""A saturation current as a judged value: the current found on a unit's bias sweep, and its U.

The current where Ls has dropped by ``d`` is found by :func:`acquire.bias.saturation.drop_currents`
(inverse linear interpolation between the two sweep points that bracket the level
``(1 − d)·L(0)``). Its expanded uncertainty (k = 2) combines two parts:

- the readings: the inductance's standard uncertainty u(L) (half the larger U of the two
  bracketing points) and the level's, (1 − d)·u(L(0)), carried to the current through the local
  slope of the curve, |dI/dL| = (I₁ − I₀)/(L₀ − L₁) from the two bracketing points:
  u₁ = |dI/dL| · √(u(L)² + ((1 − d)·u(L(0)))²) (GUM, JCGM 100:2008, 5.1.2, first-order; the two
  taken as independent, which over-states u₁ when the meter's error is common to both);
- the curve between the points, which is unknown: the interpolation bound h²/8·max|r''|/min|r'|
  needs r'', which only a known curve gives. What is known is that a core's inductance falls
  monotonically with current, so the true crossing lies inside the bracket [I₀, I₁]. With
  nothing else known, it is taken as anywhere in the bracket: a rectangular distribution
  (GUM 4.3.7) centred on the interpolated current with the half-width a = the distance to the
  farther end of the bracket (between h/2 and h; half a step would be right only for an
  estimate at the bracket's middle), u₂ = a/√3 (computed).

U = 2·√(u₁² + u₂²). An unknown u(L) (a meter with no stated accuracy) makes U unknown (NaN).

A drop not reached up to the sweep's largest current ``I_max`` means the saturation current lies
above ``I_max``. The value judged is then ``I_max`` itself, a lower bound: for a ``minimum``
limit (at most ``I_max``, as the plan file ensures) that is the conservative reading, with U = 0
when the last reading lies above the level by more than its own expanded uncertainty (the
current is then above ``I_max`` with at least the confidence of that U), else U from the
readings through the slope of the last two points. For a check with a ``maximum`` limit an
unreached drop is judged as an infinite value, i.e. a fail: the saturation current is above
``I_max``, and the plan file keeps ``maximum`` at or below ``I_max``.
"""

from __future__ import annotations

import math

import numpy as np

from acquire.bias.saturation import DropCurrent, drop_currents
from acquire.production.plan import Limit


def saturation_value(
    current: np.ndarray,
    inductance: np.ndarray,
    expanded_u: np.ndarray,
    drop: float,
    limit: Limit,
) -> tuple[float, float, DropCurrent]:
    """(value A, U A with k = 2, the drop current found) for one saturation check.

    ``current`` ascending from 0 A, ``inductance`` Ls at each (H), ``expanded_u`` its U (k = 2,
    NaN unknown); see the module docstring.
    """
    current = np.asarray(current, dtype=float)
    inductance = np.asarray(inductance, dtype=float)
    big_u = np.asarray(expanded_u, dtype=float)
    (found,) = drop_currents(current, inductance, [drop])
    level = (1.0 - drop) * inductance[0]
    u_level = (1.0 - drop) * big_u[0] / 2.0
    if found.current is None:
        if limit.high is not None:
            return math.inf, math.nan, found
        margin = inductance[-1] - level
        u_last = math.hypot(big_u[-1] / 2.0, u_level)
        if not math.isfinite(u_last):
            return found.highest, math.nan, found
        if margin > 2.0 * u_last:
            return found.highest, 0.0, found
        slope = _slope(current[-2], current[-1], inductance[-2], inductance[-1])
        return found.highest, 2.0 * slope * u_last, found
    k = int(np.flatnonzero(inductance <= level)[0])
    i0, i1 = float(current[k - 1]), float(current[k])
    slope = _slope(i0, i1, inductance[k - 1], inductance[k])
    u_l = max(big_u[k - 1], big_u[k]) / 2.0
    u_readings = slope * math.hypot(u_l, u_level)
    half = max(found.current - i0, i1 - found.current)
    u_curve = half / math.sqrt(3.0)
    return found.current, 2.0 * math.hypot(u_readings, u_curve), found


def _slope(i0: float, i1: float, l0: float, l1: float) -> float:
    """|dI/dL| between two points (A/H); infinite on a flat stretch."""
    fall = float(l0 - l1)
    return math.inf if fall == 0 else abs(float(i1 - i0) / fall)
