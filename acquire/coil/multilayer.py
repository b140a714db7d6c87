"""Inductance of multilayer air-core windings of rectangular cross-section.

Two methods:

- :func:`wheeler_multilayer_inductance`: Wheeler's formula (Proc. IRE, 1928),
  ``L = 0.8 a² N² / (6a + 9l + 10c)`` µH with the mean radius ``a``, winding length ``l`` and
  radial depth ``c`` in inches; stated accurate to about 1 % when the three terms of the
  denominator are about equal, and less accurate as they grow unequal.
- :func:`loop_sum_inductance`: the winding treated as coaxial circular turns, summing Maxwell's
  exact mutual inductance of two coaxial circles (complete elliptic integrals) over every pair,
  plus the low-frequency self-inductance ``µ0 a (ln(8a/ρ) − 7/4)`` of each round-wire turn. It
  ignores only the helical pitch and is the reference the formula is tested against; its cost
  grows as the square of the number of turns.
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ellipe, ellipkm1

from acquire.coil._validate import positive
from acquire.coil.constants import MU0
from acquire.errors import ModelError

INCH = 0.0254
WHEELER_MULTILAYER_ACCURACY = 0.01
"""About 1 % when 6a, 9l and 10c are about equal (Wheeler 1928)."""

LOOP_SUM_MAX_TURNS = 5000
_CHUNK = 256


def wheeler_multilayer_inductance(
    turns: float, mean_diameter: float, length: float, depth: float
) -> float:
    """Wheeler's multilayer formula (henry), SI in and out; ``depth`` is the radial build."""
    positive("turns", turns)
    positive("mean diameter", mean_diameter)
    positive("length", length)
    positive("depth", depth)
    a = mean_diameter / 2.0
    return 0.8e-6 / INCH * a**2 * turns**2 / (6.0 * a + 9.0 * length + 10.0 * depth)


def wheeler_balance(mean_diameter: float, length: float, depth: float) -> float:
    """Largest over smallest of Wheeler's denominator terms 6a, 9l, 10c (1 means ideal shape)."""
    terms = (3.0 * mean_diameter, 9.0 * length, 10.0 * depth)
    return max(terms) / min(terms)


def coaxial_mutual_inductance(
    radius_a: np.ndarray, radius_b: np.ndarray, separation: np.ndarray
) -> np.ndarray:
    """Maxwell's mutual inductance (henry) of coaxial circles of radii ``a``, ``b``, ``z`` apart.

    ``M = µ0 √(ab) [ (2/k − k) K(k) − (2/k) E(k) ]`` with ``k² = 4ab / ((a+b)² + z²)``; the
    elliptic integrals take the parameter ``m = k²`` (``K`` via ``ellipkm1(1 − m)``).
    """
    a = np.asarray(radius_a, dtype=float)
    b = np.asarray(radius_b, dtype=float)
    z = np.asarray(separation, dtype=float)
    denom = (a + b) ** 2 + z**2
    m = 4.0 * a * b / denom
    m1 = ((a - b) ** 2 + z**2) / denom
    k = np.sqrt(m)
    return MU0 * np.sqrt(a * b) * ((2.0 / k - k) * ellipkm1(m1) - (2.0 / k) * ellipe(m))


def loop_sum_inductance(radii: np.ndarray, positions: np.ndarray, wire_diameter: float) -> float:
    """Low-frequency inductance (henry) of coaxial round-wire turns at ``radii`` and ``positions``.

    Each turn is a circle of radius ``radii[i]`` (to the wire centre) at axial ``positions[i]``.
    Adjacent turns must not overlap (centres at least one wire diameter apart).
    """
    r = positive("turn radius", radii).ravel()
    z = np.asarray(positions, dtype=float).ravel()
    positive("wire diameter", wire_diameter)
    if r.shape != z.shape:
        raise ModelError("each turn needs one radius and one axial position")
    if r.size > LOOP_SUM_MAX_TURNS:
        raise ModelError(
            f"the turn-by-turn sum is limited to {LOOP_SUM_MAX_TURNS} turns (got {r.size})"
        )
    rho = wire_diameter / 2.0
    self_terms = MU0 * r * (np.log(8.0 * r / rho) - 1.75)
    total = float(np.sum(self_terms))
    for start in range(0, r.size, _CHUNK):
        rows = slice(start, start + _CHUNK)
        ra, za = r[rows, None], z[rows, None]
        distance = np.hypot(ra - r[None, :], za - z[None, :])
        index = np.arange(start, min(start + _CHUNK, r.size))[:, None]
        if np.any((distance < wire_diameter * (1 - 1e-9)) & (index != np.arange(r.size))):
            raise ModelError("two turns overlap: their centres are closer than a wire diameter")
        mutual = coaxial_mutual_inductance(ra, r[None, :], za - z[None, :])
        mutual = np.where(index == np.arange(r.size), 0.0, mutual)
        total += float(np.sum(mutual))
    return total


def layered_turns(
    turns: int, layers: int, inner_diameter: float, length: float, wire_diameter: float
) -> tuple[np.ndarray, np.ndarray]:
    """Radii and axial positions of ``turns`` laid in ``layers`` layers on a former.

    Turns fill each layer at pitch ``length / turns_per_layer`` (the last layer may be partly
    filled); layers are stacked one wire diameter apart, starting at the former's surface.
    """
    if turns < 1 or layers < 1 or turns != int(turns) or layers != int(layers):
        raise ModelError("turns and layers must be whole numbers of at least 1")
    per_layer = math.ceil(turns / layers)
    pitch = length / per_layer
    index = np.arange(int(turns))
    layer = index // per_layer
    slot = index % per_layer
    radii = inner_diameter / 2.0 + wire_diameter * (layer + 0.5)
    positions = (slot + 0.5) * pitch
    return radii, positions
