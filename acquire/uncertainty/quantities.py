"""Expanded uncertainty of the quantities derived from a corrected impedance (Ls, Rs, Q, ...).

Each quantity ``q`` of :func:`acquire.impedance.quantities` is a function of ``(R, X)`` at one
frequency (``ω = 2πf`` exact); its standard uncertainty is ``√(gᵀ·V·g)`` with ``g`` its gradient
and ``V`` the covariance of ``(R, X)`` (JCGM 100:2008 5.2.2, correlated inputs), and ``U = 2u``.
The gradients, with ``|Z|² = R² + X²`` (the definitions of :mod:`acquire.impedance`)::

    Rs = R          (1, 0)                      X  = X       (0, 1)
    Ls = X/ω        (0, 1/ω)                    Cs = −1/(ωX) (0, 1/(ωX²))
    Z  = |Z|        (R/|Z|, X/|Z|)              theta = atan2(X, R) in degrees:
                                                   (180/π)·(−X/|Z|², R/|Z|²)
    G  = R/|Z|²     ((X² − R²)/|Z|⁴, −2RX/|Z|⁴)  B = −X/|Z|²  (2RX/|Z|⁴, (X² − R²)/|Z|⁴)
    Cp = B/ω        (∂B/ω)                       Rp = |Z|²/R  (1 − X²/R², 2X/R)
    Lp = |Z|²/(ωX)  (2R/(ωX), (1 − R²/X²)/ω)
    Q  = |X|/R      (−|X|/R², sign(X)/R)        D  = R/|X|   (1/|X|, −R·sign(X)/X²)

Where a quantity is infinite or undefined (the special values of :mod:`acquire.impedance`), its
uncertainty is NaN or infinite; no warning is raised.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from acquire.errors import InputError
from acquire.impedance import KEYS, computed_once
from acquire.uncertainty.propagation import COVERAGE_FACTOR


class _Shared:
    """What several gradients share, each computed on first use (a caller asking for a few
    quantities pays only for those)."""

    def __init__(self, w: np.ndarray, r: np.ndarray, x: np.ndarray) -> None:
        self.w, self.r, self.x = w, r, x

    @computed_once
    def one(self) -> np.ndarray:
        return np.ones_like(self.r)

    @computed_once
    def zero(self) -> np.ndarray:
        return np.zeros_like(self.r)

    @computed_once
    def m2(self) -> np.ndarray:
        return self.r * self.r + self.x * self.x

    @computed_once
    def m4(self) -> np.ndarray:
        return self.m2 * self.m2

    @computed_once
    def db(self) -> tuple[np.ndarray, np.ndarray]:
        r, x, m4 = self.r, self.x, self.m4
        return (2.0 * r * x / m4, (x * x - r * r) / m4)


def _z(s: _Shared) -> tuple:
    m = np.sqrt(s.m2)
    return (s.r / m, s.x / m)


def _theta(s: _Shared) -> tuple:
    deg = 180.0 / np.pi
    return (-deg * s.x / s.m2, deg * s.r / s.m2)


def _g(s: _Shared) -> tuple:
    r, x, m4 = s.r, s.x, s.m4
    return ((x * x - r * r) / m4, -2.0 * r * x / m4)


def _q(s: _Shared) -> tuple:
    r, x = s.r, s.x
    return (-np.abs(x) / (r * r), np.sign(x) / r)


def _d(s: _Shared) -> tuple:
    r, x = s.r, s.x
    return (1.0 / np.abs(x), -r * np.sign(x) / (x * x))


#: Each quantity's gradient ``(∂/∂R, ∂/∂X)`` from the shared parts (the table above).
_GRADIENTS: dict[str, Callable[[_Shared], tuple]] = {
    "Rs": lambda s: (s.one, s.zero),
    "X": lambda s: (s.zero, s.one),
    "Ls": lambda s: (s.zero, 1.0 / s.w),
    "Cs": lambda s: (s.zero, 1.0 / (s.w * s.x * s.x)),
    "Z": _z,
    "theta": _theta,
    "G": _g,
    "B": lambda s: s.db,
    "Cp": lambda s: (s.db[0] / s.w, s.db[1] / s.w),
    "Rp": lambda s: (1.0 - s.x * s.x / (s.r * s.r), 2.0 * s.x / s.r),
    "Lp": lambda s: (2.0 * s.r / (s.w * s.x), (1.0 - s.r * s.r / (s.x * s.x)) / s.w),
    "Q": _q,
    "D": _d,
}


def quantity_uncertainty(
    f, z, cov, names=KEYS, k: float = COVERAGE_FACTOR
) -> dict[str, np.ndarray]:
    """Expanded uncertainty (``k = 2``) of each quantity in ``names`` (keys of
    :data:`acquire.impedance.KEYS`), in that quantity's unit, per point.

    ``f`` (Hz) and ``z`` (ohm) have one shape; ``cov`` that shape plus ``(2, 2)``: the covariance
    of ``(R, X)`` from :func:`acquire.uncertainty.propagate`.
    """
    f = np.asarray(f, dtype=float)
    z = np.asarray(z, dtype=complex)
    if f.shape != z.shape:
        f, z = np.broadcast_arrays(f, z)
    cov = np.asarray(cov, dtype=float)
    if cov.shape != z.shape + (2, 2):
        raise InputError(f"cov must have shape {z.shape + (2, 2)}, not {cov.shape}")
    unknown = [n for n in names if n not in KEYS]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}; known: {', '.join(KEYS)}")
    w = 2.0 * np.pi * f
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return spread_at(w, z, cov, tuple(names), k)


def spread_at(w, z, cov, names: tuple[str, ...], k: float = COVERAGE_FACTOR):
    """:func:`quantity_uncertainty` for checked inputs: ``w = 2·π·f``, ``z`` and ``cov`` of
    matching shapes, ``names`` all in :data:`acquire.impedance.KEYS`; the caller ignores
    division, invalid and overflow in an ``np.errstate`` of its own."""
    c00, c01, c11 = cov[..., 0, 0], cov[..., 0, 1], cov[..., 1, 1]
    out = {}
    shared = _Shared(w, z.real, z.imag)
    for name in names:
        g0, g1 = _GRADIENTS[name](shared)
        var = g0 * g0 * c00 + 2 * g0 * g1 * c01 + g1 * g1 * c11
        out[name] = k * np.sqrt(var)
    return out
