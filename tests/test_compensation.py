"""Fixture compensation against outside references.

Sources named beside each check:
- scikit-rf's one-port calibration (``skrf.calibration.OnePort``, ideals from
  ``skrf.media.DefinedGammaZ0``, z0 = 50 ohm), with fixtures built from scikit-rf's own
  circuit elements;
- the one-port three-term error model as published by R. B. Marks, "Formulations of the basic
  vector network analyzer error model including switch terms", 50th ARFTG Conference Digest,
  1997 (the model Gm = e00 + e10e01*G/(1 - e11*G), quoted from memory and as cited in
  scikit-rf's OnePort docstring);
- two-port chain (ABCD) parameters of series and shunt elements: standard circuit theory, from
  memory;
- the 5.9 uH - 0.7 uH = 5.2 uH short compensation: common practice, no published source.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import skrf
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from acquire.compensation import ReferenceSet, correct_open_short, correct_open_short_load
from acquire.errors import CompensationError
from acquire.impedance import quantities

Z0 = 50.0
C0 = 299_792_458.0


def to_gamma(z):
    return (z - Z0) / (z + Z0)


def to_z(gamma):
    return Z0 * (1 + gamma) / (1 - gamma)


# --- scikit-rf OnePort -------------------------------------------------------------------------


def _skrf_bench(seed: int):
    """A random linear fixture built from scikit-rf elements: series R-L, a line, shunt C-G."""
    rng = np.random.default_rng(seed)
    f = np.logspace(3, math.log10(3e7), 201)
    freq = skrf.Frequency.from_f(f, unit="hz")
    media = skrf.media.DefinedGammaZ0(freq, z0=Z0, gamma=1j * 2 * np.pi * f / C0)
    fixture = (
        media.resistor(rng.uniform(0.01, 1.0))
        ** media.inductor(rng.uniform(5e-9, 200e-9))
        ** media.line(rng.uniform(0.05, 0.5), "m")
        ** media.shunt_capacitor(rng.uniform(2e-12, 30e-12))
        ** media.shunt_resistor(1 / rng.uniform(1e-9, 1e-6))
    )
    return f, media, fixture


DUTS = {
    "1 mohm": lambda w: np.full(w.shape, 1e-3 + 0j),
    "50 mohm + 10 nH": lambda w: 0.05 + 1j * w * 10e-9,
    "coil 0.5 ohm 10 uH": lambda w: 0.5 + 1j * w * 10e-6,
    "100 ohm": lambda w: np.full(w.shape, 100.0 + 0j),
    "1 Mohm || 1 pF": lambda w: 1 / (1e-6 + 1j * w * 1e-12),
    "10 Mohm": lambda w: np.full(w.shape, 1e7 + 0j),
}


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_open_short_load_matches_scikit_rf_one_port(seed):
    # Reference: scikit-rf OnePort with DefinedGammaZ0 ideals, z0 = 50 ohm; agreement 1e-9.
    f, media, fixture = _skrf_bench(seed)
    z_load = 100.0
    ideals = [media.open(), media.short(), media.load(to_gamma(z_load))]
    measured = [fixture**ideal for ideal in ideals]
    cal = skrf.calibration.OnePort(measured=measured, ideals=ideals)
    cal.run()
    zo, zs, zl = (to_z(m.s[:, 0, 0]) for m in measured)
    refs = ReferenceSet(f, open=zo, short=zs, load=zl, load_true=z_load)
    assert refs.method == "open-short-load"
    w = 2 * np.pi * f
    for name, make in DUTS.items():
        z_dut = make(w)
        reading = fixture ** media.load(to_gamma(z_dut))
        ours = refs.correct(f, to_z(reading.s[:, 0, 0]))
        theirs = to_z(cal.apply_cal(reading).s[:, 0, 0])
        np.testing.assert_allclose(ours, theirs, rtol=1e-9, atol=0, err_msg=name)
        np.testing.assert_allclose(ours, z_dut, rtol=1e-9, atol=0, err_msg=name)


# --- Marks three-term model ----------------------------------------------------------------------


@pytest.mark.parametrize("seed", range(5))
def test_open_short_load_is_the_three_term_bilinear_map(seed):
    # Marks (ARFTG 1997): Gm = e00 + e10e01*G/(1 - e11*G), inverted as
    # G = (Gm - e00)/(e10e01 + e11*(Gm - e00)). The open/short/load formula in impedance must be
    # the same map for any error terms, at any reading (not only at the standards).
    rng = np.random.default_rng(seed)

    def cplx(scale, size=None):
        return scale * (rng.normal(size=size) + 1j * rng.normal(size=size))

    e00, e11, e10e01 = cplx(0.1), cplx(0.1), 1 + cplx(0.2)

    def model(g):
        return e00 + e10e01 * g / (1 - e11 * g)

    z_true = 75.0 + 20j
    g_open, g_short, g_load = 1.0, -1.0, to_gamma(z_true)
    zo, zs, zl = (to_z(model(g)) for g in (g_open, g_short, g_load))
    readings = cplx(0.4, 50)  # arbitrary measured reflection coefficients
    ours = to_gamma(correct_open_short_load(to_z(readings), zo, zs, zl, z_true))
    marks = (readings - e00) / (e10e01 + e11 * (readings - e00))
    np.testing.assert_allclose(ours, marks, rtol=1e-11, atol=1e-12)


# --- common practice ------------------------------------------------------------------------------


def test_short_compensation_removes_lead_inductance():
    # Common practice, no published source: 5.9 uH read with 0.7 uH on the shorted leads
    # corrects to 5.2 uH by short compensation at 1 kHz.
    f = np.array([1e3])
    w = 2 * np.pi * f
    reading = 0.35 + 1j * w * 5.9e-6
    refs = ReferenceSet(f, short=0.05 + 1j * w * 0.7e-6)
    assert refs.method == "short"
    q = quantities(f, refs.correct(f, reading))
    assert q["Ls"][0] == pytest.approx(5.2e-6, rel=1e-12)
    assert q["Rs"][0] == pytest.approx(0.30, rel=1e-12)


# --- every method is exact for its own fixture model ---------------------------------------------


def _abcd(z_series=0.0, y_shunt=0.0, z_after=0.0):
    """Chain matrix of series Z, shunt Y, series Z (standard circuit theory, from memory)."""
    a = np.array([[1, z_series], [0, 1]], dtype=complex)
    b = np.array([[1, 0], [y_shunt, 1]], dtype=complex)
    c = np.array([[1, z_after], [0, 1]], dtype=complex)
    return a @ b @ c


def _read(m, z):
    """What a meter reads at port 1 with impedance ``z`` on port 2 (inf for an open)."""
    (a, b), (c, d) = m
    return a / c if np.isinf(z) else (a * z + b) / (c * z + d)


FIXTURE_MODELS = {
    # method: (chain matrix, gain) - a gain scales every reading, as an uncalibrated meter would.
    "open-short-load": (_abcd(0.3 + 2j, 1e-5 + 3e-4j, 0.1 + 1j), 1.02 - 0.01j),
    "open-short": (_abcd(0.3 + 2j, 1e-5 + 3e-4j), 1.0),
    "open": (_abcd(0.0, 1e-5 + 3e-4j), 1.0),
    "short-load": (_abcd(0.3 + 2j), 0.97 + 0.02j),
    "short": (_abcd(0.3 + 2j), 1.0),
    "open-load": (_abcd(0.0, 1e-5 + 3e-4j), 1.03 + 0.01j),
    "load": (_abcd(), 0.98 - 0.03j),
}


@pytest.mark.parametrize("method", list(FIXTURE_MODELS))
def test_each_method_is_exact_for_its_fixture_model(method):
    # Each method's assumption (formulas module table) as a chain matrix; it must invert exactly.
    m, gain = FIXTURE_MODELS[method]
    z_load = 120.0 - 5j
    standards = {"open": math.inf, "short": 0.0, "load": z_load}
    wanted = method.split("-")
    kw = {name: np.array([gain * _read(m, standards[name])]) for name in wanted}
    if "load" in wanted:
        kw["load_true"] = z_load
    refs = ReferenceSet(np.array([1e4]), **kw)
    assert refs.method == method
    for z in (0.02 + 0.5j, 10 + 30j, 2e3 - 100j):
        got = refs.correct([1e4], [gain * _read(m, z)])[0]
        assert got == pytest.approx(z, rel=1e-12)


def test_open_short_closed_form_is_the_l_section_inverse():
    # Series residual Zs then shunt Yo across the DUT (standard circuit theory, from memory):
    # Zm = Zs + 1/(Yo + 1/Zx).
    zs, yo, zx = 0.05 + 0.3j, 2e-6 + 4e-5j, 33 + 12j
    zm = zs + 1 / (yo + 1 / zx)
    zo = zs + 1 / yo
    assert correct_open_short(zm, zo, zs) == pytest.approx(zx, rel=1e-13)


def test_reference_set_without_standards_refuses_to_correct():
    refs = ReferenceSet([1e3])
    assert refs.method == "none"
    with pytest.raises(CompensationError, match="no open, short or load"):
        refs.correct([1e3], [1 + 1j])


def test_load_without_true_value_refuses_to_correct():
    refs = ReferenceSet([1e3], open=[1e6 - 1e6j], short=[0.01 + 0.01j], load=[100 + 1j])
    with pytest.raises(CompensationError, match="load_true"):
        refs.correct([1e3], [1 + 1j])
    assert refs.with_standard("load_true", 100.0).correct([1e3], [100 + 1j])[0] == pytest.approx(
        100.0, rel=1e-3
    )


def test_mismatched_reading_shape_refused():
    refs = ReferenceSet([1e3, 2e3], short=[0.1, 0.1])
    with pytest.raises(CompensationError, match="one frequency per reading"):
        refs.correct([1e3, 2e3], [1.0])


def test_spot_reading_keeps_its_shape():
    refs = ReferenceSet([1e3, 2e3], short=[0.1, 0.2])
    out = refs.correct(2e3, 1.2 + 0j)
    assert out.shape == () and complex(out) == pytest.approx(1.0)


# --- property: correction and the fixture's forward model ------------------------------------


def _log(lo, hi):
    return st.floats(lo, hi).map(lambda e: 10.0**e)


@settings(max_examples=80, deadline=None)
@given(
    f=_log(2, 7),
    r=_log(-3, 0),
    l_=_log(-9, -6),
    g=_log(-10, -6),
    c=_log(-12, -10),
    r2=_log(-3, -1),
    l2=_log(-9, -7),
    z_load=_log(1, 3),
    where=st.floats(0.0, 1.0),
    angle=st.floats(-1.5, 1.5),
)
def test_correction_inverts_any_linear_fixture(f, r, l_, g, c, r2, l2, z_load, where, angle):
    # A T-section fixture (series R-L, shunt G-C, series R-L) in chain parameters (standard
    # circuit theory, from memory); the DUT lies where the 10x rule calls the fixture harmless.
    w = 2 * math.pi * f
    m = _abcd(r + 1j * w * l_, g + 1j * w * c, r2 + 1j * w * l2)
    zo, zs, zl = _read(m, math.inf), _read(m, 0.0), _read(m, z_load)
    lo, hi = math.log10(10 * abs(zs)), math.log10(abs(zo) / 10)
    assume(hi > lo)
    z_dut = 10 ** (lo + where * (hi - lo)) * complex(math.cos(angle), math.sin(angle))
    zm = _read(m, z_dut)
    refs = ReferenceSet([f], open=[zo], short=[zs], load=[zl], load_true=z_load)
    assert refs.correct([f], [zm])[0] == pytest.approx(z_dut, rel=1e-9)
    # ...and the forward model the references imply gives back the reading.
    assert refs.expected_reading([f], [z_dut])[0] == pytest.approx(zm, rel=1e-9)


impedances = st.builds(
    lambda mag, ph: mag * complex(math.cos(ph), math.sin(ph)), _log(-2, 6), st.floats(-3.1, 3.1)
)


@settings(max_examples=80, deadline=None)
@given(zm=impedances, zs=impedances, zo=impedances, zl=impedances, zt=impedances)
def test_forward_model_undoes_the_correction(zm, zs, zo, zl, zt):
    # Whatever the standards, the map is bilinear and its inverse must return the reading.
    for a, b in ((zo, zs), (zl, zs), (zo, zl), (zo, zm)):
        assume(abs(a - b) > 1e-3 * max(abs(a), abs(b)))
    # A fixture's reading cannot lie far beyond its own open: there the inverse map is so
    # ill-conditioned (error grows as |zm| / |zo|) that float64 cannot meet 1e-9 in any form.
    assume(abs(zm) <= 1e3 * max(abs(zo), abs(zs), abs(zl)))
    # More precisely, rounding in Zx comes back through the inverse map multiplied by
    # |Zm - Zs||Zo - Zm|/|Zo - Zs| (the map's derivative times Zx, worked out from the bilinear
    # form), whatever the load: a large load does not make zm = 1e6, zs = 1, zo = 1.018
    # well conditioned. Beyond 1e5 times the readings float64 cannot give 1e-9 back.
    scale = max(abs(zm), abs(zs), abs(zo))
    assume(abs(zm - zs) * abs(zo - zm) < 1e5 * abs(zo - zs) * scale)
    refs = ReferenceSet([1e3], open=[zo], short=[zs], load=[zl], load_true=zt)
    zx = refs.correct([1e3], [zm])
    back = refs.expected_reading([1e3], zx)[0]
    assert abs(back - zm) <= 1e-9 * max(abs(zm), abs(zs), abs(zo))
