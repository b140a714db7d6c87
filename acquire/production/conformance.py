"""The measurement-uncertainty maths behind a production verdict (pure functions).

- :func:`conformance_probability`: the probability that a unit whose measured value is ``y``
  with standard uncertainty ``u`` truly lies inside its tolerance limits, for a normal
  distribution of the measurand (JCGM 106:2012, 7.3): ``pc = Φ((TU − y)/u) − Φ((TL − y)/u)``.
- :func:`combined_standard` and :func:`expanded`: a standard uncertainty from a Type A part
  (``s/√n``, JCGM 100:2008 4.2.3) and a Type B part given as the half-width ``a`` of a
  rectangular distribution (``a/√3``, 4.3.7), combined in quadrature (5.1.2), and its
  expansion with a coverage factor ``k`` (6.2.1; k = 2 gives about 95 % for a normal
  distribution).

Φ is computed with :func:`math.erfc` (``Φ(x) = erfc(−x/√2)/2``), so judging a unit needs no
scipy import; the difference of the two Φ is taken on the side where it keeps its digits (the
upper tails when both arguments are positive).
"""

from __future__ import annotations

import math
from typing import overload

import numpy as np

from acquire.errors import InputError

_ROOT2 = math.sqrt(2.0)
_ROOT3 = math.sqrt(3.0)
_erfc_array = np.frompyfunc(math.erfc, 1, 1)


def _probability(y: float, u: float, low: float, high: float) -> float:
    """pc for finite-or-infinite numbers, ``low``/``high`` as ±inf for an open side."""
    if math.isnan(y) or math.isnan(u) or u < 0:
        return math.nan
    if u == 0 or math.isinf(y):
        return 1.0 if low <= y <= high else 0.0
    a = -math.inf if low == -math.inf else (low - y) / u
    b = math.inf if high == math.inf else (high - y) / u
    if a >= 0:  # both in the upper tail: Q(a) − Q(b), Q the upper tail 1 − Φ
        p = 0.5 * (math.erfc(a / _ROOT2) - math.erfc(b / _ROOT2))
    elif b <= 0:  # both in the lower tail: Φ(b) − Φ(a)
        p = 0.5 * (math.erfc(-b / _ROOT2) - math.erfc(-a / _ROOT2))
    else:  # 1 − Φ(a) − Q(b)
        p = 1.0 - 0.5 * (math.erfc(-a / _ROOT2) + math.erfc(b / _ROOT2))
    return min(max(p, 0.0), 1.0)


@overload
def conformance_probability(y: float, u: float, low: float | None, high: float | None) -> float: ...
@overload
def conformance_probability(
    y: np.ndarray, u: np.ndarray | float, low: float | None, high: float | None
) -> np.ndarray: ...
@overload
def conformance_probability(
    y: np.ndarray | float, u: np.ndarray, low: float | None, high: float | None
) -> np.ndarray: ...


def conformance_probability(
    y: float | np.ndarray, u: float | np.ndarray, low: float | None, high: float | None
) -> float | np.ndarray:
    """Probability that the true value lies within ``[low, high]`` (JCGM 106:2012, 7.3.2).

    ``y`` is the measured value and ``u`` its *standard* uncertainty (U / k), both SI; ``low``
    or ``high`` None is an open side. Floats give a float, arrays (broadcast together) an
    array. ``u = 0`` gives 1 inside the limits (inclusive) and 0 outside; a NaN value or
    uncertainty (unknown) gives NaN; a negative ``u`` raises :class:`InputError`.
    """
    tl = -math.inf if low is None else float(low)
    tu = math.inf if high is None else float(high)
    if isinstance(y, float | int) and isinstance(u, float | int):
        if u < 0:
            raise InputError(f"a standard uncertainty cannot be negative ({u})")
        return _probability(float(y), float(u), tl, tu)
    ya, ua = np.broadcast_arrays(np.asarray(y, dtype=float), np.asarray(u, dtype=float))
    if np.any(ua < 0):
        raise InputError("a standard uncertainty cannot be negative")
    return _probability_array(ya, ua, tl, tu)


def _probability_array(y: np.ndarray, u: np.ndarray, tl: float, tu: float) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.full(y.shape, -math.inf) if tl == -math.inf else (tl - y) / u
        b = np.full(y.shape, math.inf) if tu == math.inf else (tu - y) / u
    upper = 0.5 * (_erfc(a / _ROOT2) - _erfc(b / _ROOT2))
    lower = 0.5 * (_erfc(-b / _ROOT2) - _erfc(-a / _ROOT2))
    middle = 1.0 - 0.5 * (_erfc(-a / _ROOT2) + _erfc(b / _ROOT2))
    p = np.where(a >= 0, upper, np.where(b <= 0, lower, middle))
    exact = (u == 0) | np.isinf(y)
    p = np.where(exact, ((y >= tl) & (y <= tu)).astype(float), p)
    p = np.clip(p, 0.0, 1.0)
    return np.where(np.isnan(y) | np.isnan(u), np.nan, p)


def _erfc(x: np.ndarray) -> np.ndarray:
    return np.asarray(_erfc_array(np.nan_to_num(x, nan=0.0)), dtype=float)


def combined_standard(type_a_s: float | None, n: int, type_b_half_width: float | None) -> float:
    """Combined standard uncertainty ``sqrt((s/√n)² + (a/√3)²)`` (JCGM 100:2008, 4.2.3, 4.3.7).

    ``type_a_s`` is the experimental standard deviation of ``n`` readings (or a pooled one from
    earlier work, with ``n`` the readings averaged now, 4.2.4), ``type_b_half_width`` the
    half-width ``a`` of a rectangular distribution; None leaves that part out. A NaN part gives
    NaN (unknown). Raises :class:`InputError` when neither part is given, ``n < 1`` with a Type A
    part, or a part is negative.
    """
    if type_a_s is None and type_b_half_width is None:
        raise InputError("give a Type A standard deviation or a Type B half-width (or both)")
    total = 0.0
    if type_a_s is not None:
        if n < 1:
            raise InputError(f"a Type A standard deviation needs n >= 1 readings, not {n}")
        if type_a_s < 0:
            raise InputError(f"a standard deviation cannot be negative ({type_a_s})")
        total += type_a_s * type_a_s / n
    if type_b_half_width is not None:
        if type_b_half_width < 0:
            raise InputError(f"a half-width cannot be negative ({type_b_half_width})")
        total += (type_b_half_width / _ROOT3) ** 2
    return math.sqrt(total)


def expanded(u: float, k: float = 2.0) -> float:
    """Expanded uncertainty ``U = k u`` (JCGM 100:2008, 6.2.1); k = 2 is the plans' default."""
    if k <= 0:
        raise InputError(f"a coverage factor must be above 0, not {k}")
    return k * u
