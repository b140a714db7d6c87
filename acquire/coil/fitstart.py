"""Starting values for the equivalent-circuit fit, read straight off a sweep.

- ``Rdc``: the median resistance of the lowest-frequency points;
- ``L``: the slope of reactance against ω (through the origin) well below any resonance;
- the self-resonance: where the phase crosses zero from inductive to capacitive at the peak of
  ``|Z|``, which also gives ``Cp = 1/((2π f0)² L)``;
- the resistance law's corner: where the resistance first doubles below the resonance.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from acquire.errors import ModelError

MIN_POINTS = 8


@dataclass(frozen=True)
class StartValues:
    """What the data says before any fitting; ``resonance`` is None when none is in range."""

    inductance: float
    rdc: float
    resonance: float | None
    capacitance: float | None
    corner: float


def per_point_sigma(sigma, n: int) -> np.ndarray | None:
    """``sigma`` as an ``(n, 2)`` array (R and X columns), from a number, ``(n,)`` or ``(n, 2)``."""
    if sigma is None:
        return None
    s = np.asarray(sigma, dtype=float)
    if s.ndim == 0 or s.shape == (n,):
        s = np.broadcast_to(s.reshape(-1, 1) if s.ndim else s, (n, 2))
    if s.shape != (n, 2):
        raise ModelError(
            f"the uncertainties have shape {s.shape}, the sweep {n} points: give one per point "
            "(or one for R and one for X per point)"
        )
    return np.array(s)


def clean_sweep(frequency, impedance, sigma=None, systematic=None):
    """Sorted finite points of a sweep, their uncertainties (``(n, 2)`` or None), their
    systematic uncertainties (the same, or a ``(2n, 2n)`` covariance) and how many non-finite
    (overrange, invalid) points, or points without a positive uncertainty, were dropped."""
    f = np.asarray(frequency, dtype=float).ravel()
    z = np.asarray(impedance, dtype=complex).ravel()
    if f.shape != z.shape:
        raise ModelError(f"{f.size} frequencies but {z.size} impedances: the sweep is malformed")
    s = per_point_sigma(sigma, f.size)
    matrix = (
        systematic is not None
        and np.ndim(systematic) == 2
        and np.shape(systematic)
        == (
            2 * f.size,
            2 * f.size,
        )
    )
    b = np.asarray(systematic, dtype=float) if matrix else per_point_sigma(systematic, f.size)
    keep = np.isfinite(f) & np.isfinite(z.real) & np.isfinite(z.imag) & (f > 0)
    if s is not None:
        keep &= np.all(np.isfinite(s) & (s > 0), axis=1)
    if b is not None:
        usable = np.diagonal(b).reshape(2, -1).T if matrix else b
        keep &= np.all(np.isfinite(usable) & (usable >= 0), axis=1)
    dropped = int(f.size - np.count_nonzero(keep))
    f, z = f[keep], z[keep]
    order = np.argsort(f)
    f, z = f[order], z[order]
    if s is not None:
        s = s[keep][order]
    if b is not None and matrix:
        index = np.flatnonzero(keep)[order]
        both = np.concatenate([index, index + keep.size])
        b = b[np.ix_(both, both)]
    elif b is not None:
        b = b[keep][order]
    if f.size < MIN_POINTS:
        raise ModelError(
            f"only {f.size} usable points: the fit needs at least {MIN_POINTS}; "
            "sweep more frequencies"
        )
    if np.any(np.diff(f) <= 0):
        raise ModelError("the sweep repeats a frequency: give each frequency once")
    return f, z, s, b, dropped


def find_resonance(f: np.ndarray, z: np.ndarray) -> float | None:
    """The frequency where the reactance changes from inductive to capacitive at the |Z| peak.

    Interpolated linearly in susceptance (which passes smoothly through zero there, unlike the
    reactance) against ln f between the bracketing points; None when the peak of |Z| sits at the
    top of the sweep or there is no sign change beside it.
    """
    peak = int(np.argmax(np.abs(z)))
    if peak >= f.size - 1:
        return None
    lo = max(peak - 2, 0)
    hi = min(peak + 2, f.size - 1)
    x = z.imag
    for i in range(lo, hi):
        if x[i] > 0 >= x[i + 1]:
            above_negative = np.mean(x[i + 1 : min(i + 6, f.size)] < 0)
            below_positive = np.mean(x[max(i - 4, 0) : i + 1] > 0)
            if above_negative < 0.5 or below_positive < 0.5:
                continue
            b = (1.0 / z[i : i + 2]).imag
            t = -b[0] / (b[1] - b[0])
            return float(math.exp(math.log(f[i]) + t * (math.log(f[i + 1]) - math.log(f[i]))))
    return None


def start_values(f: np.ndarray, z: np.ndarray) -> StartValues:
    """Read the starting values off a cleaned sweep (see the module docstring)."""
    x, r = z.imag, z.real
    if not np.any(x > 0):
        raise ModelError(
            "the sweep is never inductive (reactance ≤ 0 everywhere): is a coil connected, "
            "and were the references captured on this fixture?"
        )
    n_low = max(3, f.size * 15 // 100)
    rdc = float(np.median(r[:n_low]))
    if not rdc > 0:
        rdc = 1e-6 * float(np.median(np.abs(z[:n_low])))
    resonance = find_resonance(f, z)
    span = math.log(f[-1] / f[0])
    limit = resonance / 5.0 if resonance else f[0] * math.exp(0.4 * span)
    low = np.flatnonzero((f <= limit) & (x > 0))
    if low.size < 2:
        low = np.flatnonzero(x > 0)[:3]
    omega = 2.0 * math.pi * f[low]
    inductance = float(np.sum(x[low] * omega) / np.sum(omega**2))
    capacitance = None
    if resonance is not None:
        capacitance = 1.0 / ((2.0 * math.pi * resonance) ** 2 * inductance)
    below = f < (resonance / 2.0 if resonance else f[-1])
    risen = np.flatnonzero(below & (r > 2.0 * rdc))
    corner = float(f[risen[0]]) if risen.size else float(f[below][-1] if below.any() else f[-1])
    return StartValues(inductance, rdc, resonance, capacitance, corner)
