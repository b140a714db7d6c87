"""The simulated meter's own errors on a reading: random noise and a fixed calibration error.

Pure functions of numpy arrays in SI units (ohm, hertz, volt), apart from the physics of what is
measured (:mod:`drivers.simulator.physics`). :mod:`drivers.simulator.measurement` applies them
with the meter's profile and settings.
"""

from __future__ import annotations

import numpy as np


def noise_deviation(
    magnitude: np.ndarray,
    f: np.ndarray | float,
    accuracy_class: float,
    low_impedance_corner: float,
    high_impedance_corner: float,
    frequency_corner: float,
    level_ratio: float = 1.0,
    speed_factor: float = 1.0,
    averaging: int = 1,
) -> np.ndarray:
    """One-sigma noise, in ohm, of a reading of impedance magnitude ``magnitude``.

    The model (our own; the shape is common practice for such meters, no published source) has a
    relative part equal to the accuracy class ``a``, an absolute impedance floor ``a·Z_low`` that
    dominates at small ``|Z|`` and an admittance floor ``a/Z_high`` that dominates at large ``|Z|``,
    so the relative noise grows at both extremes of ``|Z|``::

        σ = a · k_f · (s/√n) · (√r·|Z| + r·(Z_low + |Z|²/Z_high))

    with ``k_f = 1 + f/f_corner`` (noise grows at high frequency), ``s`` the speed's noise factor,
    ``n`` the averaging count and ``r = V_ref/V`` the reference test level over the one in use
    (a lower level reads noisier: the floors scale as ``r``, the relative part as ``√r``).
    """
    magnitude = np.asarray(magnitude, dtype=float)
    k_f = 1.0 + np.asarray(f, dtype=float) / frequency_corner
    spread = np.sqrt(level_ratio) * magnitude + level_ratio * (
        low_impedance_corner + magnitude**2 / high_impedance_corner
    )
    return accuracy_class * k_f * (speed_factor / np.sqrt(averaging)) * spread


def error_bound(
    magnitude: np.ndarray,
    f: np.ndarray | float,
    systematic_accuracy: float,
    low_impedance_corner: float,
    high_impedance_corner: float,
    frequency_corner: float,
    level_ratio: float = 1.0,
) -> np.ndarray:
    """Bound, in ohm, on the systematic error of the real and of the imaginary part of a reading.

    ``b = a_s · k_f · (|Z| + r·(Z_low + |Z|²/Z_high))`` with the names of
    :func:`noise_deviation` and ``a_s`` the meter's systematic accuracy: the same shape as the
    noise, without the speed and averaging (they do not change the meter's calibration). This is
    what the simulated dialect states as its ``[accuracy]`` (``relative = a_s``).
    """
    magnitude = np.asarray(magnitude, dtype=float)
    k_f = 1.0 + np.asarray(f, dtype=float) / frequency_corner
    floors = level_ratio * (low_impedance_corner + magnitude**2 / high_impedance_corner)
    return systematic_accuracy * k_f * (magnitude + floors)


def systematic_error(
    z: np.ndarray, f: np.ndarray, bound: np.ndarray, key: np.random.SeedSequence
) -> np.ndarray:
    """The meter's systematic error for exact impedances ``z`` at ``f``, fixed by ``key``.

    A meter's calibration error depends on its measuring range and frequency band, not on time:
    here each cell of half a decade of frequency by one decade of ``|Z|`` gets two numbers
    ``(u_R, u_X)`` drawn uniformly in ``[-1, 1]`` from ``key`` and the cell, and the error is
    ``bound·(u_R + j·u_X)``. So repeated readings of one impedance share it (averaging does not
    remove it), one session (``key``) keeps it, and readings in other cells (a short, an open, a
    DUT of another size) get independent draws. Every error lies within ``±bound`` per part.
    The cell comes from the exact impedance, so noise never moves a reading to another cell.
    """
    f = np.asarray(f, dtype=float)
    magnitude = np.maximum(np.abs(np.asarray(z, dtype=complex)), 1e-300)
    band = np.floor(2.0 * np.log10(f)).astype(np.int64)
    decade = np.floor(np.log10(magnitude)).astype(np.int64)
    cells = np.stack([band, decade], axis=-1).reshape(-1, 2)
    unique, where = np.unique(cells, axis=0, return_inverse=True)
    draws = np.empty((len(unique), 2))
    for i, (b, d) in enumerate(unique):
        cell = np.random.SeedSequence(
            key.entropy, spawn_key=(*key.spawn_key, 1 << 20, int(b) + (1 << 16), int(d) + 1024)
        )
        draws[i] = cell.generate_state(2, np.uint64) / 2.0**64 * 2.0 - 1.0
    u = draws[where.reshape(-1)].reshape(np.shape(z) + (2,))
    return np.asarray(bound, dtype=float) * (u[..., 0] + 1j * u[..., 1])


def add_noise(z: np.ndarray, deviation: np.ndarray, normals: np.ndarray) -> np.ndarray:
    """``z`` with independent normal errors of standard deviation ``deviation`` (ohm) added to
    its real and imaginary parts; ``normals`` holds one pair of standard normal draws per point
    (shape ``z.shape + (2,)``: real part, imaginary part)."""
    z = np.asarray(z, dtype=complex)
    pairs = np.asarray(normals, dtype=float).reshape(z.shape + (2,))
    return z + np.asarray(deviation, dtype=float) * (pairs[..., 0] + 1j * pairs[..., 1])
