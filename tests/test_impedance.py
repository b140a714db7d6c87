"""Series and parallel equivalents of a complex impedance.

Sources: the relations Z = R + jX, X_L = wL, X_C = -1/(wC), Y = 1/Z, Q = X/R, D = 1/Q and the
series-parallel conversions Rp = Rs(1 + Q^2), Lp = Ls(1 + 1/Q^2) are standard circuit theory,
from memory (the equivalence of a series and a parallel R-L at one frequency). Numbers quoted
beside a check are worked by hand from those relations.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acquire.errors import InputError
from acquire.impedance import (
    KEYS,
    parallel_rl_impedance,
    parallel_to_series,
    quantities,
    series_rl_impedance,
    series_to_parallel,
)

TWO_PI = 2 * math.pi


def test_keys_are_exactly_the_contract():
    q = quantities([1e3], [1 + 1j])
    assert tuple(q) == KEYS
    assert set(KEYS) == {"Ls", "Rs", "Cs", "Lp", "Rp", "Cp", "Q", "D", "Z", "theta", "X", "G", "B"}


def test_series_rl_gives_textbook_parallel_equivalent():
    # Standard circuit theory, from memory: Lp = Ls(1 + 1/Q^2), Rp = Rs(1 + Q^2), Q = wLs/Rs.
    # Chosen so that X = 10 ohm and Q = 10 exactly: Rp = 101 ohm, Lp = 1.01 Ls (worked by hand).
    ls, rs = 10e-6, 1.0
    f = 10.0 / (TWO_PI * ls)
    q = quantities(f, series_rl_impedance(f, rs, ls))
    assert q["Q"] == pytest.approx(10.0, rel=1e-12)
    assert q["Rp"] == pytest.approx(101.0, rel=1e-12)
    assert q["Lp"] == pytest.approx(1.01 * ls, rel=1e-12)
    assert q["Ls"] == pytest.approx(ls, rel=1e-12)
    assert q["Rs"] == pytest.approx(rs, rel=1e-12)
    assert q["D"] == pytest.approx(0.1, rel=1e-12)
    assert q["Z"] == pytest.approx(math.sqrt(101.0), rel=1e-12)
    assert q["theta"] == pytest.approx(math.degrees(math.atan(10.0)), rel=1e-12)


def test_series_rl_at_a_coil_frequency():
    # Standard circuit theory, from memory. 100 uH, 2 ohm at 100 kHz: Q = 2*pi*1e5*1e-4/2.
    f, ls, rs = 100e3, 100e-6, 2.0
    qf = TWO_PI * f * ls / rs
    q = quantities(f, series_rl_impedance(f, rs, ls))
    assert q["Q"] == pytest.approx(qf, rel=1e-12)
    assert q["Lp"] == pytest.approx(ls * (1 + 1 / qf**2), rel=1e-12)
    assert q["Rp"] == pytest.approx(rs * (1 + qf**2), rel=1e-12)
    assert q["Rp"] == pytest.approx(1975.92, abs=0.01)  # by hand: 2 * (1 + 31.4159^2)


def test_capacitor_reads_as_capacitance_with_signed_inductance():
    # Standard circuit theory, from memory: X_C = -1/(wC); 1 nF at 1 MHz is -j159.155 ohm.
    f, c = 1e6, 1e-9
    z = 1 / (1j * TWO_PI * f * c)
    q = quantities(f, z)
    assert q["X"] == pytest.approx(-159.1549, rel=1e-6)
    assert q["Cs"] == pytest.approx(c, rel=1e-12)
    assert q["Cp"] == pytest.approx(c, rel=1e-12)
    assert q["Ls"] < 0 and q["Lp"] < 0
    assert q["theta"] == pytest.approx(-90.0)
    assert q["Q"] == math.inf and q["D"] == 0.0
    assert q["Rp"] == math.inf and q["G"] == 0.0


def test_lossy_capacitor_has_positive_q():
    # Q = |X|/R for a capacitive part, D = 1/Q (the tool's documented convention).
    f, c, r = 1e3, 1e-6, 2.0
    z = r + 1 / (1j * TWO_PI * f * c)
    q = quantities(f, z)
    x = 1 / (TWO_PI * f * c)
    assert q["Q"] == pytest.approx(x / r, rel=1e-12)
    assert q["D"] == pytest.approx(r / x, rel=1e-12)
    assert q["Cs"] == pytest.approx(c, rel=1e-12)


def test_admittance_is_the_reciprocal():
    z = np.array([3 + 4j, 3 - 4j, 0.01 + 100j])
    q = quantities(np.full(3, 1e3), z)
    np.testing.assert_allclose(q["G"] + 1j * q["B"], 1 / z, rtol=1e-14)


def _quiet_quantities(f, z):
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        return quantities(f, z)


def test_special_values_follow_the_documented_rule():
    f = np.full(6, 1e3)
    z = np.array([3 + 0j, 2j, 0j, complex(math.inf, math.inf), complex(math.nan, math.nan), -3])
    q = _quiet_quantities(f, z)
    # X = 0: series capacitor and parallel inductor are infinite, Q = 0, D = inf.
    assert (q["Ls"][0], q["Cs"][0], q["Lp"][0], q["Cp"][0]) == (0.0, math.inf, math.inf, 0.0)
    assert (q["Q"][0], q["D"][0], q["Rp"][0]) == (0.0, math.inf, 3.0)
    # R = 0: parallel resistance infinite, Q infinite, D = 0.
    assert (q["Rp"][1], q["G"][1], q["Q"][1], q["D"][1]) == (math.inf, 0.0, math.inf, 0.0)
    # Z = 0: series values zero, parallel values NaN.
    assert (q["Rs"][2], q["Ls"][2], q["Z"][2], q["Cs"][2]) == (0.0, 0.0, 0.0, math.inf)
    for key in ("Rp", "Lp", "Cp", "G", "B", "Q", "D", "theta"):
        assert math.isnan(q[key][2]), key
    # Overrange: only |Z| survives, as infinity; invalid: everything NaN.
    assert q["Z"][3] == math.inf and math.isnan(q["Z"][4])
    for key in KEYS:
        if key != "Z":
            assert math.isnan(q[key][3]) and math.isnan(q[key][4]), key
    # A negative resistance (over-compensated reading) shows as negative D.
    assert q["D"][5] == -math.inf


def test_broadcast_and_shape():
    q = quantities(1e3, np.array([1 + 1j, 2 + 2j]))
    assert q["Ls"].shape == (2,)
    q = quantities(np.array([[1e3, 2e3]]), np.array([[1 + 1j, 1 + 1j]]))
    assert q["Q"].shape == (1, 2)


@pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf])
def test_bad_frequency_refused(bad):
    with pytest.raises(InputError):
        quantities([bad], [1 + 1j])


def test_mismatched_shapes_refused():
    with pytest.raises(InputError):
        quantities([1e3, 2e3, 3e3], [1 + 1j, 2j])


def test_conversion_edge_cases():
    # A lossless series inductor is the same inductor in parallel with an open resistor.
    rp, lp = series_to_parallel(1e3, 0.0, 1e-3)
    assert rp == math.inf and lp == pytest.approx(1e-3)
    rs, ls = parallel_to_series(1e3, math.inf, 1e-3)
    assert rs == 0.0 and ls == pytest.approx(1e-3)
    rs, ls = parallel_to_series(1e3, 0.0, 1e-3)
    assert (rs, ls) == (0.0, 0.0)
    assert parallel_rl_impedance(1e3, math.inf, 1e-3) == pytest.approx(1j * TWO_PI * 1e3 * 1e-3)


freqs = st.floats(1.0, 1e8)
resistances = st.floats(1e-4, 1e7)
inductances = st.floats(1e-10, 10.0)


@settings(max_examples=80, deadline=None)
@given(f=freqs, rs=resistances, ls=inductances)
def test_series_parallel_round_trip(f, rs, ls):
    rp, lp = series_to_parallel(f, rs, ls)
    back_rs, back_ls = parallel_to_series(f, rp, lp)
    assert back_rs == pytest.approx(rs, rel=1e-9)
    assert back_ls == pytest.approx(ls, rel=1e-9)
    # Both networks have one impedance at f (standard circuit theory, from memory).
    z_series = series_rl_impedance(f, rs, ls)
    z_parallel = parallel_rl_impedance(f, rp, lp)
    assert abs(z_parallel - z_series) <= 1e-9 * abs(z_series)


@settings(max_examples=80, deadline=None)
@given(f=freqs, rs=resistances, ls=inductances)
def test_quantities_agree_with_the_conversions(f, rs, ls):
    q = quantities(f, series_rl_impedance(f, rs, ls))
    rp, lp = series_to_parallel(f, rs, ls)
    assert q["Rs"] == pytest.approx(rs, rel=1e-9)
    assert q["Ls"] == pytest.approx(ls, rel=1e-9)
    assert q["Rp"] == pytest.approx(rp, rel=1e-9)
    assert q["Lp"] == pytest.approx(lp, rel=1e-9)
    assert q["Q"] * q["D"] == pytest.approx(1.0, rel=1e-12)
    # Q is the same for the series and the parallel view: |B|/G == |X|/R.
    assert abs(q["B"]) / q["G"] == pytest.approx(q["Q"], rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(f=freqs, rp=resistances, lp=inductances)
def test_parallel_rl_reads_back(f, rp, lp):
    q = quantities(f, parallel_rl_impedance(f, rp, lp))
    assert q["Rp"] == pytest.approx(rp, rel=1e-9)
    assert q["Lp"] == pytest.approx(lp, rel=1e-9)
    # Q of a parallel R-L is Rp/(w Lp) (standard circuit theory, from memory).
    assert q["Q"] == pytest.approx(rp / (TWO_PI * f * lp), rel=1e-9)
