"""Multilayer windings: Wheeler's formula, its stated accuracy, and the N² law."""

from __future__ import annotations

import pytest

from acquire.coil import (
    layered_turns,
    long_solenoid_inductance,
    loop_sum_inductance,
    wheeler_multilayer_inductance,
)
from acquire.coil.multilayer import wheeler_balance
from acquire.errors import ModelError


def test_wheeler_formula_in_its_original_units():
    # Wheeler 1928: L = 0.8 a²N²/(6a + 9l + 10c) µH with inches. a = 1 in, l = 1 in, c = 0.5 in,
    # N = 100: 0.8 × 10⁴ / 20 = 400 µH.
    inch = 0.0254
    value = wheeler_multilayer_inductance(100, 2 * inch, 1 * inch, 0.5 * inch)
    assert value == pytest.approx(400e-6, rel=1e-12)


def test_turns_squared_at_fixed_geometry():
    # Wheeler 1928: L ∝ N² for a winding of fixed shape (finer wire, more turns).
    one = wheeler_multilayer_inductance(200, 0.03, 0.01, 0.005)
    assert wheeler_multilayer_inductance(400, 0.03, 0.01, 0.005) == pytest.approx(4 * one)


def test_second_layer_quadruples_long_solenoid():
    # Common practice, no published source: doubling turns on the same length (a second layer)
    # quadruples µ0 N² A / l.
    one = long_solenoid_inductance(50, 0.010, 0.0505)
    assert long_solenoid_inductance(100, 0.010, 0.0505) == pytest.approx(4 * one, rel=1e-12)


def test_second_layer_roughly_quadruples_a_real_winding():
    # Turn-by-turn sum (Maxwell's coaxial-circle formula): a second layer of a long winding
    # almost quadruples L (slightly more, as the outer layer is larger).
    d = 0.5e-3
    r1, z1 = layered_turns(100, 1, 0.01, 0.05, d)
    r2, z2 = layered_turns(200, 2, 0.01, 0.05, d)
    ratio = loop_sum_inductance(r2, z2, d) / loop_sum_inductance(r1, z1, d)
    assert 3.9 < ratio < 4.4


@pytest.mark.parametrize(("layers", "per_layer"), [(12, 13), (10, 10), (6, 15)])
def test_wheeler_within_its_stated_accuracy_for_balanced_windings(layers, per_layer):
    # Wheeler 1928 states about 1 % when 6a, 9l and 10c are about equal; the reference is the
    # turn-by-turn sum with Maxwell's exact mutual inductance of coaxial circles.
    d = 0.5e-3
    inner = 0.02 - layers * d if layers == 12 else 0.02
    radii, positions = layered_turns(layers * per_layer, layers, inner, per_layer * d, d)
    mean = inner + layers * d
    assert wheeler_balance(mean, per_layer * d, layers * d) < 2.5
    reference = loop_sum_inductance(radii, positions, d)
    formula = wheeler_multilayer_inductance(layers * per_layer, mean, per_layer * d, layers * d)
    assert formula == pytest.approx(reference, rel=0.013)


def test_layered_turns_refuses_fractional_layers():
    with pytest.raises(ModelError):
        layered_turns(10, 1.5, 0.01, 0.01, 1e-3)
