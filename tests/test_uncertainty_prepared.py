"""The vectorised propagation and the prepared per-chunk path against plain per-point algebra.

The law of propagation of uncertainty for correlated inputs in matrix form, ``V_y = J·V_x·Jᵀ``
(JCGM 100:2008 (GUM) 5.2.2 and its matrix form in JCGM 101:2008 / JCGM 102:2011 6.2.1.3, from
memory), is written here per point with 2×2 numpy matrices; the Jacobian ``J`` of each input
comes from central differences of the open/short/load formula (computed), not from the tool's
derivatives.
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.compensation import ReferenceSet, formulas
from acquire.sweep_uncertainty import PointUncertainty
from acquire.uncertainty import correct_with_uncertainty, propagate
from acquire.uncertainty.prepared import PreparedCorrection
from drivers.dialect import MeterAccuracy

ACC = MeterAccuracy(
    relative=0.001,
    low_impedance=0.2,
    high_impedance=1e7,
    frequency_corner=1e7,
    reference_level=0.5,
    repeatability=0.0005,
    speed_factors={"fast": 2.0, "medium": 1.0},
)


def _osl(zm, zo, zs, zl, zt):
    return zt * (zo - zl) * (zm - zs) / ((zl - zs) * (zo - zm))


def _random_cov(rng, scale):
    a = rng.normal(size=(2, 2)) * scale
    return a @ a.T  # symmetric, positive semi-definite, correlated parts


def _numeric_jacobian(values: dict, name: str) -> np.ndarray:
    """2×2 real Jacobian of (Re Zx, Im Zx) in (Re w, Im w) by central differences."""
    j = np.empty((2, 2))
    for col, step in enumerate((1.0, 1.0j)):
        h = 1e-6 * abs(values[name]) * step
        up = _osl(**dict(values, **{name: values[name] + h}))
        down = _osl(**dict(values, **{name: values[name] - h}))
        d = (up - down) / (2 * abs(h))
        j[:, col] = d.real, d.imag
    return j


@pytest.mark.parametrize("seed", range(40))
def test_propagation_equals_per_point_matrices(seed):
    rng = np.random.default_rng(seed)
    n = 5
    zo = rng.uniform(1, 10, n) - 1j * rng.uniform(1e3, 1e5, n)
    zs = rng.uniform(0.01, 0.1, n) + 1j * rng.uniform(0.1, 2, n)
    zl = rng.uniform(90, 110, n) + 1j * rng.uniform(-3, 3, n)
    zt = rng.uniform(99, 101, n) + 1j * rng.uniform(-0.5, 0.5, n)
    zm = rng.uniform(1, 50, n) + 1j * rng.uniform(10, 500, n)
    inputs = {"zm": zm, "zo": zo, "zs": zs, "zl": zl, "zt": zt}
    covs = {
        k: np.stack([_random_cov(rng, 1e-3 * abs(v[i])) for i in range(n)])
        for k, v in inputs.items()
    }
    zx, cov = propagate(
        zm, covs["zm"], zo, covs["zo"], zs, covs["zs"], zl, covs["zl"], zt, covs["zt"]
    )
    for i in range(n):
        point = {k: v[i] for k, v in inputs.items()}
        want = np.zeros((2, 2))
        for name in inputs:
            j = _numeric_jacobian(point, name)
            want += j @ covs[name][i] @ j.T
        scale = np.max(np.abs(want))
        np.testing.assert_allclose(cov[i], want, rtol=0, atol=1e-6 * scale)
    np.testing.assert_allclose(zx, formulas.correct_open_short_load(zm, zo, zs, zl, zt), rtol=1e-13)


class _Plain:
    """A reference set seen only through ``at`` (the general, unprepared path)."""

    def __init__(self, refs):
        self._refs = refs
        self.frequency = refs.frequency
        self.repeats = refs.repeats
        self.open_u, self.short_u, self.load_u = refs.open_u, refs.short_u, refs.load_u

    def at(self, f):
        return self._refs.at(f)


def _set(rng, load: bool, type_a: bool) -> ReferenceSet:
    grid = np.logspace(2, 7, 31)
    w = 2 * np.pi * grid
    zs = rng.uniform(0.01, 0.1) + 1j * w * rng.uniform(1e-8, 1e-7)
    zo = 1 / (rng.uniform(1e-9, 1e-7) + 1j * w * rng.uniform(2e-12, 1e-11)) + zs
    fields: dict = {"open": zo, "short": zs, "repeats": 3 if type_a else 1}
    if load:
        fields.update(load=(100 + 0.2j) + zs, load_true=100.0 + 0j)
    if type_a:
        fields.update(open_u=1e-4 * np.abs(zo), short_u=1e-4 * np.abs(zs) + 1e-5)
        if load:
            fields["load_u"] = np.full(grid.size, 0.01)
    return ReferenceSet(grid, **fields)


@pytest.mark.parametrize("seed", range(12))
def test_prepared_chunks_equal_the_general_path(seed):
    """A sweep's chunks through a prepared set equal correct_with_uncertainty on the set seen
    only through ``at`` (the standards' readings made there afresh for each chunk)."""
    rng = np.random.default_rng(seed)
    refs = _set(rng, load=bool(seed % 2), type_a=seed % 3 != 0)
    accuracy = None if seed % 4 == 3 else ACC
    settings = {"level": [None, 1.0][seed % 2], "speed": [None, "fast"][seed % 3 == 1]}
    prepared = PreparedCorrection(refs, accuracy, averaging=2, **settings)
    f = np.sort(rng.uniform(100.0, 1e7, 40))
    f[::7] = refs.frequency[rng.integers(0, 31, f[::7].size)]
    zm = rng.uniform(1, 20, 40) + 1j * rng.uniform(5, 900, 40)
    u_m = [None, rng.uniform(0, 0.1, 40), rng.uniform(0, 0.1, (40, 2))][seed % 3]
    for part in np.array_split(np.arange(40), [8, 20]):
        f_c, z_c = np.sort(f[part]), zm[part]
        u_c = None if u_m is None else u_m[part]
        zx, cov = prepared.correct(f_c, z_c, u_c)
        plain = correct_with_uncertainty(
            f_c, z_c, u_c, _Plain(refs), accuracy, averaging=2, **settings
        )
        np.testing.assert_allclose(zx, plain.z, rtol=1e-12)
        scale = np.max(np.abs(plain.cov), axis=(1, 2))[:, None, None]
        assert np.all(np.abs(cov - plain.cov) <= 1e-12 * scale)


def test_a_sweep_keeps_one_prepared_set_for_its_chunks():
    refs = _set(np.random.default_rng(0), load=True, type_a=True)
    u = PointUncertainty(accuracy=ACC)
    f = np.logspace(3, 6, 20)
    first = u.evaluate(f[:10], np.full(10, 5 + 50j), refs)
    kept = u.__dict__["_prepared"]
    u.evaluate(f[10:], np.full(10, 5 + 50j), refs)
    assert u.__dict__["_prepared"] is kept
    other = _set(np.random.default_rng(1), load=True, type_a=True)
    again = u.evaluate(f[:10], np.full(10, 5 + 50j), other)
    assert u.__dict__["_prepared"] is not kept
    assert not np.allclose(first.cov, again.cov)
