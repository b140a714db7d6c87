"""Nagaoka's coefficient against Grover's table, the exact formula and two approximations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import ellipe, ellipk

from acquire.coil import nagaoka, nagaoka_lundin, nagaoka_wheeler
from acquire.errors import ModelError

# Grover, "Inductance Calculations" (1946), Table 36: D/l -> K.
GROVER_TABLE_36 = [(1.0, 0.688423), (2.0, 0.525510), (5.0, 0.319825), (10.0, 0.203324)]
# Values of Nagaoka's elliptic-integral formula (Nagaoka, J. Coll. Sci. Tokyo 27, 1909), computed
# outside this project (from memory); the quadrature test below checks the formula itself.
NAGAOKA_EXACT = [(0.1, 0.9588071), (0.2, 0.9200927), (0.5, 0.8181358)]


@pytest.mark.parametrize(("ratio", "expected"), GROVER_TABLE_36)
def test_nagaoka_matches_grover_table_36(ratio, expected):
    assert nagaoka(ratio) == pytest.approx(expected, abs=1.5e-6)


@pytest.mark.parametrize(("ratio", "expected"), NAGAOKA_EXACT)
def test_nagaoka_matches_exact_values(ratio, expected):
    assert nagaoka(ratio) == pytest.approx(expected, abs=1e-7)


def _complete_integrals_by_quadrature(k: float) -> tuple[float, float]:
    """K(k), E(k) by direct quadrature in terms of the modulus k (the textbook definition)."""
    first = quad(lambda t: 1.0 / math.sqrt(1.0 - (k * math.sin(t)) ** 2), 0, math.pi / 2)[0]
    second = quad(lambda t: math.sqrt(1.0 - (k * math.sin(t)) ** 2), 0, math.pi / 2)[0]
    return first, second


@pytest.mark.parametrize("ratio", [0.05, 0.3, 1.0, 3.0, 20.0])
def test_nagaoka_uses_parameter_not_modulus(ratio):
    # Independent assembly of Nagaoka's formula with K(k), E(k) integrated in the modulus k:
    # a mix-up of scipy's parameter m = k² with k would not survive this.
    k = ratio / math.sqrt(1 + ratio**2)
    kp = math.sqrt(1 - k**2)
    big_k, big_e = _complete_integrals_by_quadrature(k)
    expected = 4 / (3 * math.pi * kp) * ((kp**2 / k**2) * (big_k - big_e) + big_e - k)
    assert nagaoka(ratio) == pytest.approx(expected, rel=1e-10)


def test_passing_the_modulus_to_scipy_would_fail_grovers_table():
    # Guards the meaning of the checks above: the classic mistake (ellipk(k) instead of
    # ellipk(k**2)) is far outside Grover's value at D/l = 1 (Grover 1946, Table 36).
    k = 1 / math.sqrt(2)
    kp = k
    wrong = 4 / (3 * math.pi * kp) * ((kp**2 / k**2) * (ellipk(k) - ellipe(k)) + ellipe(k) - k)
    assert abs(wrong - 0.688423) > 0.1


@pytest.mark.parametrize("ratio", np.geomspace(0.01, 100, 41))
def test_lundin_agrees_with_exact_to_a_few_ppm(ratio):
    # Lundin, Proc. IEEE 1985: the closed form is within a few ppm of the exact coefficient.
    assert nagaoka_lundin(ratio) == pytest.approx(nagaoka(ratio), rel=5e-6)


@pytest.mark.parametrize("length_over_diameter", np.linspace(0.4, 3.0, 14))
def test_wheeler_within_one_percent_for_long_coils(length_over_diameter):
    # Wheeler, Proc. IRE 1928: about 1 % for l/D above 0.4.
    ratio = 1 / length_over_diameter
    assert nagaoka_wheeler(ratio) == pytest.approx(nagaoka(ratio), rel=0.011)


def test_series_and_elliptic_branches_join_smoothly():
    # The long-coil series 1 - 4x/(3π) + x²/8 - x⁴/64 (from memory) and the exact formula meet.
    below, above = nagaoka(np.array([0.01 * (1 - 1e-12), 0.01 * (1 + 1e-12)]))
    assert below == pytest.approx(above, rel=1e-12)


def test_very_short_coil_approaches_its_logarithmic_limit():
    # Short-coil limit K ≈ (2/(πx)) (ln 4x - 1/2) for x = D/l → ∞ (from memory; it is also the
    # leading term of Lundin's short-coil formula).
    x = 1e4
    assert nagaoka(x) == pytest.approx(2 / (math.pi * x) * (math.log(4 * x) - 0.5), rel=1e-6)


def test_coefficient_falls_monotonically_and_accepts_arrays():
    ratios = np.geomspace(1e-4, 1e4, 400)
    values = nagaoka(ratios)
    assert values.shape == ratios.shape
    assert np.all(np.diff(values) < 0)
    assert values[0] == pytest.approx(1.0, abs=1e-4)


@pytest.mark.parametrize("bad", [0.0, -1.0, float("nan"), float("inf")])
def test_refuses_impossible_shapes(bad):
    with pytest.raises(ModelError):
        nagaoka(bad)
