"""Predictions from geometry: each number follows from the published method named beside it."""

from __future__ import annotations

import dataclasses
import math

import pytest

from acquire.coil import (
    DEMO_COIL,
    CoilGeometry,
    awg_diameter,
    dc_resistance,
    layered_turns,
    loop_sum_inductance,
    medhurst_capacitance,
    predict,
    solenoid_inductance,
    wheeler_multilayer_inductance,
)
from acquire.errors import ModelError


def test_demo_coil_prediction_uses_the_named_methods():
    p = predict(DEMO_COIL)
    d = awg_diameter(30)
    diameter = 0.030 + d
    assert p.inductance == pytest.approx(solenoid_inductance(150, diameter, 0.045, d), rel=1e-12)
    assert p.capacitance == pytest.approx(medhurst_capacitance(diameter, 0.045), rel=1e-12)
    assert p.self_resonance == pytest.approx(
        1 / (2 * math.pi * math.sqrt(p.inductance * p.capacitance)), rel=1e-12
    )
    helix = 150 * math.hypot(math.pi * diameter, 0.045 / 150) + 0.100
    assert p.dc_resistance == pytest.approx(dc_resistance(helix, d, 23.0), rel=1e-12)
    # Every number carries its method, and accuracies where a method states one.
    for e in p.estimates:
        assert e.method
    assert p.get("L").accuracy == 0.005
    assert p.get("C").accuracy == 0.05  # Medhurst 1947: about 5 %


def test_demo_coil_orders_of_magnitude():
    # Long-solenoid formula µ0 N² A / l (common practice) bounds the current-sheet value above.
    p = predict(DEMO_COIL)
    upper = 4e-7 * math.pi * 150**2 * math.pi * (0.030 + awg_diameter(30)) ** 2 / 4 / 0.045
    assert 0.7 * upper < p.inductance < upper
    assert 1e-12 < p.capacitance < 2e-12
    assert 5e6 < p.self_resonance < 9e6


def test_ac_resistance_is_a_lower_bound_from_the_kelvin_solution():
    p = predict(DEMO_COIL, frequencies=(1e3, 1e6))
    low, high = p.get("Rac@1000"), p.get("Rac@1e+06")
    assert low.bound == high.bound == "at least"
    assert low.value == pytest.approx(p.dc_resistance, rel=1e-4)  # r/δ ≪ 1: R ≈ Rdc
    assert high.value > 1.2 * p.dc_resistance
    assert "δ =" in high.method


def test_multilayer_uses_turn_sum_and_wheeler_and_predicts_no_capacitance():
    g = CoilGeometry(
        turns=120, former_diameter=0.015, length=0.006, wire_diameter=0.5e-3, layers=10
    )
    p = predict(g)
    radii, positions = layered_turns(120, 10, 0.015, 0.006, 0.5e-3)
    assert p.inductance == pytest.approx(loop_sum_inductance(radii, positions, 0.5e-3))
    wheeler = p.get("L_wheeler")
    assert wheeler.value == pytest.approx(
        wheeler_multilayer_inductance(120, g.mean_diameter, 0.006, g.depth)
    )
    assert wheeler.value == pytest.approx(p.inductance, rel=0.02)  # Wheeler 1928: about 1 %
    assert p.capacitance is None and p.self_resonance is None
    assert "multilayer" in p.get("C").note


def test_shape_outside_medhurst_table_is_not_guessed():
    g = CoilGeometry(turns=5, former_diameter=0.1, length=0.005, wire_diameter=0.5e-3)
    p = predict(g)
    assert p.capacitance is None
    assert "not extrapolated" in p.get("C").note


def test_temperature_raises_resistance_by_the_iacs_coefficient():
    # IEC 60028 / IACS: 0.00393 /K at 20 °C.
    cold = predict(dataclasses.replace(DEMO_COIL, temperature=20.0)).dc_resistance
    hot = predict(dataclasses.replace(DEMO_COIL, temperature=70.0)).dc_resistance
    assert hot / cold == pytest.approx(1 + 0.00393 * 50, rel=1e-12)


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"length": 0.030}, "lengthen the winding or add layers"),
        ({"turns": 0}, "turns must be positive"),
        ({"layers": 2, "turns": 150.5}, "whole number of turns"),
        ({"lead_length": -1.0}, "lead length"),
        ({"wire_outer_diameter": 0.1e-3}, "thinner than the bare"),
    ],
)
def test_impossible_geometry_is_refused_with_advice(change, message):
    with pytest.raises(ModelError, match=message):
        predict(dataclasses.replace(DEMO_COIL, **change))


def test_text_and_table_show_method_and_accuracy():
    from rich.console import Console

    p = predict(DEMO_COIL)
    text = p.text()
    assert "Nagaoka" in text and "Medhurst" in text and "IEC 60028" in text
    assert "± 5.0 %" in text and "lower bound" in text
    console = Console(width=160, record=True)
    console.print(p.table())
    rendered = console.export_text()
    assert "345.0 µH" in rendered and "± 0.50 %" in rendered
