"""A winding's DC resistance: fixture leads removed, corrected to 20 °C, with its uncertainty.

Pure functions on floats (ohm, kelvin, degrees Celsius). The model of the measurand is

    R20 = (Rm − Rl) / (1 + α·(t − 20 °C))

with ``Rm`` the mean DC reading, ``Rl`` the resistance of the fixture's leads, ``t`` the winding
temperature and ``α = 0.00393 /K`` the temperature coefficient of resistance of annealed copper
at 20 °C (IEC 60028:1925, the international standard of resistance for copper). Its standard
uncertainty follows the law of propagation of JCGM 100:2008 5.1.2 for independent inputs, with
the sensitivities

    ∂R20/∂Rm = 1/D,   ∂R20/∂Rl = −1/D,   ∂R20/∂t = −α·R20/D,   D = 1 + α·(t − 20 °C)

and the inputs' standard uncertainties:

- ``Rm``: Type A, the experimental standard deviation of the mean ``s/√n`` of ``n ≥ 2``
  readings (JCGM 100:2008 4.2.3), else the meter's stated repeatability of one reading; and
  Type B, the meter's stated bound ``a`` taken as a rectangular distribution, ``a/√3`` (4.3.7);
- ``Rl``: the caller's standard uncertainty of the leads (for example of the short reference);
- ``t``: the half-width ``h`` of the temperature's error, rectangular, ``h/√3``.

The expanded uncertainty is ``U = k·u`` with ``k = 2``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from acquire.errors import InputError
from acquire.production.plan import REFERENCE_TEMPERATURE

#: Temperature coefficient of resistance of annealed copper at 20 °C, per kelvin (IEC 60028).
COPPER_ALPHA = 0.00393
#: Coverage factor of the expanded uncertainty (JCGM 100:2008 6.2.1, about 95 %).
COVERAGE_FACTOR = 2.0


def mean_and_deviation(readings: Sequence[float]) -> tuple[float, float | None]:
    """The mean of the readings and their experimental standard deviation (None for one).

    JCGM 100:2008 4.2.1 and 4.2.2 (the deviation with ``n − 1``). Readings that are not finite
    (an overrange or invalid reading) make the mean not finite and the deviation NaN.
    """
    values = [float(r) for r in readings]
    if not values:
        raise InputError("give at least one DC resistance reading")
    n = len(values)
    mean = math.fsum(values) / n
    if n == 1:
        return mean, None
    if not all(math.isfinite(v) for v in values):
        return mean, math.nan
    return mean, math.sqrt(math.fsum((v - mean) ** 2 for v in values) / (n - 1))


def remove_leads(reading: float, leads: float) -> float:
    """The winding's resistance: the reading less the resistance of the fixture's leads."""
    return float(reading) - float(leads)


def temperature_factor(t: float, alpha: float = COPPER_ALPHA) -> float:
    """``D = 1 + α·(t − 20 °C)``: the resistance at ``t`` over that at 20 °C."""
    t = float(t)
    if not math.isfinite(t):
        raise InputError(f"the winding temperature must be a finite number of °C, not {t}")
    d = 1.0 + alpha * (t - REFERENCE_TEMPERATURE)
    if d <= 0:
        raise InputError(
            f"{t:g} °C is below where the linear copper law holds; give the winding temperature"
        )
    return d


def to_reference_temperature(r: float, t: float, alpha: float = COPPER_ALPHA) -> float:
    """The resistance ``r`` (ohm) measured at ``t`` (°C) corrected to 20 °C: ``r / D``."""
    return float(r) / temperature_factor(t, alpha)


def expanded_uncertainty(
    resistance: float,
    t: float,
    u_reading: float,
    u_leads: float = 0.0,
    t_half_width: float = 0.0,
    alpha: float = COPPER_ALPHA,
    k: float = COVERAGE_FACTOR,
) -> float:
    """Expanded uncertainty (ohm) of the corrected resistance ``R20``.

    ``resistance`` is the winding's resistance at ``t`` (leads removed, ohm), ``u_reading`` and
    ``u_leads`` the standard uncertainties of the mean reading and of the leads (ohm),
    ``t_half_width`` the bound of the temperature's error (K, rectangular). NaN in, NaN out.
    """
    d = temperature_factor(t, alpha)
    r20 = float(resistance) / d
    u_t = float(t_half_width) / math.sqrt(3.0)
    terms = (u_reading / d, u_leads / d, alpha * r20 / d * u_t)
    return k * math.sqrt(math.fsum(x * x for x in terms))
