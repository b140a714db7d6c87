"""Plain data shared by the measurement systems analysis modules."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class GrrData:
    """One crossed gauge R&R study: one row per measurement.

    ``part`` holds int part numbers (1..p), ``operator`` str operator names, ``trial`` int trial
    numbers (1..r) and ``value`` the readings as floats in the SI unit ``unit`` (e.g. ``"H"``).
    ``quantity`` names what was measured (e.g. ``"Ls@100000"``).
    """

    part: np.ndarray
    operator: np.ndarray
    trial: np.ndarray
    value: np.ndarray
    quantity: str = ""
    unit: str = ""
