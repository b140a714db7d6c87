"""The Jacobian propagation through the open/short/load correction, checked three ways.

- Its derivatives against central differences of the correction itself (computed).
- A product/quotient of independent inputs against the GUM's rule for relative uncertainties
  (JCGM 100:2008 5.1.6, eq. (12)).
- Against a Monte Carlo propagation of distributions (JCGM 101:2008, 7.2 to 7.6: draw the
  inputs, evaluate the model, take the standard deviation of the outputs) with 10^5 draws, on
  fixtures built from the simulator's physics: where the model is nearly linear they agree
  within 5 % per standard uncertainty (JCGM 101:2008 8: the linear result is valid when it
  agrees with Monte Carlo to the tolerance needed); near the open, where the correction
  divides by a small ``Zo − Zm``, they part, and that is asserted too.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.compensation import ReferenceSet, formulas
from acquire.uncertainty import propagate, sensitivities
from drivers.simulator import physics

METHODS = {
    "open-short-load": ("zo", "zs", "zl"),
    "open-short": ("zo", "zs"),
    "open": ("zo",),
    "short-load": ("zs", "zl"),
    "short": ("zs",),
    "open-load": ("zo", "zl"),
    "load": ("zl",),
}
RNG_INPUTS = {
    "zm": 40.0 + 25.0j,
    "zo": 3.0 - 4000.0j,
    "zs": 0.05 + 0.6j,
    "zl": 101.0 + 2.0j,
    "zt": 100.0 + 0.3j,
}


def _apply(inputs: dict) -> np.ndarray:
    c = formulas.correction(inputs.get("zo"), inputs.get("zs"), inputs.get("zl"), inputs.get("zt"))
    return c.apply(inputs["zm"])


@pytest.mark.parametrize("method", METHODS)
def test_derivatives_match_central_differences(method):
    """Computed: (F(w + h) − F(w − h))/(2h) along the real and the imaginary axis."""
    names = ("zm", *METHODS[method]) + (("zt",) if "zl" in METHODS[method] else ())
    inputs = {n: np.array([RNG_INPUTS[n]]) for n in names}
    grads = sensitivities(**inputs)
    assert set(grads) == set(names)
    for name in names:
        for step in (1e-6, 1e-6j):
            h = step * max(1.0, abs(RNG_INPUTS[name]))
            up = dict(inputs, **{name: inputs[name] + h})
            down = dict(inputs, **{name: inputs[name] - h})
            numeric = (_apply(up) - _apply(down)) / (2 * h)
            np.testing.assert_allclose(grads[name], numeric, rtol=1e-6, atol=1e-12)


def test_result_is_the_correction_of_the_reference_set():
    """propagate returns what ReferenceSet.correct returns, for the same standards."""
    f = np.array([1e3, 1e4])
    refs = ReferenceSet(
        frequency=f,
        open=np.full(2, RNG_INPUTS["zo"]),
        short=np.full(2, RNG_INPUTS["zs"]),
        load=np.full(2, RNG_INPUTS["zl"]),
        load_true=RNG_INPUTS["zt"],
    )
    zm = np.array([RNG_INPUTS["zm"], 7.0 - 2.0j])
    zx, cov = propagate(zm, 0.01, refs.open, 0.0, refs.short, 0.0, refs.load, 0.0, refs.load_true)
    np.testing.assert_allclose(zx, refs.correct(f, zm), rtol=1e-14)
    assert cov.shape == (2, 2, 2)


def test_product_and_quotient_follow_the_relative_rule():
    """JCGM 100:2008 5.1.6, eq. (12): for Y = X1·X2/X3 of independent inputs,
    (u(y)/y)² = Σ (u(x_i)/x_i)². The load method is Zx = Zm·Zt/Zl; real inputs with
    uncertain real parts only."""
    zm, zt, zl = 250.0, 100.0, 98.0
    rel = {"zm": 2e-3, "zt": 5e-4, "zl": 1e-3}
    u = {k: np.array([[v * x, 0.0]]) for (k, v), x in zip(rel.items(), (zm, zt, zl), strict=True)}
    zx, cov = propagate(
        np.array([zm]), u["zm"], zl=np.array([zl]), u_l=u["zl"], zt=np.array([zt]), u_t=u["zt"]
    )
    expected = zx.real[0] * np.sqrt(sum(v * v for v in rel.values()))
    assert np.sqrt(cov[0, 0, 0]) == pytest.approx(expected, rel=1e-9)
    assert cov[0, 1, 1] == pytest.approx(0.0, abs=1e-20)


# -- Monte Carlo (JCGM 101:2008) --------------------------------------------------------------


def _seen(f, fixture: dict, z_dut):
    abcd = physics.fixture_abcd(np.array([f]), **fixture)
    return physics.input_impedance(abcd, np.array([z_dut]))[0]


BENCH = {
    "series_resistance": 0.02,
    "series_inductance": 0.3e-6,
    "shunt_capacitance": 8e-12,
    "shunt_conductance": 1e-9,
}
CABLE = dict(BENCH, line=(50.0, 1.0, 0.66))
SHORT_LEADS = {"series_resistance": 0.02, "series_inductance": 0.3e-6}
LOAD = 100.0 + 1j * 2 * np.pi * 5e-9  # at 1 Hz; scaled below


def _covariance(z, relative: float, skew: bool) -> np.ndarray:
    """A reading's covariance: ``relative·|z|`` per part; ``skew`` makes it non-circular
    (X three times as uncertain as R, correlation 0.5)."""
    s = relative * abs(z)
    if not skew:
        return np.diag([s * s, s * s])
    sr, sx = s, 3 * s
    return np.array([[sr * sr, 0.5 * sr * sx], [0.5 * sr * sx, sx * sx]])


def _case(f, fixture, z_dut, method, relative=1e-3, skew=False):
    """Inputs (means and covariances) for one frequency, readings from the fixture model."""
    zt = 100.0 + 1j * 2 * np.pi * f * 5e-9
    means = {"zm": _seen(f, fixture, z_dut)}
    if "zo" in METHODS[method]:
        means["zo"] = _seen(f, fixture, np.inf)
    if "zs" in METHODS[method]:
        means["zs"] = _seen(f, fixture, 0.0)
    if "zl" in METHODS[method]:
        means["zl"] = _seen(f, fixture, zt)
        means["zt"] = zt
    covs = {k: _covariance(v, relative, skew and k in ("zm", "zo")) for k, v in means.items()}
    return means, covs


def _linear(means, covs):
    args = {k: np.array([v]) for k, v in means.items()}
    u = {f"u_{k[1]}": covs[k][None] for k in means}
    zx, cov = propagate(args.pop("zm"), **u, **args)
    return zx[0], cov[0]


def _monte_carlo(means, covs, draws=100_000, seed=1):
    rng = np.random.default_rng(seed)
    sample = {}
    for k, m in means.items():
        parts = rng.multivariate_normal([m.real, m.imag], covs[k], size=draws)
        sample[k] = parts[:, 0] + 1j * parts[:, 1]
    return _apply(sample)


LINEAR_CASES = [
    # (label, f, fixture, DUT impedance, method, skew)
    (
        "short leads, air-core coil",
        1e4,
        SHORT_LEADS,
        physics.coil_impedance(1e4, 10e-6, 0.05),
        "short",
        False,
    ),
    (
        "L section, demo coil",
        1e5,
        BENCH,
        physics.coil_impedance(1e5, 344e-6, 4.95, 1.46e-12),
        "open-short",
        True,
    ),
    ("L section, 100 ohm", 1e6, BENCH, 100.0 + 0j, "open-short-load", True),
    (
        "cable, air-core coil",
        5e6,
        CABLE,
        physics.coil_impedance(5e6, 10e-6, 0.05, 2e-12),
        "open-short-load",
        False,
    ),
    ("cable, 1 kohm", 2e6, CABLE, 1000.0 + 0j, "open-short-load", True),
    ("short-load, 10 ohm", 1e3, SHORT_LEADS, 10.0 + 0j, "short-load", False),
]


@pytest.mark.parametrize("case", LINEAR_CASES, ids=[c[0] for c in LINEAR_CASES])
def test_linear_propagation_agrees_with_monte_carlo(case):
    _, f, fixture, z_dut, method, skew = case
    means, covs = _case(f, fixture, complex(z_dut), method, skew=skew)
    zx, cov = _linear(means, covs)
    mc = _monte_carlo(means, covs)
    assert zx == pytest.approx(complex(z_dut), rel=1e-9)  # the fixture model is exact here
    for part, i in ((mc.real, 0), (mc.imag, 1)):
        assert np.std(part) == pytest.approx(np.sqrt(cov[i, i]), rel=0.05)
    corr_mc = np.corrcoef(mc.real, mc.imag)[0, 1]
    corr_lin = cov[0, 1] / np.sqrt(cov[0, 0] * cov[1, 1])
    assert corr_mc == pytest.approx(corr_lin, abs=0.05)


def test_non_circular_inputs_are_carried_as_they_are():
    """Computed: the same case taken as circular (the mean of the two variances) disagrees
    with Monte Carlo, while the full covariance agrees (test above)."""
    _, f, fixture, z_dut, method, _ = LINEAR_CASES[2]
    means, covs = _case(f, fixture, complex(z_dut), method, skew=True)
    mc = _monte_carlo(means, covs)
    circular = {k: np.eye(2) * np.trace(v) / 2 for k, v in covs.items()}
    _, cov = _linear(means, circular)
    ratios = [np.std(mc.real) / np.sqrt(cov[0, 0]), np.std(mc.imag) / np.sqrt(cov[1, 1])]
    assert max(abs(r - 1) for r in ratios) > 0.2


def test_near_the_open_linear_and_monte_carlo_part():
    """A 5 Mohm resistor behind the bench leads' 8 pF at 100 kHz (about 200 kohm): the reading is
    within 4 % of the open, the correction divides by ``Zo − Zm``, and with 1 % on each reading
    the model is far from linear over the spread. The Monte Carlo 95 % interval (JCGM 101:2008
    7.7, probabilistically symmetric) is then lopsided about the estimate, at least twice as
    long above it as below, where the linear interval ``y ± 2u`` is symmetric by construction."""
    r = 5e6
    means, covs = _case(1e5, BENCH, r + 0j, "open-short", relative=1e-2)
    zx, cov = _linear(means, covs)
    mc = _monte_carlo(means, covs)
    lo, hi = np.percentile(mc.real, [2.5, 97.5])
    assert (hi - zx.real) / (zx.real - lo) > 2.0
    assert abs((hi - lo) / 2 / (2 * np.sqrt(cov[0, 0])) - 1) > 0.05
    # and the same fixture, far from the open, still agrees
    means, covs = _case(1e5, BENCH, 2e3 + 0j, "open-short", relative=1e-2)
    _, cov = _linear(means, covs)
    mc = _monte_carlo(means, covs)
    assert np.std(mc.real) == pytest.approx(np.sqrt(cov[0, 0]), rel=0.05)
