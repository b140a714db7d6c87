"""The profiles' data: what is in the fixture, the fixture, and the meter, as frozen dataclasses.

Built and validated from TOML by :mod:`drivers.simulator.profiles`; each knows its impedance
(or its two-port) through :mod:`drivers.simulator.physics`.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from drivers.errors import ProfileError
from drivers.simulator import physics
from drivers.simulator.faults import FaultSpec


@dataclass(frozen=True, kw_only=True)
class DutProfile:
    """What sits in the fixture: a coil, resistor, capacitor or a standard, or nothing (``none``).

    ``values`` holds the kind's numeric keys (SI units, defaults filled in); ``spread`` the
    one-sigma relative spread per key; ``faults`` the faults armed when it is inserted.
    """

    name: str
    kind: str
    values: Mapping[str, float | None]
    description: str = ""
    spread: Mapping[str, float] = field(default_factory=dict)
    faults: tuple[FaultSpec, ...] = ()
    path: Path | None = None

    def __getattr__(self, key: str) -> Any:
        values = self.__dict__.get("values", {})
        if key in values:
            return values[key]
        raise AttributeError(
            f"{type(self).__name__} of kind {self.__dict__.get('kind')!r} has no {key!r}"
        )

    def number(self, key: str) -> float:
        """The value of ``key``, one its kind always has (its schema gives it a default or
        requires it); raises :class:`ProfileError` if this profile has none."""
        value = self.values.get(key)
        if value is None:
            raise ProfileError(f"profile {self.name!r} ({self.kind}) has no value for {key!r}")
        return value

    def impedance(self, f: np.ndarray | float) -> np.ndarray:
        """Exact impedance (complex ohm) at ``f``; ``inf`` for an open, ``nan`` for ``none``."""
        f = np.atleast_1d(np.asarray(f, dtype=float))
        n = self.number
        if self.kind == "coil":
            return self._coil_impedance(f)
        if self.kind in ("resistor", "load"):
            return physics.resistor_impedance(
                f, n("resistance"), n("series_inductance"), n("parallel_capacitance")
            )
        if self.kind == "capacitor":
            return physics.capacitor_impedance(
                f, n("capacitance"), n("series_resistance"), n("series_inductance")
            )
        if self.kind == "open":
            return physics.open_impedance(f)
        if self.kind == "short":
            return physics.short_impedance(f)
        return np.full(f.shape, complex(np.nan, np.nan))

    def _coil_impedance(self, f: np.ndarray) -> np.ndarray:
        v, n = self.values, self.number
        diameter = v.get("wire_diameter")
        proximity = v.get("proximity_factor")
        return physics.coil_impedance(
            f,
            n("inductance"),
            n("dc_resistance"),
            n("capacitance"),
            v["ac_corner_frequency"],
            n("ac_exponent"),
            n("core_loss_tangent"),
            wire_radius=None if diameter is None else diameter / 2.0,
            resistivity=v.get("resistivity"),
            proximity_factor=1.0 if proximity is None else proximity,
            core_relaxation_frequency=v.get("core_relaxation_frequency"),
        )

    def true_values(self, f_high: float = 1e9) -> dict[str, float | None]:
        """What a fit of this coil should find, from its exact physics (coils only).

        - ``L``: the low-frequency inductance, external plus the wire's DC internal inductance
          ``µ0·l/(8π)`` (what ``X/ω`` tends to as ``f → 0``), henry;
        - ``Rdc``: the DC resistance, ohm;
        - ``Cp``: the parallel self-capacitance, farad;
        - ``SRF``: the lowest frequency up to ``f_high`` where the exact impedance's phase
          crosses zero from inductive to capacitive, hertz (None if there is none).
        """
        if self.kind != "coil":
            raise AttributeError(f"{self.name!r} is a {self.kind}, not a coil: no true values")
        n = self.number
        inductance = n("inductance")
        diameter = self.values.get("wire_diameter")
        if diameter is not None:
            inductance += physics.internal_inductance(
                n("dc_resistance"), diameter / 2.0, n("resistivity")
            )
        srf = None
        if n("capacitance"):
            srf = physics.phase_zero(self._coil_impedance, 1.0, f_high)
        return {
            "L": inductance,
            "Rdc": n("dc_resistance"),
            "Cp": n("capacitance"),
            "SRF": srf,
        }

    @property
    def dc_value(self) -> float:
        """Resistance at DC in ohm (``inf`` for an open or a capacitor, ``nan`` for ``none``)."""
        if self.kind == "coil":
            return self.number("dc_resistance")
        if self.kind in ("resistor", "load"):
            return self.number("resistance")
        if self.kind in ("open", "capacitor"):
            return math.inf
        if self.kind == "short":
            return 0.0
        return math.nan


#: Nothing in the fixture: the meter's readings are invalid.
NOTHING = DutProfile(name="none", kind="none", values={}, description="nothing in the fixture")


@dataclass(frozen=True, kw_only=True)
class LineSpec:
    """A lossless transmission line: characteristic impedance (ohm), length (m), velocity factor."""

    impedance: float
    length: float
    velocity_factor: float = 0.66


@dataclass(frozen=True, kw_only=True)
class FixtureProfile:
    """The fixture between meter and DUT: leads' series residual, stray shunt, optional line."""

    name: str
    series_resistance: float
    series_inductance: float
    shunt_capacitance: float
    shunt_conductance: float
    line: LineSpec | None = None
    description: str = ""
    path: Path | None = None
    #: How operators seat a part (:mod:`drivers.simulator.seating`): the relative standard
    #: deviation of each operator's inductance offset, the scale of their contact resistance
    #: (ohm), and the relative standard deviation of each seating's own random part.
    seating_spread: float = 0.0
    seating_contact: float = 0.0
    seating_repeat: float = 0.0

    def abcd(self, f: np.ndarray | float) -> np.ndarray:
        """The fixture's ABCD matrices, shape ``(N, 2, 2)``."""
        line = None
        if self.line is not None:
            line = (self.line.impedance, self.line.length, self.line.velocity_factor)
        return physics.fixture_abcd(
            f,
            self.series_resistance,
            self.series_inductance,
            self.shunt_capacitance,
            self.shunt_conductance,
            line,
        )

    def seen(self, f: np.ndarray | float, z_dut: np.ndarray) -> np.ndarray:
        """What the meter sees of ``z_dut`` through this fixture."""
        return physics.input_impedance(self.abcd(f), z_dut)

    def seen_dc(self, dut_dc_resistance: float) -> float:
        """DC resistance the meter sees of a DUT of ``dut_dc_resistance``."""
        return physics.dc_resistance_seen(
            dut_dc_resistance, self.series_resistance, self.shunt_conductance
        )


@dataclass(frozen=True, kw_only=True)
class MeterProfile:
    """The simulated meter: identity, noise model (``reading_error.noise_deviation``), timing.

    A reading lasts ``max(minimum_reading_time, periods / f)``; its noise scales as
    ``sqrt(reference_periods / periods)``, so the accuracy class holds at ``reference_periods``.
    ``bias_limit`` (A) is the largest DC bias the meter applies, ``source_limit`` (A) the largest
    output of the simulated DC current source beside it, ``ambient_temperature`` (°C) the bench's.
    """

    name: str
    manufacturer: str
    model: str
    serial: str
    firmware: str
    accuracy_class: float
    low_impedance_corner: float
    high_impedance_corner: float
    frequency_corner: float
    max_impedance: float
    reference_level: float
    minimum_reading_time: float
    reference_periods: float
    description: str = ""
    path: Path | None = None
    systematic_accuracy: float = 0.0
    bias_limit: float = 8.0
    source_limit: float = 10.0
    ambient_temperature: float = 23.0
