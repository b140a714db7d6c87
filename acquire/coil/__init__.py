"""Coil models: what a geometry should measure, and the equivalent circuit of a measured sweep.

Physics in SI units (henry, ohm, farad, hertz, metre); every function is pure and takes numpy
arrays or floats. Predictions: :func:`predict` on a :class:`CoilGeometry`. Fits: :func:`fit_sweep`
on frequencies and complex impedances. :mod:`acquire.coil.report` prints them (rich tables, plain
text, JSON records); :func:`compare` / :func:`compare_text` put them side by side.
"""

from acquire.coil.capacitance import (
    MEDHURST_TABLE,
    medhurst_capacitance,
    medhurst_factor,
    self_resonant_frequency,
)
from acquire.coil.circuit import coil_impedance, series_resistance
from acquire.coil.constants import (
    COPPER_RESISTIVITY_20C,
    COPPER_TEMPERATURE_COEFFICIENT,
    MU0,
)
from acquire.coil.fit import fit_sweep
from acquire.coil.fitresult import CoilFit, FittedValue
from acquire.coil.multilayer import (
    coaxial_mutual_inductance,
    layered_turns,
    loop_sum_inductance,
    wheeler_multilayer_inductance,
)
from acquire.coil.nagaoka import nagaoka, nagaoka_lundin, nagaoka_wheeler
from acquire.coil.predict import DEMO_COIL, CoilGeometry, Estimate, Prediction, predict, wire_length
from acquire.coil.report import compare, compare_text
from acquire.coil.solenoid import (
    current_sheet_inductance,
    long_solenoid_inductance,
    rosa_km,
    rosa_ks,
    solenoid_inductance,
)
from acquire.coil.wire import (
    ac_resistance,
    ac_resistance_ratio,
    awg_diameter,
    copper_resistivity,
    dc_resistance,
    skin_depth,
)

__all__ = [
    "COPPER_RESISTIVITY_20C",
    "COPPER_TEMPERATURE_COEFFICIENT",
    "DEMO_COIL",
    "MEDHURST_TABLE",
    "MU0",
    "CoilFit",
    "CoilGeometry",
    "Estimate",
    "FittedValue",
    "Prediction",
    "ac_resistance",
    "ac_resistance_ratio",
    "awg_diameter",
    "coaxial_mutual_inductance",
    "coil_impedance",
    "compare",
    "compare_text",
    "copper_resistivity",
    "current_sheet_inductance",
    "dc_resistance",
    "fit_sweep",
    "layered_turns",
    "long_solenoid_inductance",
    "loop_sum_inductance",
    "medhurst_capacitance",
    "medhurst_factor",
    "nagaoka",
    "nagaoka_lundin",
    "nagaoka_wheeler",
    "predict",
    "rosa_km",
    "rosa_ks",
    "self_resonant_frequency",
    "series_resistance",
    "skin_depth",
    "solenoid_inductance",
    "wheeler_multilayer_inductance",
    "wire_length",
]
