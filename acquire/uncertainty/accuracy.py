"""The meter's stated accuracy: the error bound (Type B) and the repeatability of one reading.

``accuracy`` is a :class:`drivers.dialect.MeterAccuracy` (a dialect's ``[accuracy]`` table) or
any object with the same attributes. For a reading of magnitude ``|Z|`` (ohm) at ``f`` (Hz) and
test level ``V`` (V rms), with ``k_f = 1 + f/frequency_corner`` and ``r = reference_level/V``
(``r = 1`` when the level is not known):

- half-width of the error of R and of X, each, in ohm (our own form: a relative part and the
  floors of an impedance and an admittance, which make the relative error grow at low and high
  ``|Z|``, all growing with frequency)::

      a = relative · k_f · (|Z| + r·(low_impedance + |Z|²/high_impedance))

- standard deviation of one reading of R and of X, each, at speed word ``s`` with ``n`` readings
  averaged by the meter::

      σ = repeatability · k_f · (speed_factors[s]/√n)
          · (√r·|Z| + r·(low_impedance + |Z|²/high_impedance))

The half-width is taken as the bound of a rectangular distribution, so its standard uncertainty
is ``a/√3`` (JCGM 100:2008 4.3.7). The bound does not depend on speed or averaging (they change
the spread of readings, not the meter's calibration).
"""

from __future__ import annotations

import math

import numpy as np

from acquire.errors import InputError


def _inputs(f, z, accuracy, level) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    f = np.asarray(f, dtype=float)
    magnitude = np.abs(np.asarray(z, dtype=complex))
    f, magnitude = np.broadcast_arrays(f, magnitude)
    if level is None:
        ratio = 1.0
    else:
        level = float(level)
        if not (math.isfinite(level) and level > 0):
            raise InputError(f"the test level must be a positive number of volts, not {level}")
        ratio = accuracy.reference_level / level
    k_f = 1.0 + f / accuracy.frequency_corner
    return f, magnitude, k_f, ratio


def _floors(accuracy, magnitude: np.ndarray) -> np.ndarray:
    return accuracy.low_impedance + magnitude**2 / accuracy.high_impedance


def half_width(f, z, accuracy, level=None) -> np.ndarray:
    """Bound (ohm) on the error of the real and of the imaginary part of a reading ``z`` at ``f``.

    NaN for a reading that is not finite.
    """
    _, magnitude, k_f, r = _inputs(f, z, accuracy, level)
    with np.errstate(invalid="ignore", over="ignore"):
        a = accuracy.relative * k_f * (magnitude + r * _floors(accuracy, magnitude))
    return np.where(np.isfinite(magnitude), a, np.nan)


def reading_uncertainty(f, z, accuracy, level=None, speed=None, averaging=1) -> np.ndarray:
    """Type B standard uncertainty (ohm, of R and of X each) of a reading from the stated accuracy.

    ``half_width / √3`` (rectangular distribution, JCGM 100:2008 4.3.7). ``speed`` and
    ``averaging`` are accepted for symmetry with :func:`repeatability`; the bound does not
    depend on them.
    """
    _averaging(averaging)
    return half_width(f, z, accuracy, level) / math.sqrt(3.0)


def repeatability(f, z, accuracy, level=None, speed=None, averaging=1) -> np.ndarray:
    """Stated standard deviation (ohm, of R and of X each) of one reading ``z`` at ``f``.

    Used as the Type A standard uncertainty of a reading taken once (a value stated by the
    meter's maker, so strictly Type B; JCGM 100:2008 4.3.3 allows such a pooled estimate).
    ``speed`` is a speed word of the dialect; unknown words raise
    :class:`~acquire.errors.InputError` when the accuracy names factors per speed.
    """
    n = _averaging(averaging)
    _, magnitude, k_f, r = _inputs(f, z, accuracy, level)
    factors = getattr(accuracy, "speed_factors", None) or {}
    factor = 1.0
    if factors and speed is not None:
        if speed not in factors:
            raise InputError(
                f"the accuracy states no repeatability for speed {speed!r}; "
                f"use one of {', '.join(factors)}"
            )
        factor = factors[speed]
    with np.errstate(invalid="ignore", over="ignore"):
        spread = math.sqrt(r) * magnitude + r * _floors(accuracy, magnitude)
        sigma = accuracy.repeatability * k_f * (factor / math.sqrt(n)) * spread
    return np.where(np.isfinite(magnitude), sigma, np.nan)


def _averaging(averaging) -> int:
    n = int(averaging)
    if n != averaging or n < 1:
        raise InputError(
            f"averaging must be a whole number of readings, 1 or more, not {averaging}"
        )
    return n
