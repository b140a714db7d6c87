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

import numpy as np

from acquire.errors import InputError
from acquire.impedance import KEYS
from acquire.uncertainty.propagation import COVERAGE_FACTOR


def _gradients(w: np.ndarray, r: np.ndarray, x: np.ndarray) -> dict[str, tuple]:
    m2 = r * r + x * x
    m = np.sqrt(m2)
    m4 = m2 * m2
    dg = ((x * x - r * r) / m4, -2.0 * r * x / m4)
    db = (2.0 * r * x / m4, (x * x - r * r) / m4)
    sx = np.sign(x)
    deg = 180.0 / np.pi
    zero = np.zeros_like(r)
    return {
        "Rs": (np.ones_like(r), zero),
        "X": (zero, np.ones_like(r)),
        "Ls": (zero, 1.0 / w),
        "Cs": (zero, 1.0 / (w * x * x)),
        "Z": (r / m, x / m),
        "theta": (-deg * x / m2, deg * r / m2),
        "G": dg,
        "B": db,
        "Cp": (db[0] / w, db[1] / w),
        "Rp": (1.0 - x * x / (r * r), 2.0 * x / r),
        "Lp": (2.0 * r / (w * x), (1.0 - r * r / (x * x)) / w),
        "Q": (-np.abs(x) / (r * r), sx / r),
        "D": (1.0 / np.abs(x), -r * sx / (x * x)),
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
    f, z = np.broadcast_arrays(f, z)
    cov = np.asarray(cov, dtype=float)
    if cov.shape != z.shape + (2, 2):
        raise InputError(f"cov must have shape {z.shape + (2, 2)}, not {cov.shape}")
    unknown = [n for n in names if n not in KEYS]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}; known: {', '.join(KEYS)}")
    w = 2.0 * np.pi * f
    out = {}
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        grads = _gradients(w, z.real, z.imag)
        for name in names:
            g0, g1 = grads[name]
            var = g0 * g0 * cov[..., 0, 0] + 2 * g0 * g1 * cov[..., 0, 1] + g1 * g1 * cov[..., 1, 1]
            out[name] = k * np.sqrt(var)
    return out
