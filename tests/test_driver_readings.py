"""Every reading pair a dialect may name turns into the right complex impedance.

The expected pair values are computed here from the impedance with the textbook definitions
of standard circuit theory (series and parallel equivalents of one impedance at one frequency,
Q = X/R and D = 1/Q; from memory, e.g. any circuits text's chapter on resonance and quality
factor), independently of drivers/readings.py, which does the inverse.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from drivers import readings

F = np.array([50.0, 1e3, 123456.7, 2e6])
# An inductive coil, a lossy capacitor, a nearly pure resistor, each at every frequency.
Z = np.array([2.0 + 6.3j, 0.8 - 1500.0j, 47.0 + 0.01j, 1e-3 + 5e4j])


def forward(f: np.ndarray, z: np.ndarray) -> dict[str, np.ndarray]:
    """The quantities a meter would report for impedance z at f, from first principles."""
    w = 2 * math.pi * f
    r, x = z.real, z.imag
    mag2 = r**2 + x**2
    g, b = r / mag2, -x / mag2  # Y = 1/Z = (R - jX)/|Z|^2
    return {
        "R": r,
        "X": x,
        "Z": np.sqrt(mag2),
        "theta_deg": np.degrees(np.arctan2(x, r)),
        "theta_rad": np.arctan2(x, r),
        "G": g,
        "B": b,
        "Ls": x / w,  # X = w Ls
        "Rs": r,
        "Cs": -1 / (w * x),  # X = -1/(w Cs)
        "Lp": -1 / (w * b),  # B = -1/(w Lp)
        "Rp": 1 / g,
        "Cp": b / w,  # B = w Cp
        "Q": x / r,
        "D": r / x,
    }


SIGNED = [
    ("R", "X"),
    ("Z", "theta_deg"),
    ("Z", "theta_rad"),
    ("G", "B"),
    ("Ls", "Rs"),
    ("Ls", "Q"),
    ("Ls", "D"),
    ("Lp", "Rp"),
    ("Lp", "Q"),
    ("Lp", "D"),
    ("Cs", "Rs"),
    ("Cs", "D"),
    ("Cs", "Q"),
    ("Cp", "Rp"),
    ("Cp", "D"),
    ("Cp", "Q"),
]


def test_every_supported_pair_is_covered_here():
    assert sorted(readings.supported_pairs()) == sorted(SIGNED)


@pytest.mark.parametrize("pair", SIGNED, ids=lambda p: ",".join(p))
def test_pair_converts_back_to_the_impedance(pair):
    f, z = np.meshgrid(F, Z)
    q = forward(f, z)
    got = readings.to_impedance(pair, f, q[pair[0]], q[pair[1]])
    np.testing.assert_allclose(got, z, rtol=1e-12)


@pytest.mark.parametrize("pair", SIGNED, ids=lambda p: ",".join(p))
def test_either_order_is_accepted(pair):
    q = forward(F, Z)
    swapped = readings.to_impedance(pair[::-1], F, q[pair[1]], q[pair[0]])
    np.testing.assert_allclose(swapped, Z, rtol=1e-12)


def test_by_mode_sign_makes_capacitor_d_positive():
    # A 100 nF capacitor with 1 ohm in series at 1 kHz: D = w Cs Rs (positive), the usual
    # definition for a capacitor (textbook, from memory).
    f, cs, rs = 1e3, 100e-9, 1.0
    w = 2 * math.pi * f
    z = rs - 1j / (w * cs)
    d_mode = w * cs * rs
    assert d_mode > 0
    got = readings.to_impedance(("Cs", "D"), f, cs, d_mode, qd_sign="by_mode")
    np.testing.assert_allclose(got, z, rtol=1e-12)
    # The same part in Cp,D: Y = G + jwCp, D = G/(w Cp) > 0.
    y = 1 / z
    cp, dp = y.imag / w, y.real / y.imag
    got = readings.to_impedance(("Cp", "D"), f, cp, dp, qd_sign="by_mode")
    np.testing.assert_allclose(got, z, rtol=1e-12)
    got = readings.to_impedance(("Cp", "Q"), f, cp, 1 / dp, qd_sign="by_mode")
    np.testing.assert_allclose(got, z, rtol=1e-12)
    # For an inductive pair both conventions agree: Q = w Ls / Rs.
    zl = 2 + 6.3j
    ls, ql = zl.imag / w, zl.imag / zl.real
    for sign in readings.QD_SIGNS:
        got = readings.to_impedance(("Ls", "Q"), f, ls, ql, qd_sign=sign)
        np.testing.assert_allclose(got, zl, rtol=1e-12)


def test_series_parallel_textbook_relations_hold_for_the_test_formulas():
    # Rp = Rs (1 + Q^2) and Lp = Ls (1 + 1/Q^2) (textbook series-parallel conversion, from
    # memory): checks the forward formulas this file relies on.
    q = forward(F, np.array([2.0 + 6.3j, 0.5 + 100j, 10 + 1j, 3 + 3j]))
    np.testing.assert_allclose(q["Rp"], q["Rs"] * (1 + q["Q"] ** 2), rtol=1e-12)
    np.testing.assert_allclose(q["Lp"], q["Ls"] * (1 + 1 / q["Q"] ** 2), rtol=1e-12)


@settings(max_examples=200, deadline=None)
@given(
    r=st.floats(1e-4, 1e7),
    x=st.floats(-1e7, 1e7).filter(lambda v: abs(v) > 1e-4),
    f=st.floats(10.0, 3e7),
)
def test_round_trip_for_any_passive_impedance(r, x, f):
    z = complex(r, x)
    q = forward(np.array(f), np.array(z))
    for pair in SIGNED:
        got = readings.to_impedance(pair, f, q[pair[0]], q[pair[1]])
        assert abs(got - z) <= 1e-9 * abs(z), pair


def test_overrange_and_invalid_markers():
    # SCPI-99: 9.9E37 means overrange, 9.91E37 not a number.
    first = np.array([1.0, 9.9e37, 2.0, 9.91e37, 9.9e37, np.float32(9.9e37)])
    second = np.array([2.0, 3.0, -9.9e37, 4.0, 9.91e37, 1.0])
    z = readings.to_impedance(("R", "X"), 1e3, first, second)
    assert z[0] == 1 + 2j
    for i in (1, 2, 5):
        assert z[i].real == math.inf and z[i].imag == math.inf
    for i in (3, 4):  # invalid wins over overrange
        assert math.isnan(z[i].real) and math.isnan(z[i].imag)


def test_large_values_near_the_markers_are_not_mistaken_for_them():
    z = readings.to_impedance(("R", "X"), 1e3, np.array([9.8e37, 9.95e37]), np.array([1.0, 1.0]))
    assert np.all(np.isfinite(z))


def test_flat_reply_and_shape_checks():
    q = forward(F, Z)
    flat = np.column_stack([q["Ls"], q["Q"]]).ravel()
    np.testing.assert_allclose(readings.from_flat(("Ls", "Q"), F, flat), Z, rtol=1e-12)
    with pytest.raises(ValueError, match="expected 8 numbers"):
        readings.from_flat(("Ls", "Q"), F, flat[:-1])
    with pytest.raises(ValueError, match="unsupported"):
        readings.to_impedance(("Ls", "Cs"), F, 1, 1)
