"""Physical constants and reference material properties used by the coil models.

``MU0`` is the magnetic constant taken as exactly 4π·10⁻⁷ H/m, the value fixed by the SI before
2019. The CODATA 2018 value (``scipy.constants.mu_0``) differs from it by about 5.5·10⁻¹⁰
relative, far below any accuracy stated here; the classical inductance tables (Grover) and the
skin-depth check values were computed with 4π·10⁻⁷, so using it keeps them comparable digit for
digit.

Copper is the International Annealed Copper Standard (IACS, 1913; IEC 60028): resistivity
1/58 Ω·mm²/m at 20 °C and a temperature coefficient of 0.00393 /K at 20 °C.
"""

from __future__ import annotations

import math

MU0: float = 4e-7 * math.pi
"""Magnetic constant, H/m (exactly 4π·10⁻⁷; see the module docstring)."""

COPPER_RESISTIVITY_20C: float = 1.0 / 58.0 * 1e-6
"""IACS annealed copper at 20 °C, Ω·m (1/58 Ω·mm²/m, IEC 60028)."""

COPPER_TEMPERATURE_COEFFICIENT: float = 0.00393
"""IACS copper's temperature coefficient of resistance at 20 °C, 1/K."""

REFERENCE_TEMPERATURE: float = 20.0
"""Temperature at which the copper constants are defined, °C."""
