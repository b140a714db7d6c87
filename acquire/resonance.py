"""Where a measured impedance turns from inductive to capacitive, and which points to tabulate.

Pure functions of numpy arrays (frequency in Hz, complex impedance in ohm).
"""

from __future__ import annotations

import math

import numpy as np


def self_resonance(f: np.ndarray, z: np.ndarray) -> float | None:
    """The frequency where the impedance ``z`` turns from inductive (X > 0) to capacitive.

    Near a self-resonance the susceptance B = Im(1/Z) passes through zero almost linearly
    (the admittance of a parallel tank is linear in the detuning), so the zero is interpolated
    on B, linearly in frequency, between the two points where X changes sign. Among several such
    changes the one with the largest |Z| is taken, and only if that |Z| is at least a tenth of the
    largest |Z| measured: a resonance peaks in |Z|, while noise around X = 0 at low frequency
    does not. None when the data show no such change.
    """
    f = np.asarray(f, dtype=float)
    z = np.asarray(z, dtype=complex)
    if f.size < 2:
        return None
    x = z.imag
    a, b = x[:-1], x[1:]
    ok = np.isfinite(z[:-1]) & np.isfinite(z[1:])
    turn = ok & (a > 0) & (b <= 0)
    if not turn.any():
        return None
    idx = np.flatnonzero(turn)
    size = np.maximum(np.abs(z[:-1][idx]), np.abs(z[1:][idx]))
    if size.max() < 0.1 * np.max(np.abs(z[np.isfinite(z)])):
        return None
    i = int(idx[np.argmax(size)])
    with np.errstate(divide="ignore", invalid="ignore"):
        b0, b1 = (1 / z[i]).imag, (1 / z[i + 1]).imag
    if not (np.isfinite(b0) and np.isfinite(b1)) or b1 == b0:
        return float(f[i + 1])
    return float(f[i] + (f[i + 1] - f[i]) * (-b0) / (b1 - b0))


def summary_frequencies(f: np.ndarray, count: int = 6) -> np.ndarray:
    """Indices of points to tabulate: those nearest each decade in range, else evenly spread."""
    finite = f[np.isfinite(f) & (f > 0)]
    if finite.size == 0:
        return np.empty(0, dtype=int)
    lo, hi = math.log10(finite.min()), math.log10(finite.max())
    decades = [10.0**d for d in range(math.ceil(lo - 1e-9), math.floor(hi + 1e-9) + 1)]
    if len(decades) >= 3:
        targets = np.log10(decades)
        if len(targets) > count:
            targets = targets[np.linspace(0, len(targets) - 1, count).round().astype(int)]
    else:
        targets = np.linspace(lo, hi, min(count, f.size))
    with np.errstate(divide="ignore", invalid="ignore"):
        lf = np.log10(f)
    picks = [int(np.nanargmin(np.abs(lf - t))) for t in targets]
    return np.array(sorted(set(picks)), dtype=int)
