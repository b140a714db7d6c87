"""Type A evaluation from repeated readings (JCGM 100:2008 4.2).

The best estimate of a quantity read ``r`` times is the arithmetic mean (4.2.1); the standard
uncertainty of that mean is the experimental standard deviation of the readings over ``√r``
(4.2.2, 4.2.3), taken for the real and the imaginary part separately, together with their
covariance (5.2.3) when asked.
"""

from __future__ import annotations

import numpy as np

from acquire.errors import InputError


def mean_of_repeats(readings, covariance: bool = False) -> tuple[np.ndarray, np.ndarray | None]:
    """Mean and its standard uncertainty from ``readings`` of shape ``(r, n)`` (r repeats).

    Returns ``(mean, u)`` with ``mean`` complex of shape ``(n,)`` and ``u`` of shape ``(n, 2)``
    (of R and of X, ohm), or with ``covariance`` the ``(n, 2, 2)`` covariance of the mean. ``u``
    is None for a single reading (``r = 1``): then use the meter's stated repeatability
    (:func:`acquire.uncertainty.accuracy.repeatability`).
    """
    z = np.asarray(readings, dtype=complex)
    if z.ndim != 2 or z.shape[0] < 1:
        raise InputError(f"give readings as an array of shape (repeats, points), not {z.shape}")
    mean = z.mean(axis=0)
    r = z.shape[0]
    if r == 1:
        return mean, None
    parts = np.stack([z.real, z.imag], axis=-1)  # (r, n, 2)
    dev = parts - parts.mean(axis=0)
    cov = np.einsum("rni,rnj->nij", dev, dev) / (r - 1) / r
    if covariance:
        return mean, cov
    return mean, np.sqrt(np.diagonal(cov, axis1=1, axis2=2))
