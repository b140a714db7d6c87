"""The coil's equivalent circuit used by the fit, and its resistance law.

A winding of inductance ``L`` in series with a resistance that grows with frequency, the whole
shunted by the self-capacitance ``Cp``; optionally a magnetic core whose loss is a constant loss
tangent ``tan δ = µ''/µ'`` of its complex permeability, which turns ``jωL`` into
``jωL (1 − j tan δ)``::

    Z(f) = 1 / ( 1/(R(f) + ωL tan δ + jωL) + jωCp )

Resistance law: ``R(f) = Rdc · (1 + (f/fc)²)^(n/2)``. It is flat below the corner frequency
``fc`` and grows as ``f^n`` above it; ``n = 1/2`` is the high-frequency behaviour of skin effect in
a round wire (``R ∝ √f``), larger exponents appear where the proximity of other turns adds loss.
Below the corner it rises as ``f²``, as the exact round-wire solution does. With no corner
(``fc = None``) the resistance is constant.

The loss tangent adds a series resistance growing in proportion to frequency; a constant tangent is
the usual first description of a ferrite or powder core over a decade or two.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

SKIN_EXPONENT = 0.5


def series_resistance(
    frequency: ArrayLike, rdc: float, corner: float | None = None, exponent: float = SKIN_EXPONENT
) -> np.ndarray:
    """``R(f)`` of the resistance law (ohm)."""
    f = np.asarray(frequency, dtype=float)
    if corner is None:
        return np.full_like(f, rdc)
    return rdc * (1.0 + (f / corner) ** 2) ** (exponent / 2.0)


def coil_impedance(
    frequency: ArrayLike,
    inductance: float,
    rdc: float,
    capacitance: float = 0.0,
    corner: float | None = None,
    exponent: float = SKIN_EXPONENT,
    loss_tangent: float = 0.0,
) -> np.ndarray:
    """Complex impedance (ohm) of the equivalent circuit at ``frequency`` (hertz)."""
    f = np.asarray(frequency, dtype=float)
    omega = 2.0 * math.pi * f
    series = series_resistance(f, rdc, corner, exponent) + omega * inductance * (loss_tangent + 1j)
    return series / (1.0 + 1j * omega * capacitance * series)


def impedance_from_parameters(frequency: ArrayLike, p: dict[str, float]) -> np.ndarray:
    """:func:`coil_impedance` from a dict with keys L, Rdc and optionally Cp, fc, n, tand."""
    return coil_impedance(
        frequency,
        p["L"],
        p["Rdc"],
        p.get("Cp", 0.0),
        p.get("fc"),
        p.get("n", SKIN_EXPONENT),
        p.get("tand", 0.0),
    )
