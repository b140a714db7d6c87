"""The keys each kind of simulator profile may hold, with their units and defaults.

Read by :mod:`drivers.simulator.profiles`, whose docstring lists the kinds and keys in words.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from drivers.errors import ProfileError


@dataclass(frozen=True)
class Key:
    unit: str
    default: float | None | str = "required"  # the text marks a key that must be given
    positive: bool = False


#: Resistivity of annealed copper at 20 °C, ohm·m (IEC 60028: 1/58 ohm·mm²/m).
COPPER_RESISTIVITY = 1.0 / 58e6

DUT_SCHEMA: dict[str, dict[str, Key]] = {
    "coil": {
        "inductance": Key("H", positive=True),
        "dc_resistance": Key("ohm", None),
        "capacitance": Key("F", 0.0),
        "ac_corner_frequency": Key("Hz", None, positive=True),
        "ac_exponent": Key("", 0.5),
        "core_loss_tangent": Key("", 0.0),
        "core_relaxation_frequency": Key("Hz", None, positive=True),
        "wire_diameter": Key("m", None, positive=True),
        "wire_length": Key("m", None, positive=True),
        "resistivity": Key("ohm m", COPPER_RESISTIVITY, positive=True),
        "proximity_factor": Key("", 1.0),
        "saturation_current": Key("A", None, positive=True),
        "saturation_sharpness": Key("", None, positive=True),
        "thermal_resistance": Key("K/W", None, positive=True),
        "thermal_time_constant": Key("s", None, positive=True),
        "reference_temperature": Key("degC", None),
        "drift_per_day": Key("1/day", None),
    },
    "resistor": {
        "resistance": Key("ohm"),
        "series_inductance": Key("H", 0.0),
        "parallel_capacitance": Key("F", 0.0),
    },
    "capacitor": {
        "capacitance": Key("F", positive=True),
        "series_resistance": Key("ohm", 0.0),
        "series_inductance": Key("H", 0.0),
    },
    "open": {},
    "short": {},
}
DUT_SCHEMA["load"] = DUT_SCHEMA["resistor"]


def coil_winding(path: Path, values: dict[str, float | None]) -> None:
    """Check the coil's winding is described one way, and fill in its DC resistance."""
    wire, length, rdc = values["wire_diameter"], values["wire_length"], values["dc_resistance"]
    if wire is not None and values["ac_corner_frequency"] is not None:
        raise ProfileError(
            f"{path}: give either 'wire_diameter' (round-wire physics) or "
            "'ac_corner_frequency' (a resistance law), not both"
        )
    if length is not None:
        resistivity = values["resistivity"]
        if wire is None:
            raise ProfileError(f"{path}: 'wire_length' needs 'wire_diameter' (m)")
        if rdc is not None:
            raise ProfileError(
                f"{path}: give either 'wire_length' or 'dc_resistance', not both "
                "(the DC resistance follows from the wire)"
            )
        if resistivity is None:
            raise ProfileError(f"{path}: 'wire_length' needs 'resistivity' (ohm m)")
        values["dc_resistance"] = resistivity * length / (math.pi * (wire / 2) ** 2)
    elif rdc is None:
        raise ProfileError(
            f"{path}: missing key 'dc_resistance' (ohm), or give 'wire_diameter' and 'wire_length'"
        )
    coil_pairs(path, values)


def coil_pairs(path: Path, values: dict[str, float | None]) -> None:
    """Keys that only make sense together: saturation's, and the thermal model's."""
    for first, second in (
        ("saturation_current", "saturation_sharpness"),
        ("thermal_resistance", "thermal_time_constant"),
    ):
        if (values[first] is None) != (values[second] is None):
            raise ProfileError(f"{path}: give both {first!r} and {second!r}, or neither")
    if values["reference_temperature"] is not None and values["thermal_resistance"] is None:
        raise ProfileError(
            f"{path}: 'reference_temperature' needs the thermal model ('thermal_resistance', "
            "'thermal_time_constant')"
        )


FIXTURE_SCHEMA = {
    "series_resistance": Key("ohm"),
    "series_inductance": Key("H"),
    "shunt_capacitance": Key("F"),
    "shunt_conductance": Key("S"),
    "seating_spread": Key("", 0.0),
    "seating_contact": Key("ohm", 0.0),
    "seating_repeat": Key("", 0.0),
}
LINE_SCHEMA = {
    "impedance": Key("ohm", positive=True),
    "length": Key("m"),
    "velocity_factor": Key("", 0.66, positive=True),
}
METER_SCHEMA = {
    "accuracy_class": Key("", positive=True),
    "low_impedance_corner": Key("ohm", positive=True),
    "high_impedance_corner": Key("ohm", positive=True),
    "frequency_corner": Key("Hz", positive=True),
    "max_impedance": Key("ohm", positive=True),
    "reference_level": Key("V", positive=True),
    "minimum_reading_time": Key("s", positive=True),
    "reference_periods": Key("", positive=True),
    "systematic_accuracy": Key("", 0.0),
    "bias_limit": Key("A", 8.0),
    "source_limit": Key("A", 10.0),
    "ambient_temperature": Key("degC", 23.0),
}
METER_TEXT = ("manufacturer", "model", "serial", "firmware")
