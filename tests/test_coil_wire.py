"""Wire gauges, copper resistivity, skin depth and the round-wire AC resistance ratio."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import jv

from acquire.coil import (
    COPPER_RESISTIVITY_20C,
    MU0,
    ac_resistance,
    ac_resistance_ratio,
    awg_diameter,
    copper_resistivity,
    dc_resistance,
    skin_depth,
)
from acquire.errors import ModelError

# ASTM B258: bare diameters in mm.
ASTM_B258 = [(24, 0.5106), (30, 0.2546), (36, 0.1270)]
# Skin depth in IACS copper at 20 °C (computed from δ = √(ρ/(π f µ0)), ρ = 1/58 Ω·mm²/m).
SKIN_DEPTHS = [(1e3, 2.0898e-3), (100e3, 0.20898e-3), (1e6, 66.085e-6)]
# Round-wire AC/DC resistance ratio at r/δ: the Bessel-function (Kelvin ber/bei) solution for an
# isolated round wire, computed outside this project (from memory).
AC_RATIOS = [(1.0, 1.020492), (2.0, 1.264643), (5.0, 2.768108), (10.0, 5.259302)]


@pytest.mark.parametrize(("gauge", "mm"), ASTM_B258)
def test_awg_diameters_match_astm_b258(gauge, mm):
    assert awg_diameter(gauge) * 1e3 == pytest.approx(mm, abs=5e-5)


def test_awg_definition_end_points_and_zero_gauges():
    # ASTM B258 definition: AWG 36 is 0.005 in and 0000 is 0.4600 in.
    assert awg_diameter(36) == pytest.approx(0.005 * 0.0254, rel=1e-12)
    assert awg_diameter("0000") == pytest.approx(0.4600 * 0.0254, rel=1e-4)
    assert awg_diameter("4/0") == awg_diameter(-3)
    assert awg_diameter("30") == awg_diameter(30)


@pytest.mark.parametrize("bad", [57, -4, "thirty", 30.5])
def test_awg_refuses_unknown_gauges(bad):
    with pytest.raises(ModelError):
        awg_diameter(bad)


def test_copper_resistivity_iacs():
    # IEC 60028: 1/58 Ω·mm²/m at 20 °C; 0.00393 /K (NBS Handbook 100; from memory).
    assert copper_resistivity(20.0) == pytest.approx(1 / 58 * 1e-6, rel=1e-12)
    assert copper_resistivity(70.0) == pytest.approx(1 / 58 * 1e-6 * (1 + 0.00393 * 50), rel=1e-12)
    with pytest.raises(ModelError):
        copper_resistivity(1000.0)


def test_dc_resistance_of_a_metre_of_awg_30():
    # IEC 60028 resistivity over the ASTM B258 area: ρ l / (π d²/4).
    d = awg_diameter(30)
    expected = 1 / 58 * 1e-6 / (math.pi * d**2 / 4)
    assert dc_resistance(1.0, d) == pytest.approx(expected, rel=1e-12)
    assert dc_resistance(1.0, d) == pytest.approx(0.3387, rel=1e-3)  # ≈ 338.7 mΩ/m (from memory)


@pytest.mark.parametrize(("frequency", "depth"), SKIN_DEPTHS)
def test_skin_depth_in_iacs_copper(frequency, depth):
    assert skin_depth(frequency) == pytest.approx(depth, rel=5e-5)


def test_skin_depth_scales_with_permeability_and_arrays():
    f = np.array([1e3, 4e3])
    depths = skin_depth(f, COPPER_RESISTIVITY_20C, 4.0)
    assert depths[0] == pytest.approx(2 * depths[1], rel=1e-12)
    assert depths[0] == pytest.approx(skin_depth(1e3) / 2, rel=1e-12)


@pytest.mark.parametrize(("x", "ratio"), AC_RATIOS)
def test_ac_ratio_matches_published_values(x, ratio):
    assert ac_resistance_ratio(x) == pytest.approx(ratio, abs=1.5e-6)


def _ratio_from_complex_bessel(x: float) -> float:
    """R_ac/R_dc = Re[(kr/2) J0(kr)/J1(kr)] with k = (1 − j)/δ (the textbook internal impedance)."""
    kr = (1 - 1j) * x
    return float(np.real(kr / 2 * jv(0, kr) / jv(1, kr)))


@pytest.mark.parametrize("x", [0.05, 0.3, 1.0, 3.0, 7.5, 20.0, 60.0, 200.0])
def test_kelvin_functions_agree_with_complex_bessel(x):
    # scipy's Bessel J of complex argument as an independent route to the same solution.
    assert ac_resistance_ratio(x) == pytest.approx(_ratio_from_complex_bessel(x), rel=1e-9)


def test_ac_ratio_published_asymptotes():
    # Low frequency: 1 + x⁴/48; high frequency: x/2 + 1/4 + 3/(32x) (the Bessel solution's
    # low- and high-frequency expansions, from memory).
    assert ac_resistance_ratio(0.1) == pytest.approx(1 + 0.1**4 / 48, rel=1e-9)
    for x in (30.0, 100.0, 1000.0):
        assert ac_resistance_ratio(x) == pytest.approx(x / 2 + 0.25 + 3 / (32 * x), rel=2e-7)


def test_ac_ratio_is_continuous_where_branches_meet():
    for edge in (0.01, 250.0):
        lo, hi = ac_resistance_ratio(np.array([edge * (1 - 1e-12), edge * (1 + 1e-12)]))
        assert lo == pytest.approx(hi, rel=1e-9)
    assert ac_resistance_ratio(0.0) == 1.0
    assert np.all(np.diff(ac_resistance_ratio(np.linspace(0, 500, 2001))) >= 0)


def test_ac_resistance_is_dc_times_ratio():
    d = awg_diameter(30)
    f = 1e6
    x = d / 2 / skin_depth(f, copper_resistivity(23.0))
    expected = dc_resistance(10.0, d, 23.0) * ac_resistance_ratio(x)
    assert ac_resistance(f, 10.0, d, 23.0) == pytest.approx(expected, rel=1e-12)


def test_mu0_is_the_classical_exact_value():
    # 4π·1e-7 H/m; CODATA 2018 differs by about 5.5e-10 relative (CODATA 2018: 1.25663706212e-6).
    classical = 4e-7 * math.pi
    assert classical == MU0
    assert abs(MU0 / 1.25663706212e-6 - 1) < 1e-9
