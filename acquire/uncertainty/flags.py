"""Where a derived value is past what the tool can measure: flagged, not shown as a number.

A value is *beyond accuracy* when

- its expanded uncertainty is as large as the value itself (``U ≥ |value|``): not even its sign
  is known, or either is not finite; or
- it is a quantity a passive part cannot make negative (Rs, Rp, G, Q, D) and it is below zero
  by more than its expanded uncertainty (``value < −U``): the correction has gone past the
  range where its model and the stated accuracy hold (for example a coil far above its
  self-resonance read through a fixture whose open is close to the coil).

The display shows such a value as "beyond accuracy" instead of a number; the store keeps the
point's flag words (:data:`BEYOND_ACCURACY`).
"""

from __future__ import annotations

import functools
import operator

import numpy as np

from acquire.errors import InputError
from acquire.impedance import KEYS, _angular, _arrays, quantities_at
from acquire.uncertainty.quantities import spread_at

#: The flag word of a point with a value past the tool's accuracy (store column ``flags``).
BEYOND_ACCURACY = "beyond-accuracy"
#: Quantities a passive part cannot make negative.
NEVER_NEGATIVE = ("Rs", "Rp", "G", "Q", "D")
#: What a coil's sweep shows, the default for :func:`point_flags`.
DEFAULT_NAMES = ("Ls", "Rs", "Q")


def beyond_accuracy(f, z, cov, names=DEFAULT_NAMES) -> dict[str, np.ndarray]:
    """Per quantity in ``names``, a boolean array: True where its value is beyond accuracy."""
    f, z = _arrays(f, z)
    w = _angular(f)
    names = tuple(names)
    check_names(names)
    cov = np.asarray(cov, dtype=float)
    if cov.shape != z.shape + (2, 2):
        raise InputError(f"cov must have shape {z.shape + (2, 2)}, not {cov.shape}")
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return judge(w, z, cov, names)


def check_names(names: tuple[str, ...]) -> None:
    """Refuse a name not in :data:`acquire.impedance.KEYS`."""
    unknown = [n for n in names if n not in KEYS]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}; known: {', '.join(KEYS)}")


def judge(w, z, cov, names: tuple[str, ...]) -> dict[str, np.ndarray]:
    """:func:`beyond_accuracy` for checked inputs (the inputs are checked once, not by both the
    values and their uncertainty): ``w = 2·π·f`` (float), ``z`` (complex) and ``cov`` (float,
    ``z.shape + (2, 2)``), ``names`` known; the caller ignores division, invalid and overflow
    in an ``np.errstate`` of its own."""
    values = quantities_at(w, z, names)
    spread = spread_at(w, z, cov, names)
    out = {}
    for name in names:
        v, u = values[name], spread[name]
        # "v or u not finite, or u >= |v|", in fewer steps: u = 2·√var is never -inf, so
        # u < |v| with a finite v holds exactly when both are finite and u is below |v|
        bad = ~((u < np.abs(v)) & np.isfinite(v))
        if name in NEVER_NEGATIVE:
            bad |= v < -u
        out[name] = bad
    return out


def point_flags(f, z, cov, names=DEFAULT_NAMES) -> np.ndarray:
    """Per point, ``"beyond-accuracy"`` if a quantity in ``names`` is beyond accuracy, else ``""``.

    An array of strings, ready for the store's ``flags`` column.
    """
    return flags_from(beyond_accuracy(f, z, cov, names), names)


def flags_from(beyond: dict[str, np.ndarray], names=DEFAULT_NAMES) -> np.ndarray:
    """Per point, ``"beyond-accuracy"`` where :func:`beyond_accuracy`'s judgement ``beyond``
    marks any quantity in ``names``, else ``""``."""
    marks = [np.asarray(beyond[name], dtype=bool) for name in names]
    anyone = functools.reduce(operator.or_, marks) if marks else np.logical_or.reduce(marks)
    return np.where(anyone, BEYOND_ACCURACY, "")
