"""Argument checks shared by the coil models (raise :class:`acquire.errors.ModelError`)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from acquire.errors import ModelError


def positive(name: str, value: ArrayLike) -> np.ndarray:
    """``value`` as a float array, refusing zero, negative and non-finite entries."""
    arr = np.asarray(value, dtype=float)
    if arr.size == 0 or not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise ModelError(f"{name} must be a positive, finite number (got {value!r})")
    return arr


def non_negative(name: str, value: ArrayLike) -> np.ndarray:
    """``value`` as a float array, refusing negative and non-finite entries."""
    arr = np.asarray(value, dtype=float)
    if arr.size == 0 or not np.all(np.isfinite(arr)) or np.any(arr < 0):
        raise ModelError(f"{name} must be zero or positive and finite (got {value!r})")
    return arr


def scalar_or_array(arr: np.ndarray) -> float | np.ndarray:
    """A 0-d array as a plain float, anything else unchanged."""
    return float(arr) if np.ndim(arr) == 0 else arr
