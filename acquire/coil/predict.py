"""What a coil's geometry says it should measure: L, Rdc, AC resistance, self-capacitance, SRF.

:func:`predict` takes a :class:`CoilGeometry` (SI units) and returns a :class:`Prediction`: one
:class:`Estimate` per quantity, each carrying the method used and its accuracy, so a printed
prediction always says how far to trust each number. A quantity no method here can support (the
self-capacitance of a multilayer winding, a shape outside Medhurst's table) is present with
``value=None`` and the reason, never a guess.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from acquire.coil.capacitance import (
    MEDHURST_ACCURACY,
    medhurst_capacitance,
    self_resonant_frequency,
)
from acquire.coil.multilayer import (
    LOOP_SUM_MAX_TURNS,
    WHEELER_MULTILAYER_ACCURACY,
    layered_turns,
    loop_sum_inductance,
    wheeler_balance,
    wheeler_multilayer_inductance,
)
from acquire.coil.solenoid import solenoid_inductance
from acquire.coil.wire import (
    ac_resistance_ratio,
    awg_diameter,
    copper_resistivity,
    dc_resistance,
    skin_depth,
)
from acquire.errors import ModelError
from acquire.units import format_si

SINGLE_LAYER_L_ACCURACY = 0.005
ROSA_MAX_PITCH_OVER_DIAMETER = 0.05
"""Rosa's corrections are used up to this pitch/diameter; coarser windings are summed turn by turn.

Computed: over turns 2 to 1000 and wire/pitch 0.05 to 1, Rosa's value differs from the
turn-by-turn sum of round-wire circles by at most 0.04 % at pitch/diameter 0.05, 0.17 % at 0.1
and 5 % at 0.5 (the error grows as the square of pitch/diameter).
"""
MAX_FORMER_DIAMETER = 1.0
"""Largest former diameter accepted (metre): a larger one is most likely a unit slip."""
MULTILAYER_PACKING_ACCURACY = 0.02
RDC_ACCURACY = 0.02
DEFAULT_FREQUENCIES: tuple[float, ...] = (1e3, 100e3, 1e6)


@dataclass(frozen=True)
class CoilGeometry:
    """A wound air-core coil, SI units.

    ``former_diameter`` is the outside of the former (the inside of the winding); ``length`` the
    winding length; ``wire_diameter`` the bare copper; ``wire_outer_diameter`` the insulated wire
    (sets the diameter to the wire centres and the layer spacing; default: bare);
    ``lead_length`` the total of both leads; ``temperature`` in °C.
    """

    turns: float
    former_diameter: float
    length: float
    wire_diameter: float
    layers: int = 1
    lead_length: float = 0.0
    temperature: float = 20.0
    wire_outer_diameter: float | None = None

    @property
    def outer_wire(self) -> float:
        """Insulated wire diameter (metre)."""
        return self.wire_outer_diameter or self.wire_diameter

    @property
    def turns_per_layer(self) -> int:
        """Turns in a full layer."""
        return math.ceil(self.turns / self.layers)

    @property
    def pitch(self) -> float:
        """Axial distance between turn centres within a layer (metre)."""
        return self.length / (self.turns if self.layers == 1 else self.turns_per_layer)

    @property
    def mean_diameter(self) -> float:
        """Diameter to the wire centres, averaged over the layers (metre)."""
        return self.former_diameter + self.layers * self.outer_wire

    @property
    def depth(self) -> float:
        """Radial build of the winding (metre)."""
        return self.layers * self.outer_wire

    def validate(self) -> None:
        """Refuse geometry that cannot be wound, with a message saying what to change."""
        for name in ("turns", "former_diameter", "length", "wire_diameter"):
            value = getattr(self, name)
            if not (math.isfinite(value) and value > 0):
                raise ModelError(f"{name.replace('_', ' ')} must be positive (got {value})")
        if self.turns < 1:
            raise ModelError(f"a coil needs at least one turn (got {self.turns})")
        if self.layers < 1 or self.layers != int(self.layers):
            raise ModelError(f"layers must be a whole number of at least 1 (got {self.layers})")
        if self.layers > 1 and self.turns != int(self.turns):
            raise ModelError("a multilayer winding needs a whole number of turns")
        if self.former_diameter > MAX_FORMER_DIAMETER:
            raise ModelError(
                f"a former {self.former_diameter:g} m across is not a bench coil: check the unit "
                "(write 30mm, not 30)"
            )
        if self.outer_wire > self.former_diameter:
            raise ModelError(
                f"the wire ({self.outer_wire * 1e3:.4g} mm) is thicker than the former "
                f"({self.former_diameter * 1e3:.4g} mm): check the units of both"
            )
        filled = math.ceil(self.turns / self.turns_per_layer) if self.layers > 1 else 1
        if filled != self.layers:
            raise ModelError(
                f"{self.turns:g} turns in {self.layers} layers make {self.turns_per_layer} per "
                f"layer, which fill only {filled} layers: give {filled} layers, or more turns"
            )
        if self.lead_length < 0 or not math.isfinite(self.lead_length):
            raise ModelError(f"lead length must be zero or positive (got {self.lead_length})")
        if self.wire_outer_diameter is not None and self.wire_outer_diameter < self.wire_diameter:
            raise ModelError("the insulated wire cannot be thinner than the bare copper")
        if self.pitch < self.outer_wire * (1 - 1e-9):
            per_layer = self.turns if self.layers == 1 else self.turns_per_layer
            need = per_layer * self.outer_wire
            raise ModelError(
                f"{per_layer:g} turns of {self.outer_wire * 1e3:.4g} mm wire need at least "
                f"{need * 1e3:.4g} mm per layer, but the winding length is "
                f"{self.length * 1e3:.4g} mm: lengthen the winding or add layers"
            )


@dataclass(frozen=True)
class Estimate:
    """One predicted quantity.

    ``accuracy`` is relative (0.05 = 5 %) or None where the method gives a bound or no figure;
    ``value`` is None when the quantity is not predicted (``note`` says why). ``bound`` is
    ``"at least"`` for a lower bound, ``"geometry"`` for a quantity that follows from the
    geometry alone.
    """

    key: str
    label: str
    value: float | None
    unit: str
    method: str
    accuracy: float | None = None
    note: str = ""
    bound: str = ""


@dataclass(frozen=True)
class Prediction:
    """Everything :func:`predict` derived from one geometry, in display order."""

    geometry: CoilGeometry
    estimates: tuple[Estimate, ...] = field(default_factory=tuple)

    def get(self, key: str) -> Estimate:
        """The estimate named ``key`` (``"L"``, ``"Rdc"``, ``"C"``, ``"SRF"``, ...)."""
        for estimate in self.estimates:
            if estimate.key == key:
                return estimate
        raise KeyError(key)

    @property
    def inductance(self) -> float | None:
        """Predicted low-frequency inductance (henry)."""
        return self.get("L").value

    @property
    def dc_resistance(self) -> float | None:
        """Predicted DC resistance including leads (ohm)."""
        return self.get("Rdc").value

    @property
    def capacitance(self) -> float | None:
        """Predicted self-capacitance (farad), None if not predicted."""
        return self.get("C").value

    @property
    def self_resonance(self) -> float | None:
        """Predicted self-resonant frequency (hertz), None if not predicted."""
        return self.get("SRF").value


def wire_length(geometry: CoilGeometry) -> float:
    """Length of copper (metre): every turn's helix at its own radius, plus the leads."""
    g = geometry
    if g.layers == 1:
        circumference = math.pi * (g.former_diameter + g.outer_wire)
        return g.turns * math.hypot(circumference, g.pitch) + g.lead_length
    radii, _ = layered_turns(int(g.turns), g.layers, g.former_diameter, g.length, g.outer_wire)
    return float(np.sum(np.hypot(2.0 * math.pi * radii, g.pitch))) + g.lead_length


