"""Self-capacitance of a single-layer solenoid (Medhurst) and the self-resonance that follows.

Medhurst (Wireless Engineer, Feb. and Mar. 1947) measured single-layer coils and tabulated the
self-capacitance as ``C = H · D`` picofarad with ``D`` the coil diameter in centimetres and ``H`` a
function of the shape ``l/D`` alone, claiming about 5 % accuracy. The table below is his, as
reproduced in secondary sources; between its entries ``H`` is interpolated with a monotone cubic
(PCHIP) in ``ln(l/D)``. Outside ``0.1 ≤ l/D ≤ 50`` nothing is extrapolated.

Where each entry comes from: ``l/D`` = 0.1, 0.2, 0.3, 0.5, 0.8, 1, 2, 3, 5, 10, 20, 50 are the
values recalled (from memory) from secondary reproductions; ``l/D`` = 1.0 to 5.0 in steps of
0.5 also agree with the reproduction by M. S. Rzeszotarski (Tesla coil mailing list, January
1997, citing Wireless Engineer 24, 1947, pp. 35 and 80). The remaining entries (0.15, 0.25, 0.35,
0.4, 0.45, 0.6, 0.7, 0.9, 6 to 9, 15, 25, 30, 40) are from memory of the published table and have
not been checked against a reproduction; they lie on the smooth curve through the checked ones.

The figure is the coil's own capacitance with its leads cut short, on a low-loss former; leads,
a solid dielectric former and a nearby screen all add to it.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.interpolate import PchipInterpolator

from acquire.coil._validate import positive, scalar_or_array
from acquire.errors import ModelError

#: Medhurst's table: length/diameter -> H in pF per cm of diameter.
MEDHURST_TABLE: tuple[tuple[float, float], ...] = (
    (0.10, 0.96), (0.15, 0.79), (0.20, 0.70), (0.25, 0.64), (0.30, 0.60), (0.35, 0.57),
    (0.40, 0.54), (0.45, 0.52), (0.50, 0.50), (0.60, 0.48), (0.70, 0.47), (0.80, 0.46),
    (0.90, 0.46), (1.0, 0.46), (1.5, 0.47), (2.0, 0.50), (2.5, 0.56), (3.0, 0.61),
    (3.5, 0.67), (4.0, 0.72), (4.5, 0.77), (5.0, 0.81), (6.0, 0.92), (7.0, 1.01),
    (8.0, 1.12), (9.0, 1.22), (10.0, 1.32), (15.0, 1.86), (20.0, 2.36), (25.0, 2.9),
    (30.0, 3.4), (40.0, 4.6), (50.0, 5.8),
)  # fmt: skip

MEDHURST_ACCURACY = 0.05
"""Relative accuracy Medhurst claimed for his table."""

_RATIOS = np.array([r for r, _ in MEDHURST_TABLE])
_INTERP = PchipInterpolator(np.log(_RATIOS), np.array([h for _, h in MEDHURST_TABLE]))


def medhurst_factor(length_over_diameter: ArrayLike) -> float | np.ndarray:
    """Medhurst's ``H`` (pF per cm of diameter) at the shape ``l/D``; refuses shapes off it."""
    ratio = positive("length/diameter", length_over_diameter)
    lo, hi = _RATIOS[0], _RATIOS[-1]
    if np.any(ratio < lo * (1 - 1e-12)) or np.any(ratio > hi * (1 + 1e-12)):
        raise ModelError(
            f"Medhurst's table covers length/diameter from {lo:g} to {hi:g}; "
            f"{np.min(ratio):.3g}..{np.max(ratio):.3g} is outside it and is not extrapolated"
        )
    return scalar_or_array(_INTERP(np.log(np.clip(ratio, lo, hi))))


def medhurst_capacitance(diameter: float, length: float) -> float:
    """Self-capacitance (farad) of a single-layer solenoid: ``diameter``, winding ``length``."""
    positive("diameter", diameter)
    positive("length", length)
    h = float(medhurst_factor(length / diameter))
    return h * (diameter * 100.0) * 1e-12


def self_resonant_frequency(inductance: ArrayLike, capacitance: ArrayLike) -> float | np.ndarray:
    """``1 / (2π √(L C))`` (hertz): the lossless resonance of ``L`` with its parallel ``C``."""
    big_l = positive("inductance", inductance)
    c = positive("capacitance", capacitance)
    return scalar_or_array(1.0 / (2.0 * math.pi * np.sqrt(big_l * c)))
