"""Nagaoka's coefficient: how much a finite solenoid falls short of the infinitely long one.

The inductance of a uniform cylindrical current sheet of diameter D and length l carrying N turns
is ``K · µ0 N² (π D²/4) / l`` where ``K`` depends only on ``D/l``. Nagaoka (1909) gave ``K`` in
closed form with complete elliptic integrals; Lundin (Proc. IEEE, 1985) and Wheeler (Proc. IRE,
1928) gave algebraic approximations. All three take ``x = D/l`` and return a pure number.

A note on conventions: :func:`scipy.special.ellipk` and :func:`scipy.special.ellipe` take the
*parameter* ``m = k²``, not the modulus ``k``. Passing ``k`` is a classic mistake that still
gives plausible-looking numbers (it is off by 20 % at D/l = 1); the tests check against Grover's
table and against a direct quadrature of the integrals in terms of the modulus.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import ellipe, ellipkm1

from acquire.coil._validate import positive as _positive
from acquire.coil._validate import scalar_or_array as _out

_SERIES_BELOW = 0.01


def nagaoka(diameter_over_length: ArrayLike) -> float | np.ndarray:
    """Nagaoka's coefficient computed exactly from complete elliptic integrals.

    With ``x = D/l``, the modulus is ``k = x/√(1+x²)`` and ``k' = √(1-k²)``; then
    ``K = 4/(3π k') · [ (k'²/k²)(K(k) − E(k)) + E(k) − k ]`` (Nagaoka 1909). Below ``x = 0.01``
    the series ``1 − 4x/(3π) + x²/8 − x⁴/64`` is used (its error there is below 1e-16). The
    first-kind integral is evaluated as ``ellipkm1(1 − m)`` so that very short coils (k → 1) keep
    full precision.
    """
    x = _positive("diameter_over_length", diameter_over_length)
    small = x < _SERIES_BELOW
    xs = np.where(small, 1.0, x)
    m = xs**2 / (1.0 + xs**2)
    m1 = 1.0 / (1.0 + xs**2)
    k = np.sqrt(m)
    kp = np.sqrt(m1)
    big_k = ellipkm1(m1)
    big_e = ellipe(m)
    exact = 4.0 / (3.0 * math.pi * kp) * ((m1 / m) * (big_k - big_e) + big_e - k)
    series = 1.0 - 4.0 * x / (3.0 * math.pi) + x**2 / 8.0 - x**4 / 64.0
    return _out(np.where(small, series, exact))


def _lundin_f1(u: np.ndarray) -> np.ndarray:
    return (1.0 + 0.383901 * u + 0.017108 * u**2) / (1.0 + 0.258952 * u)


def _lundin_f2(u: np.ndarray) -> np.ndarray:
    return 0.093842 * u + 0.002029 * u**2 - 0.000801 * u**3


def nagaoka_lundin(diameter_over_length: ArrayLike) -> float | np.ndarray:
    """Lundin's closed-form approximation of Nagaoka's coefficient (Proc. IEEE, 1985).

    For ``x = D/l ≤ 1``: ``f1(x²) − 4x/(3π)``; for ``x > 1``:
    ``(2/(π x)) · [ (ln(4x) − 1/2) f1(1/x²) + f2(1/x²) ]`` with
    ``f1(u) = (1 + 0.383901 u + 0.017108 u²)/(1 + 0.258952 u)`` and
    ``f2(u) = 0.093842 u + 0.002029 u² − 0.000801 u³``. Agrees with :func:`nagaoka` to a few ppm
    for every shape.
    """
    x = _positive("diameter_over_length", diameter_over_length)
    long_coil = _lundin_f1(x**2) - 4.0 * x / (3.0 * math.pi)
    y = 1.0 / x
    short_coil = (2.0 * y / math.pi) * (
        (np.log(4.0 * x) - 0.5) * _lundin_f1(y**2) + _lundin_f2(y**2)
    )
    return _out(np.where(x <= 1.0, long_coil, short_coil))


def nagaoka_wheeler(diameter_over_length: ArrayLike) -> float | np.ndarray:
    """Wheeler's long-coil approximation (Proc. IRE, 1928): ``1 / (1 + 0.45 D/l)``.

    This is his ``L = r²N²/(9r + 10l)`` µH (inches) written as a coefficient. About 1 % for
    ``0.4 ≤ l/D ≤ 3``; it worsens quickly for shorter coils.
    """
    x = _positive("diameter_over_length", diameter_over_length)
    return _out(1.0 / (1.0 + 0.45 * x))
