"""Round copper wire: gauge diameters, resistivity, DC and AC resistance, skin depth.

- American Wire Gauge by its definition in ASTM B258: gauge 36 is 0.005 in, gauge 0000 is
  0.4600 in, and the 38 steps between are geometric, so ``d = 0.005 in · 92^((36 − n)/39)``.
- Copper at the International Annealed Copper Standard (IEC 60028): ``1/58 Ω·mm²/m`` at 20 °C,
  temperature coefficient 0.00393 /K, ``ρ(T) = ρ20 (1 + α (T − 20 °C))``.
- Skin depth ``δ = √(ρ / (π f µ0 µr))``.
- AC resistance of an isolated straight round wire from the exact Bessel-function solution in
  Kelvin functions; in a winding the proximity of the other turns raises it further, so for a coil
  this is a lower bound.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import bei, beip, ber, berp

from acquire.coil._validate import non_negative, positive, scalar_or_array
from acquire.coil.constants import (
    COPPER_RESISTIVITY_20C,
    COPPER_TEMPERATURE_COEFFICIENT,
    MU0,
    REFERENCE_TEMPERATURE,
)
from acquire.errors import ModelError

INCH = 0.0254
_AWG_ZEROS = {"0": 0, "00": -1, "000": -2, "0000": -3, "1/0": 0, "2/0": -1, "3/0": -2, "4/0": -3}
_KELVIN_BELOW = 0.01
_KELVIN_ABOVE = 250.0


def awg_diameter(gauge: int | str) -> float:
    """Diameter (metre) of bare round wire of American Wire Gauge ``gauge`` (ASTM B258).

    ``gauge`` is an integer from −3 (0000) to 56, or one of ``"0"``, ``"00"``, ``"000"``,
    ``"0000"``, ``"1/0"`` … ``"4/0"``.
    """
    if isinstance(gauge, str):
        text = gauge.strip()
        if text in _AWG_ZEROS:
            n = _AWG_ZEROS[text]
        else:
            try:
                n = int(text)
            except ValueError:
                raise ModelError(
                    f"{gauge!r} is not a wire gauge; give a number such as 30, or 0000 / 4/0"
                ) from None
    else:
        n = int(gauge)
        if n != gauge:
            raise ModelError(f"AWG gauges are whole numbers (got {gauge!r})")
    if not -3 <= n <= 56:
        raise ModelError(f"AWG {gauge} is outside the gauges defined here (0000 to 56)")
    return 0.005 * INCH * 92.0 ** ((36 - n) / 39.0)


def copper_resistivity(temperature: float = REFERENCE_TEMPERATURE) -> float:
    """Resistivity (Ω·m) of IACS annealed copper at ``temperature`` °C (linear in temperature)."""
    if not math.isfinite(temperature) or not -200.0 <= temperature <= 400.0:
        raise ModelError(
            f"{temperature} °C is outside the range where a linear copper temperature "
            "coefficient is meaningful (−200 to 400 °C)"
        )
    factor = 1.0 + COPPER_TEMPERATURE_COEFFICIENT * (temperature - REFERENCE_TEMPERATURE)
    return COPPER_RESISTIVITY_20C * factor


def skin_depth(
    frequency: ArrayLike,
    resistivity: float = COPPER_RESISTIVITY_20C,
    relative_permeability: float = 1.0,
) -> float | np.ndarray:
    """Skin depth (metre) ``√(ρ / (π f µ0 µr))`` at ``frequency`` (hertz)."""
    f = positive("frequency", frequency)
    positive("resistivity", resistivity)
    positive("relative permeability", relative_permeability)
    return scalar_or_array(np.sqrt(resistivity / (math.pi * f * MU0 * relative_permeability)))


def ac_resistance_ratio(radius_over_skin_depth: ArrayLike) -> float | np.ndarray:
    """``R_ac / R_dc`` of an isolated straight round wire, exact (Kelvin functions).

    With ``x = r/δ`` and ``q = √2 x``:
    ``R_ac/R_dc = (q/2) · (ber q · bei′ q − bei q · ber′ q) / (ber′ q² + bei′ q²)``.
    Below ``x = 0.01`` its expansion ``1 + x⁴/48`` is used, above ``x = 250`` (where the Kelvin
    functions approach overflow) its asymptote ``x/2 + 1/4 + 3/(32x)``; both are exact there to
    better than 1e-9 relative.
    """
    x = non_negative("r/δ", radius_over_skin_depth)
    q = np.sqrt(2.0) * np.clip(x, _KELVIN_BELOW, _KELVIN_ABOVE)
    bp, bip = berp(q), beip(q)
    kelvin = (q / 2.0) * (ber(q) * bip - bei(q) * bp) / (bp**2 + bip**2)
    low = 1.0 + x**4 / 48.0
    high = x / 2.0 + 0.25 + 3.0 / (32.0 * np.maximum(x, _KELVIN_ABOVE))
    ratio = np.where(x < _KELVIN_BELOW, low, np.where(x > _KELVIN_ABOVE, high, kelvin))
    return scalar_or_array(ratio)


def dc_resistance(
    length: float, diameter: float, temperature: float = REFERENCE_TEMPERATURE
) -> float:
    """DC resistance (ohm) of ``length`` metres of copper wire of bare ``diameter`` metres."""
    positive("wire length", length)
    positive("wire diameter", diameter)
    return copper_resistivity(temperature) * length / (math.pi * diameter**2 / 4.0)


def ac_resistance(
    frequency: ArrayLike,
    length: float,
    diameter: float,
    temperature: float = REFERENCE_TEMPERATURE,
) -> float | np.ndarray:
    """AC resistance (ohm) of straight copper wire at ``frequency``: DC times the exact ratio."""
    rho = copper_resistivity(temperature)
    delta = np.asarray(skin_depth(frequency, rho), dtype=float)
    ratio = np.asarray(ac_resistance_ratio(diameter / 2.0 / delta), dtype=float)
    return scalar_or_array(dc_resistance(length, diameter, temperature) * ratio)
