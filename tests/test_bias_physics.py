"""The pure physics of power chokes: stored energy, saturation current, resistance-method rise.

Check values are worked examples computed by hand from the published formulas named beside
each, and closed forms of a known curve.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.bias.energy import stored_energy
from acquire.bias.rated import SATURATION, TEMPERATURE_RISE, rated_current
from acquire.bias.resistance_rise import (
    current_for_rise,
    has_settled,
    settled_rise,
    temperature_rise,
    winding_temperature,
)
from acquire.bias.saturation import DropCurrent, drop_currents, interpolation_bound
from acquire.errors import BiasError


def test_stored_energy_worked_example():
    # W = ½·L·I² (energy of a linear inductor's field; textbook formula, from memory):
    # 100 µH at 5 A: ½ · 1e-4 · 25 = 1.25e-3 J (computed).
    assert stored_energy(100e-6, 5.0) == pytest.approx(1.25e-3, rel=1e-15)
    # 2.2 mH at 3 A: ½ · 2.2e-3 · 9 = 9.9e-3 J (computed).
    assert stored_energy(2.2e-3, 3.0) == pytest.approx(9.9e-3, rel=1e-15)


def test_resistance_method_worked_example():
    # IEC 60076-2 resistance method, copper (234.5 °C; from memory):
    # T2 = R2/R1 · (234.5 + T1) − 234.5. With R1 = 0.500 Ω at 23.0 °C and R2 = 0.580 Ω:
    # 0.580/0.500 · 257.5 − 234.5 = 1.16 · 257.5 − 234.5 = 298.7 − 234.5 = 64.2 °C (computed),
    # a rise of 41.2 K above a 23.0 °C ambient.
    assert float(winding_temperature(0.580, 0.500, 23.0)) == pytest.approx(64.2, abs=1e-9)
    assert float(temperature_rise(0.580, 0.500, 23.0, 23.0)) == pytest.approx(41.2, abs=1e-9)
    # Copper's coefficient at 20 °C follows from the same constant: 1/(234.5 + 20) = 0.003929
    # /K, the 0.00393 /K of IEC 60028 (computed): 1 % more resistance is 2.545 K warmer.
    assert float(winding_temperature(1.01, 1.0, 20.0)) - 20.0 == pytest.approx(2.545, abs=1e-9)


def test_resistance_method_refuses_a_cold_resistance_of_zero():
    with pytest.raises(BiasError, match="cold resistance"):
        winding_temperature(1.0, 0.0, 20.0)


def test_settling_needs_a_full_window_and_a_small_change():
    t = np.linspace(0, 600, 61)
    rise = 40 * (1 - np.exp(-t / 60))  # first-order warming, τ = 60 s
    assert not has_settled(t[:5], rise[:5], window=60, tolerance=0.2)  # window not yet spanned
    assert not has_settled(t[:20], rise[:20], window=60, tolerance=0.2)  # still warming
    assert has_settled(t, rise, window=60, tolerance=0.2)  # 40·e^-9 ≈ 0.005 K left


def test_settling_looks_at_the_trend_not_the_noise():
    # A settled winding read with noise σ = 0.5 K (e.g. a low resistance near the meter's floor):
    # the readings spread over about ±1.5 K, yet their trend over the window is flat. The trend
    # of n readings has a standard deviation of σ·√(12/n)·(window/span) ≈ 0.5·√(12/121) = 0.16 K
    # (least-squares slope, computed), so a 0.5 K tolerance is three of them.
    rng = np.random.default_rng(3)
    t = np.linspace(0, 600, 241)
    flat = 40 + rng.normal(0, 0.5, t.size)
    assert np.ptp(flat[t >= 300]) > 2.0  # the spread alone would never settle
    assert has_settled(t, flat, window=300, tolerance=0.5)
    assert settled_rise(t, flat, window=300) == pytest.approx(40, abs=0.3)
    rising = flat + t / 120  # still warming by 2.5 K over the window
    assert not has_settled(t, rising, window=300, tolerance=0.5)


def test_current_for_rise_follows_the_square_law():
    # Heat I²R: a rise of 10 K at 2 A asks for 2·√(40/10) = 4 A for 40 K (computed).
    assert current_for_rise(2.0, 10.0, 40.0) == pytest.approx(4.0)


def saturating(i_sat: float, p: float):
    """r(I) = 1/(1 + (I/Is)^p), whose drop d is reached at Is·(d/(1−d))^(1/p) (closed form)."""
    return lambda i: 1.0 / (1.0 + (np.asarray(i) / i_sat) ** p)


@pytest.mark.parametrize("i_sat, p", [(4.0, 2.0), (3.5, 8.0), (5.0, 1.5)])
def test_drop_current_within_the_linear_interpolation_bound(i_sat, p):
    curve = saturating(i_sat, p)
    current = np.linspace(0, 6, 25)
    inductance = 47e-6 * curve(current)
    for found in drop_currents(current, inductance, [0.1, 0.2, 0.3]):
        exact = i_sat * (found.drop / (1 - found.drop)) ** (1 / p)
        if exact > current[-1]:
            assert not found.reached
            continue
        k = int(np.searchsorted(current, exact))
        bound = interpolation_bound(curve, current[k - 1], current[k])
        assert bound < 0.05  # the bound is not vacuous at a 0.25 A step
        assert abs(found.current - exact) <= bound * 1.0001 + 1e-12


def test_drop_current_agrees_with_numpy_inverse_interpolation():
    # numpy.interp on the inverse of a monotone piece is the same linear interpolation done by
    # an independent routine (numpy's reference implementation).
    rng = np.random.default_rng(5)
    for _ in range(50):
        current = np.concatenate([[0.0], np.sort(rng.uniform(0.05, 8, 30))])
        ratio = 1 / (1 + (current / rng.uniform(1, 6)) ** rng.uniform(1, 9))
        for found in drop_currents(current, 1e-4 * ratio, [0.1, 0.25]):
            if found.reached:
                expected = np.interp(1 - found.drop, ratio[::-1], current[::-1])
                assert found.current == pytest.approx(expected, rel=1e-12, abs=1e-15)


def test_a_drop_not_reached_is_above_the_largest_current_never_extrapolated():
    current = np.linspace(0, 6, 13)
    inductance = 1e-4 * saturating(20.0, 2.0)(current)  # drops only ~8 % by 6 A
    (found,) = drop_currents(current, inductance, [0.3])
    assert found == DropCurrent(0.3, None, 6.0)
    assert found.text() == "above 6 A"


def test_first_crossing_counts_when_the_curve_rises_again():
    current = np.array([0.0, 1.0, 2.0, 3.0, 4.0])
    inductance = np.array([100.0, 95.0, 85.0, 91.0, 70.0]) * 1e-6
    (found,) = drop_currents(current, inductance, [0.1])
    assert found.current == pytest.approx(1.5)  # 95 → 85 crosses 90 half way


@pytest.mark.parametrize(
    "current, inductance, message",
    [
        ([0.5, 1.0], [1e-4, 9e-5], "start at zero"),
        ([0.0, 1.0, 1.0], [1e-4, 9e-5, 8e-5], "increase"),
        ([0.0, 1.0], [1e-4, np.nan], "finite"),
        ([0.0], [1e-4], "at least two"),
        ([0.0, 1.0], [0.0, 1e-5], "positive"),
    ],
)
def test_unusable_curves_are_refused(current, inductance, message):
    with pytest.raises(BiasError, match=message):
        drop_currents(np.array(current), np.array(inductance), [0.1])


def test_rated_current_is_the_lower_of_the_two_and_names_it():
    sat = DropCurrent(0.2, 2.9, 6.0)
    by_sat = rated_current(sat, 3.4)
    assert (by_sat.current, by_sat.limited_by) == (2.9, SATURATION)
    by_heat = rated_current(sat, 2.1)
    assert (by_heat.current, by_heat.limited_by) == (2.1, TEMPERATURE_RISE)
    assert by_heat.text() == "2.1 A, limited by temperature rise"
    unknown = rated_current(DropCurrent(0.3, None, 6.0), 7.5)
    assert unknown.current is None and unknown.at_least == 6.0
    assert unknown.text() == "above 6 A, limited by saturation"
    heat_below = rated_current(DropCurrent(0.3, None, 6.0), 4.0)
    assert (heat_below.current, heat_below.limited_by) == (4.0, TEMPERATURE_RISE)