def _single_layer_estimate(g: CoilGeometry) -> Estimate:
    diameter = g.former_diameter + g.outer_wire
    ratio = g.pitch / diameter
    label = "inductance (low frequency)"
    if ratio <= ROSA_MAX_PITCH_OVER_DIAMETER:
        return Estimate(
            "L",
            label,
            solenoid_inductance(g.turns, diameter, g.length, g.wire_diameter),
            "H",
            "current sheet, Nagaoka's K exact, minus Rosa's ks + km (Grover 1946)",
            SINGLE_LAYER_L_ACCURACY,
            f"pitch {ratio:.3g} of the diameter: Rosa's corrections hold to 0.05 % (computed); "
            "the rest is an allowance for winding tolerances (common practice)",
        )
    note = (
        f"pitch {ratio:.3g} of the diameter: the helix's lengthwise current, which turns "
        "treated as circles leave out, adds to L (computed: 6 to 9 % at a pitch of half the "
        "diameter, more beyond), so no accuracy is stated"
    )
    if g.turns == int(g.turns) and g.turns <= LOOP_SUM_MAX_TURNS:
        radii, positions = layered_turns(int(g.turns), 1, g.former_diameter, g.length, g.outer_wire)
        value = loop_sum_inductance(radii, positions, g.wire_diameter)
        method = "turn-by-turn sum, Maxwell's coaxial circles, round-wire turns"
    else:
        value = solenoid_inductance(g.turns, diameter, g.length, g.wire_diameter)
        method = "current sheet, Nagaoka's K exact, minus Rosa's ks + km (Grover 1946)"
        note += "; Rosa's corrections too are off at so coarse a pitch"
    return Estimate("L", label, value, "H", method, None, note)


