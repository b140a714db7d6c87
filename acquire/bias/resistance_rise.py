"""A winding's temperature from its resistance (the resistance method), and when it has settled.

A copper winding's resistance is proportional to (T + 234.5 °C), 234.5 °C being the
temperature at which copper's resistance would extrapolate to zero (IEC 60076-2, the
resistance method for the temperature rise of windings; from memory). So, from a resistance
``r_cold`` at a known temperature ``t_cold`` and a resistance ``r_hot`` later,

    T_hot = r_hot / r_cold · (234.5 + t_cold) − 234.5,      rise = T_hot − t_ambient.

The value agrees with copper's temperature coefficient at 20 °C, 1/(234.5 + 20) = 0.00393 /K
(IEC 60028), which :mod:`acquire.production.dc_resistance` uses.
"""

from __future__ import annotations

import numpy as np

from acquire.errors import BiasError

#: °C: the temperature at which copper's resistance extrapolates to zero (IEC 60076-2).
COPPER_ZERO = 234.5


def winding_temperature(
    r_hot: np.ndarray | float,
    r_cold: float,
    t_cold: float,
    zero: float = COPPER_ZERO,
) -> np.ndarray:
    """The winding's mean temperature (°C) when its resistance is ``r_hot``."""
    if not (r_cold > 0 and np.isfinite(r_cold)):
        raise BiasError("the cold resistance must be a positive number of ohm")
    return np.asarray(r_hot, dtype=float) / r_cold * (zero + t_cold) - zero


def temperature_rise(
    r_hot: np.ndarray | float,
    r_cold: float,
    t_cold: float,
    t_ambient: float,
    zero: float = COPPER_ZERO,
) -> np.ndarray:
    """The winding's rise above the ambient (K) when its resistance is ``r_hot``."""
    return winding_temperature(r_hot, r_cold, t_cold, zero) - t_ambient


def _last_window(times: np.ndarray, rises: np.ndarray, window: float) -> tuple[np.ndarray, ...]:
    keep = times >= times[-1] - window
    return times[keep], rises[keep]


def has_settled(times: np.ndarray, rises: np.ndarray, window: float, tolerance: float) -> bool:
    """Whether the rise's straight-line trend over the last ``window`` seconds changes it by at
    most ``tolerance`` (K).

    Needs readings spanning at least the window. The trend is the least-squares slope of the
    readings in the window, times the window: unlike the spread of the readings (which grows
    with their noise however still the winding is), its noise shrinks as √(12/n)·σ with n
    readings of noise σ, so more readings in the window settle a noisy winding. A first-order
    warming approaches its end value exponentially: a window at least as long as the part's
    thermal time constant leaves a remaining rise of at most about the tolerance (common
    practice, no published source).
    """
    times = np.asarray(times, dtype=float)
    rises = np.asarray(rises, dtype=float)
    if times.size < 3 or times[-1] - times[0] < window:
        return False
    t, r = _last_window(times, rises, window)
    if t.size < 3 or np.ptp(t) == 0:
        return False
    slope = np.polyfit(t - t.mean(), r, 1)[0]
    return bool(abs(slope) * window <= tolerance)


def settled_rise(times: np.ndarray, rises: np.ndarray, window: float) -> float:
    """The rise at the last reading, from the straight line fitted over the last ``window``
    seconds (less noisy than the last reading alone)."""
    times = np.asarray(times, dtype=float)
    rises = np.asarray(rises, dtype=float)
    t, r = _last_window(times, rises, window)
    if t.size < 2 or np.ptp(t) == 0:
        return float(rises[-1])
    slope, level = np.polyfit(t - t.mean(), r, 1)
    return float(level + slope * (t[-1] - t.mean()))


def current_for_rise(current: float, rise: float, target: float) -> float:
    """The next current to try so that the settled rise becomes ``target``.

    The heat is I²·R, so the rise grows about as the square of the current: I·√(target/rise).
    (Copper's resistance grows with the heat too, so this undershoots slightly; a search
    repeats it until the rise is within its tolerance.)
    """
    if not (current > 0 and rise > 0 and target > 0):
        raise BiasError("current, rise and target must be positive")
    return float(current * np.sqrt(target / rise))
