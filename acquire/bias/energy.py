"""The energy a biased inductor stores, and the caution it calls for.

An inductance L carrying a current I stores W = ½·L·I² (the energy of the magnetic field of a
linear inductor, derived in any electromagnetism textbook; from memory). Breaking that current
makes the inductor drive whatever voltage it takes to keep it flowing: an arc at the contact, a
spike into the meter's input. Chokes under bias are therefore ramped down to zero before a part
is changed, and a large stored energy is shown before a measurement starts.
"""

from __future__ import annotations

import numpy as np

#: Stored energy (J) above which a bias command asks for confirmation before it starts.
#: Common practice, no published source: a tenth of a joule is already a painful spark.
CONFIRM_ABOVE = 0.1


def stored_energy(inductance: np.ndarray | float, current: np.ndarray | float) -> np.ndarray:
    """½·L·I² in joule, elementwise (henry, ampere)."""
    inductance = np.asarray(inductance, dtype=float)
    current = np.asarray(current, dtype=float)
    return 0.5 * inductance * current * current
