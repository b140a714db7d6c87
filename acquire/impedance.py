"""From complex impedance to what an engineer reads: Ls, Rs, Cs, Lp, Rp, Cp, Q, D, |Z|, theta, X...

Every function takes numpy arrays in SI units (hertz, ohm, henry, farad, siemens) and is
vectorised; nothing loops over points.

Conventions (standard circuit theory; the series/parallel equivalence at one frequency)
----------------------------------------------------------------------------------------
The part's impedance at angular frequency ``w = 2*pi*f`` is ``Z = R + jX``, its admittance
``Y = 1/Z = G + jB`` with ``G = R/|Z|**2`` and ``B = -X/|Z|**2``.

*Series equivalent* (a resistor in series with an inductor or a capacitor):
``Rs = R``, ``Ls = X/w``, ``Cs = -1/(w*X)``.

*Parallel equivalent* (a resistor across an inductor or a capacitor):
``Rp = 1/G = |Z|**2/R``, ``Lp = -1/(w*B) = |Z|**2/(w*X)``, ``Cp = B/w = -X/(w*|Z|**2)``.

Both inductances and both capacitances are *signed*: an inductive part (X > 0) has positive Ls and
Lp and negative Cs and Cp; a capacitive part (X < 0) the reverse. Read the one that matches the
part (theta or the sign of X tells which); the other is the value a part of the opposite kind
would need to show the same reactance.

*Quality and dissipation factors*: ``Q = |X|/R`` and ``D = R/|X| = 1/Q``, the same for the series
and the parallel equivalent (``|B|/G == |X|/R``). For an inductive part this is the familiar
``Q = X/R = w*Ls/Rs``; for a capacitive part ``Q = -X/R``, so Q of a passive part is never
negative. A negative Q or D means a negative resistance: an active part, or a reading that was
compensated with references that do not belong to it.

From these follow the textbook conversions ``Rp = Rs*(1 + Q**2)`` and ``Lp = Ls*(1 + 1/Q**2)``.

Special values (the documented rule; no warning is raised and no NaN appears anywhere else)
--------------------------------------------------------------------------------------------
- ``X == 0`` (pure resistance): ``Ls = 0``, ``Cs = +inf`` (an infinite series capacitor is a
  short), ``Lp = +inf`` (an infinite parallel inductor is an open), ``Cp = 0``, ``B = 0``,
  ``D = +inf`` (or ``-inf`` for ``R < 0``), ``Q = 0``.
- ``R == 0`` (pure reactance): ``Rp = +inf``, ``G = 0``, ``Q = +inf``, ``D = 0``.
- ``Z == 0`` (a perfect short): the series values are 0 (``Cs = +inf``), ``Z = 0``; the parallel
  equivalent of a short is not unique, so ``Rp, Lp, Cp, G, B`` are NaN, and so are ``Q``, ``D`` and
  ``theta``.
- A reading that is not finite (a meter's overrange ``complex(inf, inf)`` or invalid
  ``complex(nan, nan)``): every quantity is NaN except ``Z``, which is ``inf`` for overrange and
  NaN for an invalid reading.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import Any

import numpy as np

from acquire.errors import InputError

#: The keys of :func:`quantities`, in the order they are usually shown.
KEYS: tuple[str, ...] = ("Ls", "Rs", "Cs", "Lp", "Rp", "Cp", "Q", "D", "Z", "theta", "X", "G", "B")


def _angular(f: np.ndarray) -> np.ndarray:
    if not np.isfinite(f).all() or (f <= 0).any():
        raise InputError("frequencies must be finite and above 0 Hz")
    return 2.0 * np.pi * f


def _arrays(f, z) -> tuple[np.ndarray, np.ndarray]:
    try:
        f = np.asarray(f, dtype=float)
        z = np.asarray(z, dtype=complex)
        if f.shape != z.shape:
            f, z = np.broadcast_arrays(f, z)
    except (TypeError, ValueError) as exc:
        raise InputError(
            f"frequency and impedance must be numbers of matching shape ({exc})"
        ) from exc
    return f, z


class computed_once:  # noqa: N801 (used as a decorator, like property)
    """A method turned into an attribute computed on first use and then kept on the instance.

    Like :class:`functools.cached_property` without its lock (which costs more than the small
    array operations it guards here); for objects used by one thread only.
    """

    def __init__(self, method: Callable[[Any], Any]) -> None:
        self._method = method
        self._name = method.__name__
        self.__doc__ = method.__doc__

    def __get__(self, obj: Any, owner: type | None = None) -> Any:
        if obj is None:
            return self
        value = self._method(obj)
        obj.__dict__[self._name] = value
        return value


class _Parts:
    """What several quantities share (R, X, |Z|, where R, X or Z is zero), each computed on
    first use, so that a caller asking for a few quantities pays only for those."""

    def __init__(self, w: np.ndarray, z: np.ndarray) -> None:
        self.w = w
        self.z = z

    @computed_once
    def finite(self) -> np.ndarray:
        return np.isfinite(self.z)

    @computed_once
    def r(self) -> np.ndarray:
        return np.where(self.finite, self.z.real, np.nan)

    @computed_once
    def x(self) -> np.ndarray:
        return np.where(self.finite, self.z.imag, np.nan)

    @computed_once
    def mag(self) -> np.ndarray:
        return np.abs(self.z)

    @computed_once
    def mag2(self) -> np.ndarray:
        return np.where(self.finite, self.mag * self.mag, np.nan)

    @computed_once
    def r0(self) -> np.ndarray:
        return self.r == 0

    @computed_once
    def x0(self) -> np.ndarray:
        return self.x == 0

    @computed_once
    def short(self) -> np.ndarray:
        return self.r0 & self.x0

    @computed_once
    def b(self) -> np.ndarray:
        return np.where(self.short, np.nan, 0.0 - self.x / self.mag2)


def _cs(p: _Parts) -> np.ndarray:
    return np.where(p.x0, np.inf, -1.0 / (p.w * p.x))


def _rp(p: _Parts) -> np.ndarray:
    return np.where(p.short, np.nan, np.where(p.r0, np.inf, p.mag2 / p.r))


def _lp(p: _Parts) -> np.ndarray:
    return np.where(p.short, np.nan, np.where(p.x0, np.inf, p.mag2 / (p.w * p.x)))


def _q(p: _Parts) -> np.ndarray:
    return np.where(p.short, np.nan, np.where(p.r0, np.inf, np.abs(p.x) / p.r))


def _d(p: _Parts) -> np.ndarray:
    return np.where(p.short, np.nan, np.where(p.x0, np.copysign(np.inf, p.r), p.r / np.abs(p.x)))


def _theta(p: _Parts) -> np.ndarray:
    return np.where(p.finite & ~p.short, np.degrees(np.angle(p.z)), np.nan)


#: Each quantity from the shared parts: the one place the rules of the module docstring live.
_RULES: dict[str, Callable[[_Parts], np.ndarray]] = {
    "Ls": lambda p: p.x / p.w,
    "Rs": lambda p: p.r,
    "Cs": _cs,
    "Lp": _lp,
    "Rp": _rp,
    "Cp": lambda p: p.b / p.w,
    "Q": _q,
    "D": _d,
    "Z": lambda p: p.mag,
    "theta": _theta,
    "X": lambda p: p.x,
    "G": lambda p: np.where(p.short, np.nan, p.r / p.mag2),
    "B": lambda p: p.b,
}


def quantities(f, z, names: Iterable[str] = KEYS) -> dict[str, np.ndarray]:
    """Series and parallel equivalents of impedance ``z`` (ohm) at frequency ``f`` (Hz).

    ``f`` and ``z`` are arrays of the same shape (or broadcastable: one frequency for many
    readings). Returns a dict with the keys ``names`` (by default exactly :data:`KEYS`):
    ``Ls`` (H), ``Rs`` (ohm), ``Cs`` (F), ``Lp`` (H), ``Rp`` (ohm), ``Cp`` (F), ``Q``, ``D`` (both
    dimensionless), ``Z`` (ohm, the magnitude), ``theta`` (degrees, from -180 to 180, positive
    for inductive parts), ``X`` (ohm), ``G`` and ``B`` (siemens). Only the quantities asked for
    are computed; each is the same, bit for bit, as in the full set. Signs and the values at
    R = 0, X = 0, Z = 0 and non-finite readings follow the rules in the module docstring. Raises
    :class:`~acquire.errors.InputError` for a frequency that is not finite and positive or a
    name not in :data:`KEYS`.
    """
    f, z = _arrays(f, z)
    w = _angular(f)
    names = tuple(names)
    unknown = [n for n in names if n not in _RULES]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}; known: {', '.join(KEYS)}")
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return quantities_at(w, z, names)


def quantities_at(w: np.ndarray, z: np.ndarray, names: tuple[str, ...]) -> dict[str, np.ndarray]:
    """:func:`quantities` for checked inputs: ``w = 2·π·f`` (float) and ``z`` (complex) of one
    shape, ``names`` all in :data:`KEYS`; the caller ignores division, invalid and overflow in
    an ``np.errstate`` of its own (a sweep's chunk does once for all its steps)."""
    parts = _Parts(w, z)
    return {name: _RULES[name](parts) for name in names}


def series_rl_impedance(f, rs, ls) -> np.ndarray:
    """Impedance of resistor ``rs`` (ohm) in series with inductor ``ls`` (H): ``rs + j*w*ls``."""
    f = np.asarray(f, dtype=float)
    return np.asarray(rs, dtype=float) + 1j * _angular(f) * np.asarray(ls, dtype=float)


def parallel_rl_impedance(f, rp, lp) -> np.ndarray:
    """Impedance of a resistor ``rp`` (ohm) across an inductor ``lp`` (H).

    ``Z = 1/(1/rp + 1/(j*w*lp))``, computed as ``j*w*lp*rp/(rp + j*w*lp)``; ``rp = inf`` gives the
    bare inductor.
    """
    f = np.asarray(f, dtype=float)
    xl = 1j * _angular(f) * np.asarray(lp, dtype=float)
    rp = np.asarray(rp, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where(np.isinf(rp), xl, xl * rp / (rp + xl))


def series_to_parallel(f, rs, ls) -> tuple[np.ndarray, np.ndarray]:
    """Parallel R-L equivalent ``(rp, lp)`` of a series R-L ``(rs, ls)`` at frequency ``f``.

    With ``Q = w*ls/rs``: ``rp = rs*(1 + Q**2)`` and ``lp = ls*(1 + 1/Q**2)`` (standard circuit
    theory: the two networks have the same impedance at that one frequency). ``rs = 0`` gives
    ``rp = inf`` and ``lp = ls``; ``ls = 0`` gives ``rp = rs`` and ``lp = inf``; both zero (a short)
    give NaN.
    """
    f, rs = _arrays(f, rs)
    rs = rs.real
    ls = np.broadcast_to(np.asarray(ls, dtype=float), rs.shape)
    x = _angular(f) * ls
    with np.errstate(divide="ignore", invalid="ignore"):
        short = (rs == 0) & (x == 0)
        rp = np.where(short, np.nan, np.where(rs == 0, np.inf, rs + x * x / rs))
        lp = np.where(short, np.nan, np.where(x == 0, np.inf, ls + rs * rs / (x * _angular(f))))
    return rp, lp


def parallel_to_series(f, rp, lp) -> tuple[np.ndarray, np.ndarray]:
    """Series R-L equivalent ``(rs, ls)`` of a parallel R-L ``(rp, lp)`` at frequency ``f``.

    With ``Qp = rp/(w*lp)`` (the Q of a parallel R-L, equal to the series Q of the result):
    ``rs = rp/(1 + Qp**2)`` and ``ls = lp/(1 + 1/Qp**2)``, the inverse of
    :func:`series_to_parallel`. ``rp = inf`` gives ``rs = 0`` and ``ls = lp``; ``rp = 0`` or
    ``lp = 0`` (a short) gives ``rs = 0`` and ``ls = 0``.
    """
    f, rp = _arrays(f, rp)
    rp = rp.real
    lp = np.broadcast_to(np.asarray(lp, dtype=float), rp.shape)
    x = _angular(f) * lp
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        ratio = np.where(np.isinf(rp), 0.0, x / rp)
        shorted = (rp == 0) | (x == 0)
        rs = np.where(shorted, 0.0, x * ratio / (1.0 + ratio * ratio))
        ls = np.where(shorted, 0.0, lp / (1.0 + ratio * ratio))
    return rs, ls
