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

Round-wire law (``wire``): the exact solution for a round wire (S. Ramo, J. R. Whinnery,
T. Van Duzer, *Fields and Waves in Communication Electronics*, 3rd ed., 1994, section 5.5)::

    Z_wire/Rdc = (ka/2)·J0(ka)/J1(ka),   ka = (1 − j)·√(f/fw)

where ``fw`` is the frequency at which the skin depth equals the wire's radius. Its imaginary
part is the wire's internal inductance, ``Rdc/(8π·fw)`` at DC, fading as the current crowds to
the surface. Neighbouring turns add loss: the fit scales the excess resistance by a proximity
factor ``kp`` (``R = Rdc·(1 + kp·(Re − 1))``; ``kp = 1`` is the isolated wire). With this law
the series inductance ``L`` is the external one, and the inductance at low frequency is
``L + Rdc/(8π·fw)`` (:func:`low_frequency_inductance`).

The loss tangent adds a series resistance growing in proportion to frequency; a constant tangent is
the usual first description of a ferrite or powder core over a decade or two.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import jve

SKIN_EXPONENT = 0.5


def series_resistance(
    frequency: ArrayLike, rdc: float, corner: float | None = None, exponent: float = SKIN_EXPONENT
) -> np.ndarray:
    """``R(f)`` of the resistance law (ohm)."""
    f = np.asarray(frequency, dtype=float)
    if corner is None:
        return np.full_like(f, rdc)
    return rdc * (1.0 + (f / corner) ** 2) ** (exponent / 2.0)


def round_wire_ratio(frequency: ArrayLike, corner: float) -> np.ndarray:
    """``Z_wire/Rdc`` of a round wire whose skin depth equals its radius at ``corner`` (hertz)."""
    x2 = np.asarray(frequency, dtype=float) / corner
    ka = (1.0 - 1.0j) * np.sqrt(x2)
    small = x2 < 1e-6
    safe = np.where(small, 1.0, ka)
    return np.where(small, 1.0 + 0.25j * x2, safe / 2.0 * jve(0, safe) / jve(1, safe))


def winding_impedance(
    frequency: ArrayLike,
    rdc: float,
    corner: float | None = None,
    exponent: float = SKIN_EXPONENT,
    wire_corner: float | None = None,
    proximity: float = 1.0,
) -> np.ndarray:
    """The winding's own impedance (ohm): the resistance law, or the round wire when
    ``wire_corner`` is given (resistance and internal reactance)."""
    if wire_corner is None:
        return series_resistance(frequency, rdc, corner, exponent).astype(complex)
    ratio = round_wire_ratio(frequency, wire_corner)
    return rdc * (1.0 + proximity * (ratio.real - 1.0) + 1j * ratio.imag)


def low_frequency_inductance(p: dict[str, float]) -> float:
    """The inductance as ``f → 0`` (henry): ``L``, plus ``Rdc/(8π·fw)`` with the round-wire law."""
    if "fw" in p:
        return p["L"] + p["Rdc"] / (8.0 * math.pi * p["fw"])
    return p["L"]


def coil_impedance(
    frequency: ArrayLike,
    inductance: float,
    rdc: float,
    capacitance: float = 0.0,
    corner: float | None = None,
    exponent: float = SKIN_EXPONENT,
    loss_tangent: float = 0.0,
    wire_corner: float | None = None,
    proximity: float = 1.0,
) -> np.ndarray:
    """Complex impedance (ohm) of the equivalent circuit at ``frequency`` (hertz)."""
    f = np.asarray(frequency, dtype=float)
    omega = 2.0 * math.pi * f
    winding = winding_impedance(f, rdc, corner, exponent, wire_corner, proximity)
    series = winding + omega * inductance * (loss_tangent + 1j)
    return series / (1.0 + 1j * omega * capacitance * series)


def impedance_from_parameters(frequency: ArrayLike, p: dict[str, float]) -> np.ndarray:
    """:func:`coil_impedance` from a dict: L, Rdc and optionally Cp, fc, n, tand, fw, kp."""
    return coil_impedance(
        frequency,
        p["L"],
        p["Rdc"],
        p.get("Cp", 0.0),
        p.get("fc"),
        p.get("n", SKIN_EXPONENT),
        p.get("tand", 0.0),
        p.get("fw"),
        p.get("kp", 1.0),
    )
