"""Power chokes: inductance under DC bias, saturation current, temperature-rise current.

Pure functions on numpy arrays in SI units (ampere, henry, ohm, kelvin, degrees Celsius):

- :mod:`~acquire.bias.saturation`: the current at which the inductance has dropped by a stated
  fraction from its zero-bias value, by monotone (piecewise-linear) interpolation of a measured
  curve, never beyond the measured range;
- :mod:`~acquire.bias.energy`: the energy a biased inductor stores, ½·L·I²;
- :mod:`~acquire.bias.resistance_rise`: a winding's temperature rise by the resistance method;
- :mod:`~acquire.bias.rated`: the rated current, the lower of the saturation current and the
  temperature-rise current, and which one limits it.
"""
