"""A saturating core: the inductance falls as DC current flows through the winding.

Our own smooth curve (not taken from any maker's data), SI units (henry, ampere)::

    L(I) = L0 / (1 + (|I| / I_s)^p)

``I_s`` (``saturation_current``, A) is the current at which the inductance has halved; ``p``
(``saturation_sharpness``) says how sudden the fall is: a powder core (distributed gap) falls
softly (small ``p``, e.g. 2), a gapped ferrite holds its inductance and then drops (large
``p``, e.g. 8). At zero current the factor is exactly 1.

The current at which the inductance has dropped by the fraction ``d`` (``L = (1 − d)·L0``)
follows in closed form from ``1 + (I/I_s)^p = 1/(1 − d)``::

    I_d = I_s · (d / (1 − d))^(1/p)

(computed from the curve above). A profile without ``saturation_current`` does not saturate.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np


def inductance_factor(
    current: np.ndarray | float, saturation_current: float | None, sharpness: float | None
) -> np.ndarray:
    """``L(I)/L0 = 1/(1 + (|I|/I_s)^p)``; 1 everywhere when ``saturation_current`` is None."""
    i = np.abs(np.asarray(current, dtype=float))
    if saturation_current is None:
        return np.ones_like(i)
    p = 2.0 if sharpness is None else sharpness
    return 1.0 / (1.0 + (i / saturation_current) ** p)


def _params(profile_or_params: Any) -> tuple[float, float]:
    """``(I_s, p)`` from a DUT profile, a mapping of its values, or a pair."""
    values = profile_or_params
    if not isinstance(values, Mapping | tuple | list):
        values = getattr(profile_or_params, "values", profile_or_params)
    if isinstance(values, Mapping):
        current, sharpness = values.get("saturation_current"), values.get("saturation_sharpness")
    else:
        current, sharpness = values
    if current is None:
        raise ValueError("this profile does not saturate: it has no 'saturation_current'")
    return float(current), 2.0 if sharpness is None else float(sharpness)


def drop_current(profile_or_params: Any, d: float | np.ndarray) -> np.ndarray | float:
    """The DC current (A) at which the inductance has fallen by the fraction ``d`` (0 < d < 1).

    ``profile_or_params`` is a coil :class:`~drivers.simulator.profiles.DutProfile`, a mapping
    with ``saturation_current`` and ``saturation_sharpness``, or a pair ``(I_s, p)``.
    ``I_d = I_s·(d/(1 − d))^(1/p)``.
    """
    current, sharpness = _params(profile_or_params)
    fraction = np.asarray(d, dtype=float)
    if np.any((fraction <= 0) | (fraction >= 1)):
        raise ValueError(f"the drop must be a fraction between 0 and 1, got {d!r}")
    out = current * (fraction / (1.0 - fraction)) ** (1.0 / sharpness)
    return float(out) if out.ndim == 0 else out