def _inductance_estimates(g: CoilGeometry) -> list[Estimate]:
    if g.layers == 1:
        return [_single_layer_estimate(g)]
    balance = wheeler_balance(g.mean_diameter, g.length, g.depth)
    wheeler = wheeler_multilayer_inductance(g.turns, g.mean_diameter, g.length, g.depth)
    wheeler_note = (
        "6a, 9l, 10c balanced within 2:1, where Wheeler states about 1 %"
        if balance <= 2.0
        else f"6a, 9l, 10c are {balance:.1f}:1 out of balance: worse than 1 %"
    )
    estimates = []
    if g.turns <= LOOP_SUM_MAX_TURNS:
        radii, positions = layered_turns(
            int(g.turns), g.layers, g.former_diameter, g.length, g.outer_wire
        )
        estimates.append(
            Estimate(
                "L",
                "inductance (low frequency)",
                loop_sum_inductance(radii, positions, g.wire_diameter),
                "H",
                "turn-by-turn sum, Maxwell's coaxial circles, neat layers",
                MULTILAYER_PACKING_ACCURACY,
                "allowance for a real winding's packing (common practice)",
            )
        )
    estimates.append(
        Estimate(
            "L" if not estimates else "L_wheeler",
            "inductance, Wheeler's formula",
            wheeler,
            "H",
            "Wheeler 1928 multilayer formula",
            WHEELER_MULTILAYER_ACCURACY if balance <= 2.0 else None,
            wheeler_note,
        )
    )
    return estimates


def _capacitance_estimates(g: CoilGeometry, inductance: float) -> list[Estimate]:
    if g.layers > 1:
        reason = "no published method used here for multilayer windings"
        return [
            Estimate("C", "self-capacitance", None, "F", "", None, reason),
            Estimate("SRF", "self-resonant frequency", None, "Hz", "", None, reason),
        ]
    diameter = g.former_diameter + g.outer_wire
    try:
        c = medhurst_capacitance(diameter, g.length)
    except ModelError as exc:
        return [
            Estimate("C", "self-capacitance", None, "F", "Medhurst 1947", None, str(exc)),
            Estimate("SRF", "self-resonant frequency", None, "Hz", "", None, str(exc)),
        ]
    srf = float(self_resonant_frequency(inductance, c))
    return [
        Estimate(
            "C",
            "self-capacitance",
            c,
            "F",
            f"Medhurst 1947 table, H = {c / (diameter * 100) * 1e12:.3f} pF/cm at "
            f"l/D = {g.length / diameter:.3g}",
            MEDHURST_ACCURACY,
            "the coil alone: leads and nearby metal add to it",
        ),
        Estimate(
            "SRF",
            "self-resonant frequency",
            srf,
            "Hz",
            "1/(2π√(LC)) from the L and C above, the winding taken as L in parallel with C",
            None,
            "a rough guide, no accuracy stated: Medhurst's C was measured with tuning "
            "capacitance added, well below the coil's own resonance; at its own resonance a "
            "helical winding acts as a transmission line, not a lumped L and C",
        ),
    ]


def _wire_estimates(g: CoilGeometry, frequencies: tuple[float, ...]) -> list[Estimate]:
    length = wire_length(g)
    rdc = dc_resistance(length, g.wire_diameter, g.temperature)
    rho = copper_resistivity(g.temperature)
    estimates = [
        Estimate(
            "wire",
            "wire length (turns and leads)",
            length,
            "m",
            "every turn's helix, plus the leads",
            bound="geometry",
        ),
        Estimate(
            "Rdc",
            f"DC resistance at {g.temperature:g} °C",
            rdc,
            "Ω",
            "IACS copper (IEC 60028), 0.00393 /K",
            RDC_ACCURACY,
            "allowance for wire-diameter tolerance (common practice)",
        ),
    ]
    for f in frequencies:
        delta = float(skin_depth(f, rho))
        ratio = float(ac_resistance_ratio(g.wire_diameter / 2.0 / delta))
        estimates.append(
            Estimate(
                f"Rac@{f:g}",
                f"AC resistance at {format_si(f, 'Hz', 3)}",
                rdc * ratio,
                "Ω",
                f"skin effect, exact (Kelvin functions); δ = {format_si(delta, 'm', 3)}",
                None,
                "isolated wire: the other turns add proximity loss",
                bound="at least",
            )
        )
    return estimates


def predict(
    geometry: CoilGeometry, frequencies: tuple[float, ...] = DEFAULT_FREQUENCIES
) -> Prediction:
    """Predict what ``geometry`` should measure; AC resistance at each of ``frequencies``."""
    geometry.validate()
    for f in frequencies:
        if not (math.isfinite(f) and f > 0):
            raise ModelError(f"frequencies must be positive (got {f})")
    estimates = _inductance_estimates(geometry)
    inductance = estimates[0].value
    if inductance is None:
        raise ModelError("no inductance method applies to this geometry")
    estimates += _capacitance_estimates(geometry, inductance)
    estimates += _wire_estimates(geometry, tuple(frequencies))
    return Prediction(geometry, tuple(estimates))


DEMO_COIL = CoilGeometry(
    turns=150,
    former_diameter=0.030,
    length=0.045,
    wire_diameter=awg_diameter(30),
    layers=1,
    lead_length=0.100,
    temperature=23.0,
)
"""The demo scenario's prototype (our own invention): 150 turns of AWG 30 on a 30 mm former."""
