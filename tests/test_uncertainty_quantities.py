"""Uncertainty of the derived quantities and the beyond-accuracy flags.

Checks: the gradients against central differences of :func:`acquire.impedance.quantities`
(computed); the GUM's worked example of a simultaneous resistance and reactance measurement
(JCGM 100:2008 H.2, approach 1, table H.4: from u(R) = 0.071 Ω, u(X) = 0.295 Ω and their
correlation −0.588 at R = 127.732 Ω, X = 219.847 Ω it gives u(Z) = 0.236 Ω; the phase is the
input φ = 1.04446 rad with u(φ) = 0.00075 rad, table H.2).
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.impedance import KEYS, quantities
from acquire.uncertainty import BEYOND_ACCURACY, beyond_accuracy, point_flags, quantity_uncertainty


def _numeric_u(f, z, cov, name):
    """Computed: 2·√(gᵀVg) with g from central differences of acquire.impedance.quantities."""
    g = []
    for step in (1e-7, 1e-7j):
        h = step * abs(z)
        up = quantities(np.array([f]), np.array([z + h]))[name][0]
        down = quantities(np.array([f]), np.array([z - h]))[name][0]
        g.append((up - down) / (2 * abs(h)))
    g = np.array(g)
    return 2 * np.sqrt(g @ cov @ g)


@pytest.mark.parametrize("z", [3.0 + 40.0j, 12.0 - 5.0j, 0.4 + 0.01j])
def test_every_quantity_matches_its_numerical_gradient(z):
    f = 1.0e5
    cov = np.array([[0.04, 0.01], [0.01, 0.09]]) * abs(z) * 1e-3
    got = quantity_uncertainty(np.array([f]), np.array([z]), cov[None], KEYS)
    for name in KEYS:
        assert got[name][0] == pytest.approx(_numeric_u(f, z, cov, name), rel=1e-5), name


def test_gum_example_h2_impedance_and_phase():
    r, x = 127.732, 219.847
    ur, ux, rho = 0.071, 0.295, -0.588
    cov = np.array([[ur * ur, rho * ur * ux], [rho * ur * ux, ux * ux]])
    f = 1.0e3  # any: neither |Z| nor theta depends on it
    got = quantity_uncertainty(np.array([f]), np.array([r + 1j * x]), cov[None], ("Z", "theta"))
    assert got["Z"][0] / 2 == pytest.approx(0.236, abs=0.0005)
    assert np.radians(got["theta"][0] / 2) == pytest.approx(0.00075, abs=0.000005)


def test_beyond_accuracy_flags():
    f = np.full(3, 1e6)
    # a good coil point; a negative Rs far past its U; an Rs whose sign is unknown
    z = np.array([2.0 + 600.0j, -270.0 + 300.0j, 0.3 + 600.0j])
    cov = np.zeros((3, 2, 2))
    cov[:, 0, 0] = [0.01**2, 20.0**2, 0.5**2]
    cov[:, 1, 1] = [0.5**2, 20.0**2, 0.5**2]
    flags = beyond_accuracy(f, z, cov, ("Ls", "Rs", "Q"))
    assert flags["Rs"].tolist() == [False, True, True]
    assert flags["Q"].tolist() == [False, True, True]
    assert flags["Ls"].tolist() == [False, False, False]
    assert point_flags(f, z, cov).tolist() == ["", BEYOND_ACCURACY, BEYOND_ACCURACY]
    assert point_flags(f, z, cov, ("Ls",)).tolist() == ["", "", ""]


def test_non_finite_points_are_beyond_accuracy():
    f = np.array([1e3, 1e3])
    z = np.array([complex(np.inf, np.inf), 5.0 + 5.0j])
    cov = np.stack([np.full((2, 2), np.nan), np.eye(2) * 1e-4])
    assert point_flags(f, z, cov).tolist() == [BEYOND_ACCURACY, ""]
