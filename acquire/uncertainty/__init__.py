"""Per-point uncertainty of corrected impedance, evaluated as the GUM asks (JCGM 100:2008).

Every corrected point carries the 2×2 covariance of its real and imaginary parts (ohm²) and
their expanded uncertainty ``U = k·u`` with ``k = 2``. The inputs are

- the meter's stated accuracy (a dialect's ``[accuracy]`` table): a bound on the error of each
  reading, taken as a rectangular distribution, standard uncertainty ``a/√3`` (Type B,
  JCGM 100:2008 4.3.7), in :mod:`.accuracy`;
- the repeatability of the readings and of the three reference standards: the standard deviation
  of the mean of repeated readings (Type A, JCGM 100:2008 4.2), or the meter's stated one-reading
  repeatability for a reading taken once, in :mod:`.repeats`;

carried through the open/short/load correction by its Jacobian (the law of propagation of
uncertainty, JCGM 100:2008 5.1.2, in its matrix form for a complex output, JCGM 102:2011 6.2.1)
in :mod:`.propagation`, then on to Ls, Rs, Q, ... in :mod:`.quantities`. :mod:`.flags` says where
a value is past what the tool can measure. :func:`correct_with_uncertainty` (in :mod:`.correct`)
does it all for readings and a reference set.
"""

from acquire.uncertainty.accuracy import half_width, reading_uncertainty, repeatability
from acquire.uncertainty.correct import (
    CorrectedPoints,
    correct_with_uncertainty,
    reading_covariance,
)
from acquire.uncertainty.flags import BEYOND_ACCURACY, beyond_accuracy, flags_from, point_flags
from acquire.uncertainty.propagation import (
    COVERAGE_FACTOR,
    as_covariance,
    expanded,
    propagate,
    sensitivities,
)
from acquire.uncertainty.quantities import quantity_uncertainty
from acquire.uncertainty.repeats import mean_of_repeats

__all__ = [
    "BEYOND_ACCURACY",
    "COVERAGE_FACTOR",
    "CorrectedPoints",
    "as_covariance",
    "beyond_accuracy",
    "correct_with_uncertainty",
    "expanded",
    "flags_from",
    "half_width",
    "mean_of_repeats",
    "point_flags",
    "propagate",
    "quantity_uncertainty",
    "reading_covariance",
    "reading_uncertainty",
    "repeatability",
    "sensitivities",
]
