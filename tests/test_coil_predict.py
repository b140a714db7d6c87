"""Predictions from geometry: each number follows from the published method named beside it."""

from __future__ import annotations

import dataclasses
import math

import pytest

from acquire.coil import (
    DEMO_COIL,
    CoilGeometry,
    awg_diameter,
    layered_turns,
    loop_sum_inductance,
    predict,
    wheeler_multilayer_inductance,
)
from acquire.errors import ModelError


def test_demo_coil_prediction_against_independent_values():
    p = predict(DEMO_COIL)
    d = 0.005 * 0.0254 * 92 ** (6 / 39)  # AWG 30 by its ASTM B258 definition
    diameter = 0.030 + d
    # Rosa's method against a ring sum with Maxwell's formula, shown equal to Neumann's integral
    # in test_coil_solenoid (computed); the pitch is 1 % of the diameter.
    radii, positions = layered_turns(150, 1, 0.030, 0.045, d)
    assert p.inductance == pytest.approx(loop_sum_inductance(radii, positions, d), rel=5e-4)
    assert p.get("L").accuracy == 0.005
    # Medhurst 1947: C = H·D pF, D in cm; l/D = 1.49 lies between his entries 1.0 (H = 0.46) and
    # 1.5 (H = 0.47).
    assert 0.46 * diameter * 100e-12 <= p.capacitance <= 0.47 * diameter * 100e-12
    assert p.get("C").accuracy == 0.05  # Medhurst 1947: about 5 %
    # IEC 60028 / IACS: 1/58 Ω·mm²/m at 20 °C, 0.00393 /K; 150 turns of helix plus 100 mm leads.
    helix = 150 * math.hypot(math.pi * diameter, 0.045 / 150) + 0.100
    rho = 1e-6 / 58 * (1 + 0.00393 * 3)
    assert p.dc_resistance == pytest.approx(rho * helix / (math.pi * d * d / 4), rel=1e-9)
    for e in p.estimates:
        assert e.method


def test_self_resonance_claims_no_accuracy():
    # Medhurst measured C with tuning capacitance well below the coil's own resonance; a lumped
    # 1/(2π√(LC)) at the coil's own resonance has no published accuracy here.
    srf = predict(DEMO_COIL).get("SRF")
    assert srf.accuracy is None and srf.value is not None
    assert "transmission line" in srf.note


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


def test_multilayer_layer_count_must_match_the_turns():
    # By hand: 9 turns in 4 layers is ceil(9/4) = 3 per layer, which fills 3 layers; Wheeler's
    # formula with a 4-layer depth and mean diameter reads 1.7 % above the turn-by-turn sum of
    # the 3 layers actually wound (computed), while claiming about 1 %.
    g = CoilGeometry(turns=9, former_diameter=0.010, length=0.003, wire_diameter=1e-3, layers=4)
    with pytest.raises(ModelError, match="fill only 3 layers"):
        predict(g)


def test_multilayer_wheeler_by_hand_in_inches():
    # Wheeler 1928: L = 0.8 a²N²/(6a + 9l + 10c) µH, inches. 9 turns of 1 mm wire in 3 layers
    # on a 10 mm former, 3 mm long: a = (10 + 3)/2 mm, l = 3 mm, c = 3 mm.
    a, l, c = 6.5 / 25.4, 3 / 25.4, 3 / 25.4
    by_hand = 0.8 * a * a * 81 / (6 * a + 9 * l + 10 * c) * 1e-6
    g = CoilGeometry(turns=9, former_diameter=0.010, length=0.003, wire_diameter=1e-3, layers=3)
    assert predict(g).get("L_wheeler").value == pytest.approx(by_hand, rel=1e-12)


@pytest.mark.parametrize(
    ("change", "message"),
    [
        ({"former_diameter": 30.0, "length": 45.0}, "check the unit"),
        ({"former_diameter": 0.2e-3, "wire_diameter": 0.3e-3}, "thicker than the former"),
    ],
)
def test_implausible_geometry_is_refused(change, message):
    with pytest.raises(ModelError, match=message):
        predict(dataclasses.replace(DEMO_COIL, **change))


def test_text_and_table_show_method_and_accuracy():
    from rich.console import Console

    from acquire.coil.report import prediction_table, prediction_text

    p = predict(DEMO_COIL)
    text = prediction_text(p)
    assert "Nagaoka" in text and "Medhurst" in text and "IEC 60028" in text
    assert "lower bound" in text and "not stated" in text
    console = Console(width=160, record=True)
    console.print(prediction_table(p))
    rendered = console.export_text()
    # The demo coil, 150 turns of AWG 30 on 30 mm × 45 mm, is about 345 µH by the ring sum.
    assert "345." in rendered and "µH" in rendered and "± 0.5" in rendered


def _imports(path) -> set[str]:
    """Modules of acquire.coil that ``path`` imports anywhere, except under TYPE_CHECKING."""
    import ast

    tree = ast.parse(path.read_text())
    skipped = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            skipped |= {id(n) for child in node.body for n in ast.walk(child)}
    found = set()
    for node in ast.walk(tree):
        if id(node) in skipped:
            continue
        if isinstance(node, ast.ImportFrom) and (node.module or "").startswith("acquire.coil."):
            found.add(node.module.split(".")[2])
        elif isinstance(node, ast.Import):
            found |= {
                a.name.split(".")[2] for a in node.names if a.name.startswith("acquire.coil.")
            }
    return found


def test_coil_modules_import_each_other_without_a_circle():
    from pathlib import Path

    import acquire.coil

    folder = Path(acquire.coil.__file__).parent
    graph = {p.stem: _imports(p) for p in folder.glob("*.py") if p.stem != "__init__"}

    def visit(name, trail):
        assert name not in trail, f"import circle: {' -> '.join([*trail, name])}"
        for nxt in graph.get(name, ()):
            visit(nxt, [*trail, name])

    for name in graph:
        visit(name, [])
