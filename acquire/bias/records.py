"""The plain data a bias sweep and a temperature-rise run hand on (to the store, files, pictures).

Arrays are numpy, SI units (ampere, henry, ohm, hertz, second, degrees Celsius, kelvin).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from acquire.bias.saturation import DropCurrent

#: How a bias sweep or temperature-rise run ended.
COMPLETE, INTERRUPTED, FAILED = "complete", "interrupted", "failed"


@dataclass(frozen=True)
class BiasSettings:
    """What was asked: the bias steps, the frequency, and how the operator was protected.

    ``maximum`` is the largest bias allowed (A: the smaller of the command line's or plan's
    maximum and the supply's own limit); ``energy`` the energy (J) the part stores at the
    largest bias, from the zero-bias inductance; ``confirmed`` says how going ahead was agreed:
    ``"below threshold"``, ``"operator"`` (answered the prompt) or ``"unattended"`` (the option
    for unattended stations). ``supply`` names where the bias came from (the meter or a DC
    source's identity).
    """

    currents: np.ndarray
    frequency: float
    drops: tuple[float, ...]
    maximum: float
    step: float
    dwell: float
    energy: float
    confirmed: str
    supply: str
    dut: str = ""
    fixture: str = ""
    meter: str = ""
    reference_set_id: int | None = None


@dataclass(frozen=True)
class BiasCurve:
    """The measured curve: one row per bias step (index ``i`` in every array).

    ``setpoint`` is the current asked for, ``applied`` what the supply read back; ``raw`` and
    ``corrected`` the complex impedance (ohm; ``corrected`` is None without a reference set,
    whose open/short readings were captured at zero bias); ``ls``, ``rs``, ``q`` derive from the
    corrected values when there are some, else from the raw ones.
    """

    setpoint: np.ndarray
    applied: np.ndarray
    raw: np.ndarray
    corrected: np.ndarray | None
    ls: np.ndarray
    rs: np.ndarray
    q: np.ndarray


@dataclass(frozen=True)
class BiasSweepResult:
    """A bias sweep as it ended: its settings, its curve (maybe partial), and the drop currents.

    ``drops`` is empty when the curve ended before a saturation current could be interpolated
    (an interrupted run keeps its completed points, marked by ``status``).
    """

    settings: BiasSettings
    curve: BiasCurve
    drops: tuple[DropCurrent, ...]
    status: str
    note: str = ""
    started: str = ""
    ended: str = ""


@dataclass(frozen=True)
class RiseSettings:
    """What a temperature-rise run was asked: a current held, or a rise searched for."""

    current: float
    ambient: float
    time_limit: float
    settle_window: float
    settle_tolerance: float
    target_rise: float | None = None
    dut: str = ""
    meter: str = ""
    supply: str = ""


@dataclass(frozen=True)
class RiseResult:
    """A temperature-rise run: DC resistance over time while a current flows, and the rise.

    ``times`` are seconds from the start of the current, ``resistance`` the winding's DC
    resistance (ohm) then, ``rise`` the winding's rise above ``ambient`` (K) by the resistance
    method from ``r_cold`` measured at ``t_cold`` before any current flowed. ``steps`` holds one
    (current, settled rise) pair per current tried when a rise was searched for.
    """

    settings: RiseSettings
    r_cold: float
    t_cold: float
    current: float
    times: np.ndarray
    resistance: np.ndarray
    rise: np.ndarray
    settled: bool
    status: str
    steps: tuple[tuple[float, float], ...] = field(default_factory=tuple)
    note: str = ""

    @property
    def final_rise(self) -> float | None:
        """The settled rise (the line fitted over the settle window, at its end) when the run
        settled, else the last reading's rise; None without readings."""
        if self.settled and self.steps:
            return float(self.steps[-1][1])
        return float(self.rise[-1]) if self.rise.size else None
