"""What :func:`acquire.coil.fit.fit_sweep` returns: fitted values with their uncertainties."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike

from acquire.coil.circuit import impedance_from_parameters
from acquire.coil.fitstart import StartValues


@dataclass(frozen=True)
class FittedValue:
    """One reported result; ``value`` None means not determined (``note`` says why), and
    ``lower_bound`` is then what the sweep does show of it, if anything (a self-resonance above
    the sweep is at least its top frequency)."""

    key: str
    label: str
    value: float | None
    sigma: float | None
    unit: str
    note: str = ""
    lower_bound: float | None = None

    @property
    def determined(self) -> bool:
        """True when the data supports a value."""
        return self.value is not None

    @property
    def relative_sigma(self) -> float | None:
        """1σ uncertainty as a fraction of the value."""
        if self.value is None or self.sigma is None or self.value == 0:
            return None
        return abs(self.sigma / self.value)


@dataclass(frozen=True)
class CoilFit:
    """The fitted equivalent circuit of one sweep."""

    frequency_range: tuple[float, float]
    points: int
    dropped: int
    resistance_law: str
    core_loss: bool
    values: tuple[FittedValue, ...]
    residual: float
    parameters: tuple[tuple[str, float], ...]
    start: StartValues
    notes: tuple[str, ...] = field(default_factory=tuple)
    #: True when the per-point uncertainties were given, False when estimated from the data.
    noise_given: bool = False
    #: χ²/ν of the best circuit (about 1 when it describes the sweep within the noise given).
    reduced_chi2: float = math.nan
    #: Each candidate circuit and its weight in the averaged values.
    model_weights: tuple[tuple[str, float], ...] = ()

    def get(self, key: str) -> FittedValue:
        """The result named ``key``: L, Rdc, fc, n, fw, kp, Cp, tand, SRF, Qmax, fQmax."""
        for value in self.values:
            if value.key == key:
                return value
        raise KeyError(key)

    @property
    def inductance(self) -> float:
        """Fitted L (henry)."""
        value = self.get("L").value
        return float("nan") if value is None else value

    @property
    def rdc(self) -> float | None:
        """Fitted Rdc (ohm), None if not determined."""
        return self.get("Rdc").value

    @property
    def capacitance(self) -> float | None:
        """Fitted Cp (farad), None if not determined."""
        return self.get("Cp").value

    @property
    def self_resonance(self) -> float | None:
        """Self-resonant frequency (hertz), None if not in the sweep."""
        return self.get("SRF").value

    def impedance(self, frequency: ArrayLike) -> np.ndarray:
        """The fitted circuit's impedance (ohm) at ``frequency`` (hertz)."""
        return impedance_from_parameters(np.asarray(frequency, dtype=float), dict(self.parameters))
