"""Medhurst's self-capacitance table and the self-resonant frequency."""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.coil import (
    MEDHURST_TABLE,
    medhurst_capacitance,
    medhurst_factor,
    self_resonant_frequency,
)
from acquire.errors import ModelError

# Medhurst, Wireless Engineer 24 (1947), pp. 35 and 80: H (pF/cm) at l/D, as reproduced in
# secondary sources (from memory; he claims about 5 %).
MEDHURST = [
    (0.1, 0.96), (0.2, 0.70), (0.3, 0.60), (0.5, 0.50), (0.8, 0.46), (1, 0.46), (2, 0.50),
    (3, 0.61), (5, 0.81), (10, 1.32), (20, 2.36), (50, 5.8),
]  # fmt: skip


@pytest.mark.parametrize(("ratio", "h"), MEDHURST)
def test_table_points_reproduce_medhurst(ratio, h):
    assert medhurst_factor(ratio) == pytest.approx(h, abs=1e-12)


def test_interpolation_stays_between_neighbouring_entries():
    ratios = np.array([r for r, _ in MEDHURST_TABLE])
    hs = np.array([h for _, h in MEDHURST_TABLE])
    mids = np.sqrt(ratios[:-1] * ratios[1:])
    values = medhurst_factor(mids)
    assert np.all(values >= np.minimum(hs[:-1], hs[1:]) - 1e-12)
    assert np.all(values <= np.maximum(hs[:-1], hs[1:]) + 1e-12)


def test_interpolation_from_twelve_entries_predicts_the_other_entries():
    # Held-out check: interpolating only the 12 entries above reproduces the rest of
    # Medhurst's table within his stated 5 %.
    from scipy.interpolate import PchipInterpolator

    sub = PchipInterpolator(np.log([r for r, _ in MEDHURST]), [h for _, h in MEDHURST])
    for ratio, h in MEDHURST_TABLE:
        assert float(sub(math.log(ratio))) == pytest.approx(h, rel=0.05)


def test_capacitance_is_h_times_diameter_in_cm():
    # Medhurst 1947: C = H·D pF with D in cm; D = 3 cm, l/D = 1 gives 0.46 × 3 = 1.38 pF.
    assert medhurst_capacitance(0.03, 0.03) == pytest.approx(1.38e-12, rel=1e-12)


@pytest.mark.parametrize("ratio", [0.05, 60.0])
def test_refuses_to_extrapolate(ratio):
    with pytest.raises(ModelError, match="not extrapolated"):
        medhurst_factor(ratio)


def test_self_resonance_formula():
    # f = 1/(2π√(LC)) (Thomson's formula): 1 µH with 1 nF resonates at 5.0329 MHz.
    assert self_resonant_frequency(1e-6, 1e-9) == pytest.approx(5.0329212e6, rel=1e-7)
